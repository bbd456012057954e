"""Our XYZ / extended-XYZ reader against the reference library ase (ase.io.read and ase.io.write), and variants."""

from __future__ import annotations

import bz2
import gzip
import hashlib
import lzma

import ase.io
import numpy as np
import pytest
from ase import Atoms
from ase.calculators.singlepoint import SinglePointCalculator

from basinmark.core.io import FrameBlock, read_frames, reader_for, split_suffix
from basinmark.core.io.xyz import parse_xyz, read_xyz


def _frames(n_frames: int = 4, seed: int = 3) -> list[Atoms]:
    """A made-up 11-atom system with per-frame keys and two extra per-atom arrays."""
    rng = np.random.default_rng(seed)
    out = []
    for i in range(n_frames):
        a = Atoms("C3H4NClOBr", positions=rng.uniform(-12, 12, size=(11, 3)))
        a.info["time"] = -2.5 * i
        a.info["epot"] = float(rng.normal())
        a.info["ekin"] = float(rng.uniform())
        a.info["step"] = i
        a.info["tag"] = "half b"
        a.info["hot"] = bool(i % 2)
        a.arrays["charge"] = rng.normal(size=11)
        a.arrays["vel"] = rng.normal(size=(11, 3))
        out.append(a)
    return out


@pytest.fixture(params=[True, False], ids=["fixed-width", "general"])
def parse(request):
    """Run every check through both numeric paths."""
    def run(path, **kw):
        return parse_xyz(path.read_bytes(), path, fixed_width=request.param, **kw)
    return run


def test_plain_xyz_agrees_with_ase(tmp_path, parse):
    path = tmp_path / "plain.xyz"
    ase.io.write(path, _frames(), format="xyz")
    ref = ase.io.read(path, index=":")  # reference library
    block = parse(path, dtype=np.float64)
    np.testing.assert_allclose(block.positions, np.stack([a.positions for a in ref]), rtol=0, atol=1e-6)
    assert [list(a.get_chemical_symbols()) for a in ref] == [[s for s in "C C C H H H H N Cl O Br".split()]] * 4
    assert block.numbers.tolist() == ref[0].numbers.tolist()
    assert block.numbers.dtype == np.int16


def test_extended_xyz_agrees_with_ase(tmp_path, parse):
    path = tmp_path / "ext.extxyz"
    written = _frames()
    ase.io.write(path, written, format="extxyz")
    ref = ase.io.read(path, index=":")  # reference library
    block = parse(path, dtype=np.float64)
    np.testing.assert_allclose(block.positions, np.stack([a.positions for a in ref]), rtol=0, atol=1e-6)
    assert block.numbers.tolist() == ref[0].numbers.tolist()
    for key in ("time", "epot", "ekin", "step"):
        np.testing.assert_allclose(block.info[key], [a.info[key] for a in ref], rtol=1e-12, atol=0)
    assert block.text_info["tag"] == [a.info["tag"] for a in ref]
    assert block.text_info["hot"] == ["T" if a.info["hot"] else "F" for a in ref]
    # extra per-atom arrays against what was written (ase writes them with 8 decimals)
    np.testing.assert_allclose(block.arrays["charge"], np.stack([a.arrays["charge"] for a in written]), atol=1e-8)
    np.testing.assert_allclose(block.arrays["vel"], np.stack([a.arrays["vel"] for a in written]), atol=1e-8)
    assert block.arrays["vel"].shape == (4, 11, 3)
    assert "Properties" not in block.text_info and "pbc" not in block.text_info
    assert block.frame_lines.tolist() == [1, 14, 27, 40]


def test_calculator_energy_written_by_ase_is_a_numeric_key(tmp_path, parse):
    frames = _frames(2)
    for i, a in enumerate(frames):
        a.calc = SinglePointCalculator(a, energy=-3.0 - i, forces=np.ones((11, 3)) * i)
    path = tmp_path / "calc.extxyz"
    ase.io.write(path, frames, format="extxyz")
    ref = ase.io.read(path, index=":")
    block = parse(path, dtype=np.float64)
    np.testing.assert_allclose(block.info["energy"], [a.get_potential_energy() for a in ref])
    np.testing.assert_allclose(block.arrays["forces"], np.stack([a.get_forces() for a in ref]))


def test_default_dtype_is_float32_and_hash_is_of_stored_bytes(tmp_path):
    path = tmp_path / "run.xyz.gz"
    plain = tmp_path / "run.xyz"
    ase.io.write(plain, _frames(), format="extxyz")
    path.write_bytes(gzip.compress(plain.read_bytes()))
    block = read_frames(path)
    assert isinstance(block, FrameBlock) and block.positions.dtype == np.float32
    assert block.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()  # reference: hashlib
    assert block.path == path and block.warnings == []


