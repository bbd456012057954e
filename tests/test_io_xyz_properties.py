"""Property-based round trips: random valid frames written by a small writer here (and by ase.io.write) read back."""

from __future__ import annotations

import io

import ase.io
import numpy as np
from ase import Atoms
from ase.data import atomic_numbers
from hypothesis import given, settings
from hypothesis import strategies as st

from basinmark.core.io.registry import FrameBlock
from basinmark.core.io.xyz import _Column, _parse_fixed, parse_xyz

ELEMENTS = ["H", "C", "N", "O", "Cl", "Br", "S", "Fe", "Cd", "Nd"]  # Cd/Nd: a 'd' that is not an exponent
WORDS = st.text(alphabet="abcgk", min_size=2, max_size=6)  # letters that cannot spell a number or T/F
KEYS = st.text(alphabet="abcgkmtu_", min_size=1, max_size=5).filter(lambda k: k[0] != "_")
COORD = st.floats(min_value=-5e3, max_value=5e3, allow_nan=False, allow_infinity=False)
SPACE = st.text(alphabet=" \t", min_size=1, max_size=3)


def spell(symbol: str, how: int) -> str:
    """The same element written four ways: as is, lower case, upper case, atomic number."""
    return [symbol, symbol.lower(), symbol.upper(), str(atomic_numbers[symbol])][how]


def number_text(x: float, style: int) -> str:
    if style == 0:
        return repr(x)  # shortest text that reads back exactly
    if style == 1:
        return f"{x:.12E}".replace("E", "D")  # Fortran double exponent
    return f"{x:.6f}"


@st.composite
def xyz_files(draw):
    n_atoms = draw(st.integers(1, 6))
    n_frames = draw(st.integers(1, 4))
    symbols = draw(st.lists(st.sampled_from(ELEMENTS), min_size=n_atoms, max_size=n_atoms))
    coords = draw(st.lists(st.lists(st.tuples(COORD, COORD, COORD), min_size=n_atoms, max_size=n_atoms),
                           min_size=n_frames, max_size=n_frames))
    keys = draw(st.lists(KEYS, unique=True, max_size=4))
    kinds = {k: draw(st.sampled_from(["num", "word"])) for k in keys}
    style = draw(st.integers(0, 2))
    eol = draw(st.sampled_from(["\n", "\r\n"]))
    lines, expect_pos, infos = [], [], []
    for f in range(n_frames):
        present = [k for k in keys if draw(st.booleans()) or f == 0]
        info = {k: (draw(COORD) if kinds[k] == "num" else draw(WORDS)) for k in present}
        infos.append(info)
        lines.append(draw(st.sampled_from(["", " ", "  "])) + str(n_atoms))
        lines.append(" ".join(f"{k}={v!r}" if kinds[k] == "num" else f"{k}={v}" for k, v in info.items()))
        frame = []
        for i in range(n_atoms):
            how = draw(st.integers(0, 3))
            texts = [number_text(x, style) for x in coords[f][i]]
            parts = [spell(symbols[i], how)] + texts
            lines.append(draw(st.sampled_from(["", " ", "\t"])) + "".join(p + draw(SPACE) for p in parts).rstrip())
            frame.append([float(t.replace("D", "E")) for t in texts])  # expected: Python float(), IEEE 754 rounding
        expect_pos.append(frame)
    text = eol.join(lines) + eol * draw(st.integers(0, 3))
    return text.encode(), symbols, np.array(expect_pos), keys, kinds, infos


def check(block: FrameBlock, symbols, expect_pos, keys, kinds, infos) -> None:
    assert block.numbers.tolist() == [atomic_numbers[s] for s in symbols]
    assert np.array_equal(block.positions, expect_pos)
    for k in keys:
        if kinds[k] == "num":
            want = np.array([info.get(k, np.nan) for info in infos])
            np.testing.assert_array_equal(block.info[k], want)
        else:
            assert block.text_info[k] == [info.get(k, "") for info in infos]


@given(xyz_files())
def test_random_files_from_our_writer_round_trip(case):
    data, *expected = case
    for fixed_width in (True, False):
        check(parse_xyz(data, "random.xyz", dtype=np.float64, fixed_width=fixed_width), *expected)


@st.composite
def fixed_width_numbers(draw):
    n = draw(st.integers(1, 40))
    decimals = draw(st.integers(0, 9))
    exponent = draw(st.booleans())
    # at most 15 significant digits (the exactness claim) and two-digit exponents (fixed width)
    finite = st.floats(min_value=-9e5, max_value=9e5, allow_nan=False).filter(lambda v: v == 0 or abs(v) > 1e-90)
    values = draw(st.lists(finite, min_size=n, max_size=n))
    if exponent:
        width = decimals + 10
        texts = [f"{v:{width}.{decimals}E}" for v in values]
    else:
        width = decimals + 9
        texts = [f"{v:{width}.{decimals}f}" for v in values]
    return texts