@pytest.mark.parametrize("suffix,compress", [(".gz", gzip.compress), (".bz2", bz2.compress), (".xz", lzma.compress)])
def test_compressed_files_read_like_plain(tmp_path, suffix, compress):
    plain = tmp_path / "run.fwd.xyz"
    ase.io.write(plain, _frames(), format="extxyz")
    packed = tmp_path / f"run.fwd.xyz{suffix}"
    packed.write_bytes(compress(plain.read_bytes()))
    a, b = read_frames(plain), read_frames(packed)
    assert np.array_equal(a.positions, b.positions) and a.info.keys() == b.info.keys()


def test_compression_recognised_by_magic_bytes_not_only_suffix(tmp_path):
    plain = tmp_path / "a.xyz"
    ase.io.write(plain, _frames(2), format="extxyz")
    disguised = tmp_path / "b.xyz"
    disguised.write_bytes(gzip.compress(plain.read_bytes()))
    assert np.array_equal(read_frames(disguised).positions, read_frames(plain).positions)
    # and a file named .gz that is not compressed is read as text, with a note
    fake = tmp_path / "c.xyz.gz"
    fake.write_bytes(plain.read_bytes())
    block = read_frames(fake)
    assert np.array_equal(block.positions, read_frames(plain).positions)
    assert any("not" in w and "compressed" in w for w in block.warnings)


def test_concatenated_gzip_members(tmp_path):
    one = b"1\ntime=0\nH 0 0 0\n"
    two = b"1\ntime=1\nH 0 0 0.5\n"
    path = tmp_path / "cat.xyz.gz"
    path.write_bytes(gzip.compress(one) + gzip.compress(two))  # like `cat a.gz b.gz`
    block = read_frames(path)
    assert block.info["time"].tolist() == [0.0, 1.0]


def test_crlf_tabs_irregular_spacing_trailing_blank_lines(parse, tmp_path):
    text = (b"\r\n\r\n 2 \r\n time=5\tepot = -1.5  \r\n\tC \t 0.5   -1.25\t\t3\r\n"
            b"H 1   2 3   \r\n2\r\ntime=6\tepot=-1.0\r\nC 0.6 -1.2 3.1\r\nH 1.1 2 3\r\n\r\n  \r\n\t\r\n")
    path = tmp_path / "messy.xyz"
    path.write_bytes(text)
    block = parse(path, dtype=np.float64)
    assert block.positions.shape == (2, 2, 3)
    assert block.positions[0].tolist() == [[0.5, -1.25, 3.0], [1.0, 2.0, 3.0]]
    assert block.info["time"].tolist() == [5.0, 6.0] and block.info["epot"].tolist() == [-1.5, -1.0]
    assert block.frame_lines.tolist() == [3, 7]


def test_fortran_exponents_symbol_case_and_atomic_numbers(parse, tmp_path):
    text = (b"4\ntime=1.0D+01 epot=-2.5d-1\n"
            b"c   1.0D+00  -2.5d-1  3.0E+00\nCL  1.5D-01   0.0D0    1d1\n8   0.0 0.0 0.0\nh 1 1 1\n")
    path = tmp_path / "fortran.xyz"
    path.write_bytes(text)
    block = parse(path, dtype=np.float64)
    assert block.numbers.tolist() == [6, 17, 8, 1]
    # expected values: Python's float() of the same text with E exponents (IEEE 754 correctly rounded)
    assert block.positions[0, :2].tolist() == [[1.0, -0.25, 3.0], [float("1.5E-01"), 0.0, 10.0]]
    assert block.info["time"].tolist() == [10.0] and block.info["epot"].tolist() == [-0.25]


def test_fixed_width_exponent_columns(tmp_path):
    rng = np.random.default_rng(5)
    xyz = rng.normal(scale=3.0, size=(3, 5, 3))
    lines = []
    for f in range(3):
        lines += ["5", f"time={f}"]
        lines += [f"{'O' if i == 0 else 'H':<3}" + "".join(f"{v:20.11E}" for v in row)
                  for i, row in enumerate(xyz[f])]
    path = tmp_path / "fortran.xyz"
    path.write_text("\n".join(lines) + "\n")
    block = parse_xyz(path.read_bytes(), path, dtype=np.float64)
    tokens = np.array([[float(t) for t in ln.split()[1:]] for ln in lines if len(ln.split()) == 4])
    # reference: Python float() of each token (correctly rounded, IEEE 754)
    assert np.array_equal(block.positions.reshape(-1, 3), tokens)


def test_symbols_spelled_differently_between_frames_are_the_same_atoms(parse, tmp_path):
    path = tmp_path / "spell.xyz"
    path.write_bytes(b"2\n\nC 0 0 0\nCl 1 1 1\n2\n\nc 0 0 0\n17 1 1 1\n")
    assert parse(path).numbers.tolist() == [6, 17]


def test_free_text_comment_and_key_value_comment(parse, tmp_path):
    path = tmp_path / "c.xyz"
    path.write_bytes(b"1\nsnapshot taken after the barrier\nH 0 0 0\n1\nanother one\nH 0 0 1\n")
    block = parse(path)
    assert block.text_info == {"comment": ["snapshot taken after the barrier", "another one"]} and block.info == {}


def test_keys_that_change_between_frames(parse, tmp_path):
    path = tmp_path / "k.xyz"
    path.write_bytes(b'1\ntime=0 note="a b"\nH 0 0 0\n1\ntime=1 epot=-2 done\nH 0 0 1\n1\nepot=-3 note=x\nH 0 0 2\n')
    block = parse(path)
    np.testing.assert_array_equal(block.info["time"], [0, 1, np.nan])
    np.testing.assert_array_equal(block.info["epot"], [np.nan, -2, -3])
    assert block.text_info["note"] == ["a b", "", "x"] and block.text_info["done"] == ["", "T", ""]


def test_properties_anywhere_with_integer_logical_and_string_columns(parse, tmp_path):
    head = "Properties=id:I:1:flag:L:1:pos:R:3:label:S:1:species:S:1:q:R:1 time=0"
    rows = ["7 T 0.5 1.5 2.5 left C -0.1", "8 F -1.0 0.0 1.0 right H 0.2"]
    path = tmp_path / "p.extxyz"
    path.write_text("\n".join(["2", head, *rows, "2", head.replace("time=0", "time=1"), *rows]) + "\n")
    block = parse(path, dtype=np.float64)
    assert block.numbers.tolist() == [6, 1]
    assert block.positions[1].tolist() == [[0.5, 1.5, 2.5], [-1.0, 0.0, 1.0]]
    assert block.arrays["id"].tolist() == [[7, 8], [7, 8]] and block.arrays["id"].dtype == np.int64
    assert block.arrays["flag"].tolist() == [[True, False]] * 2
    assert block.arrays["label"].tolist() == [["left", "right"]] * 2
    assert block.arrays["q"].shape == (2, 2)


def test_registry_maps_suffixes():
    assert split_suffix("runs/r001.bwd.xyz.gz") == (".xyz", "gzip")
    assert split_suffix("a.extxyz.XZ") == (".extxyz", "xz")
    assert split_suffix("a.traj") == (".traj", None)
    assert reader_for("a.xyz.bz2") is read_xyz
    assert reader_for("a.traj").__module__.endswith("via_ase")


def test_ase_traj_goes_through_the_fallback(tmp_path):
    frames = _frames(3)
    for i, a in enumerate(frames):
        del a.info["epot"]
        a.calc = SinglePointCalculator(a, energy=-1.5 * i)
    path = tmp_path / "run.traj"
    ase.io.write(path, frames)  # ASE's own binary trajectory format
    block = read_frames(path, dtype=np.float64)
    ref = ase.io.read(path, index=":")
    np.testing.assert_allclose(block.positions, np.stack([a.positions for a in ref]))
    np.testing.assert_allclose(block.info["epot"], [0.0, -1.5, -3.0])
    assert block.info["time"].tolist() == [0.0, -2.5, -5.0]
    assert block.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()
    assert block.frame_lines.tolist() == [0, 0, 0]


def test_atomic_numbers_in_a_z_column_or_a_numeric_species_column(parse, tmp_path):
    path = tmp_path / "z.extxyz"
    path.write_text("2\nProperties=Z:I:1:pos:R:3\n8 0 0 0\n1 0 0 1\n")
    assert parse(path).numbers.tolist() == [8, 1]
    path.write_text("2\nProperties=species:I:1:pos:R:3\n8 0 0 0\n1 0 0 1\n")
    assert parse(path).numbers.tolist() == [8, 1]


def test_utf8_byte_order_mark_is_ignored(parse, tmp_path):
    path = tmp_path / "bom.xyz"
    path.write_bytes(b"\xef\xbb\xbf1\r\ntime=2\r\nH 0 0 1\r\n")
    block = parse(path)
    assert block.positions.tolist() == [[[0.0, 0.0, 1.0]]] and block.info["time"].tolist() == [2.0]