@given(fixed_width_numbers())
def test_fixed_width_conversion_equals_correctly_rounded_parse(texts):
    """Place-value arithmetic gives exactly what Python's float() (correctly rounded, IEEE 754) gives."""
    block = "\n".join("H" + t + t + t for t in texts).encode()
    cols = [_Column("species", "S", 1, 0), _Column("pos", "R", 3, 1)]
    out = _parse_fixed(block, len(texts), cols)  # must not fall back on regular fixed-width input
    want = np.array([[float(t)] * 3 for t in texts])
    assert np.array_equal(out["pos"], want)
    assert np.array_equal(np.signbit(out["pos"]), np.signbit(want))  # -0.0 keeps its sign, as float() does


def _atoms_frames(draw, n_frames, n_atoms):
    numbers = draw(st.lists(st.sampled_from([1, 6, 7, 8, 17]), min_size=n_atoms, max_size=n_atoms))
    frames = []
    for i in range(n_frames):
        pos = draw(st.lists(st.tuples(COORD, COORD, COORD), min_size=n_atoms, max_size=n_atoms))
        a = Atoms(numbers=numbers, positions=pos)
        a.info["time"] = draw(st.floats(-1e3, 1e3))
        a.info["epot"] = draw(st.floats(-1e2, 1e2))
        a.info["label"] = draw(WORDS)
        a.arrays["mass_like"] = np.array(draw(st.lists(st.floats(0, 50), min_size=n_atoms, max_size=n_atoms)))
        frames.append(a)
    return frames


@settings(max_examples=30, deadline=None)
@given(st.data(), st.integers(1, 4), st.integers(1, 6), st.sampled_from(["extxyz", "xyz"]))
def test_files_written_by_ase_round_trip(data, n_frames, n_atoms, fmt):
    frames = _atoms_frames(data.draw, n_frames, n_atoms)
    buf = io.StringIO()
    ase.io.write(buf, frames, format=fmt)  # reference writer
    raw = buf.getvalue().encode()
    for fixed_width in (True, False):
        block = parse_xyz(raw, f"ase.{fmt}", dtype=np.float64, fixed_width=fixed_width)
        assert block.numbers.tolist() == frames[0].numbers.tolist()
        np.testing.assert_allclose(block.positions, np.stack([a.positions for a in frames]), rtol=0, atol=1e-6)
        if fmt == "extxyz":
            ref = ase.io.read(io.StringIO(buf.getvalue()), index=":", format="extxyz")  # reference reader
            np.testing.assert_array_equal(block.info["time"], [a.info["time"] for a in ref])
            np.testing.assert_array_equal(block.info["epot"], [a.info["epot"] for a in ref])
            assert block.text_info["label"] == [a.info["label"] for a in ref]
            np.testing.assert_allclose(block.arrays["mass_like"], np.stack([a.arrays["mass_like"] for a in frames]),
                                       atol=1e-8)


SEED_FILES = [
    b"3\nProperties=species:S:1:pos:R:3:q:R:1 time=0.5 epot=-1.25 tag=\"a b\" pbc=\"F F F\"\n"
    b"C        0.10000000       1.50000000      -2.25000000       0.10000000\n"
    b"Cl      -1.00000000       0.00000000       3.50000000      -0.20000000\n"
    b"H        2.00000000      -0.50000000       0.75000000       0.30000000\n"
    b"3\nProperties=species:S:1:pos:R:3:q:R:1 time=1.0 epot=-1.20 tag=\"a b\" pbc=\"F F F\"\n"
    b"C        0.20000000       1.40000000      -2.15000000       0.10000000\n"
    b"Cl      -1.10000000       0.10000000       3.40000000      -0.20000000\n"
    b"H        2.10000000      -0.40000000       0.65000000       0.30000000\n",
    b"2\nstep 1\nO 0.0 0.0 0.0\nH 0.0 0.757 0.586\n2\nstep 2\nO 0.0 0.0 0.01\nH 0.0 0.75 0.59\n",
]


@settings(max_examples=150, deadline=None)
@given(st.sampled_from(SEED_FILES), st.lists(st.tuples(st.integers(0, 10_000), st.integers(0, 255),
                                                       st.sampled_from(["replace", "insert", "delete"])),
                                             min_size=1, max_size=4), st.booleans())
def test_damaged_files_give_our_error_or_a_result_never_a_crash(seed, edits, fixed_width):
    """Random byte edits of a valid file: the reader returns frames or raises TrajectoryFileError, nothing else."""
    import warnings

    from basinmark.core.errors import TrajectoryFileError

    data = bytearray(seed)
    for pos, byte, how in edits:
        pos %= len(data) + 1
        if how == "insert":
            data[pos:pos] = bytes([byte])
        elif pos < len(data):
            if how == "replace":
                data[pos] = byte
            else:
                del data[pos]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            block = parse_xyz(bytes(data), "damaged.xyz", fixed_width=fixed_width)
        except TrajectoryFileError as err:
            assert err.line is None or 1 <= err.line <= bytes(data).count(b"\n") + 1
            return
    assert block.positions.shape == (block.n_frames, block.n_atoms, 3) and block.n_frames >= 1
    assert np.isfinite(block.positions).all()
    assert block.numbers.shape == (block.n_atoms,) and (block.numbers >= 1).all()
    for values in block.info.values():
        assert values.shape == (block.n_frames,)
