"""The fixed-width path converts the fields of one column (x, y, z) together when they are laid out alike:
the values must be those of each token read alone, and anything unexpected still goes to the general path."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from basinmark.core.errors import TrajectoryFileError
from basinmark.core.io import atom_columns
from basinmark.core.io.xyz import _Column, _parse_fixed, parse_xyz

from tests.test_io_xyz_properties import fixed_width_numbers


@pytest.fixture
def joint_calls(monkeypatch):
    """The shapes of the byte matrices handed to the number conversion (3 x the lines: fields taken together)."""
    calls = []
    real = atom_columns._fixed_number

    def spy(cm, a, end, classes):
        calls.append(cm.shape[1])
        return real(cm, a, end, classes)

    monkeypatch.setattr(atom_columns, "_fixed_number", spy)
    return calls


@given(fixed_width_numbers(), st.randoms(use_true_random=False))
def test_fields_taken_together_give_each_token_correctly_rounded(texts, rnd):
    """Every x, y, z differs; the result equals Python's float() of each token (correctly rounded, IEEE 754)."""
    ys, zs = list(texts), list(texts)
    rnd.shuffle(ys)
    rnd.shuffle(zs)
    rows = list(zip(texts, ys, zs))
    block = "\n".join("O" + x + y + z for x, y, z in rows).encode()
    cols = [_Column("species", "S", 1, 0), _Column("pos", "R", 3, 1)]
    out = _parse_fixed(block, len(rows), cols)
    want = np.array([[float(t) for t in row] for row in rows])
    assert np.array_equal(out["pos"], want)
    assert np.array_equal(np.signbit(out["pos"]), np.signbit(want))


def _frames(lines: list[str], props: str) -> bytes:
    n = len(lines)
    return (f"{n}\nProperties={props} time=0.0\n" + "\n".join(lines) + "\n").encode()


def test_columns_are_converted_together_when_alike_and_one_by_one_when_not(joint_calls):
    alike = ["C  1.500000 -2.250000  0.125000", "H -0.500000  3.000000 -1.000000"]
    block = parse_xyz(_frames(alike, "species:S:1:pos:R:3"), "alike.xyz", dtype=np.float64)
    np.testing.assert_array_equal(block.positions[0], [[1.5, -2.25, 0.125], [-0.5, 3.0, -1.0]])
    assert joint_calls == [3 * 2]  # one conversion over the three fields of both lines
    joint_calls.clear()
    # y written with more decimals than x and z: the fields differ, each is converted on its own
    unlike = ["C  1.500000 -2.25000000  0.125000", "H -0.500000  3.00000000 -1.000000"]
    block = parse_xyz(_frames(unlike, "species:S:1:pos:R:3"), "unlike.xyz", dtype=np.float64)
    np.testing.assert_array_equal(block.positions[0], [[1.5, -2.25, 0.125], [-0.5, 3.0, -1.0]])
    assert joint_calls == [2, 2, 2]


def test_whole_number_columns_together_and_a_decimal_among_them_named_with_its_line():
    lines = ["C  0.500000  1.000000  2.000000   17   -4", "H  1.500000  2.000000  3.000000  -23    9"]
    block = parse_xyz(_frames(lines, "species:S:1:pos:R:3:tag:I:2"), "ints.xyz")
    np.testing.assert_array_equal(block.arrays["tag"][0], [[17, -4], [-23, 9]])
    assert block.arrays["tag"].dtype == np.int64
    bad = ["C  0.500000  1.000000  2.000000   17   -4", "H  1.500000  2.000000  3.000000  -23  9.5"]
    messages = []
    for fixed in (True, False):  # the fixed-width path gives up; the general path names file and line
        with pytest.raises(TrajectoryFileError) as err:
            parse_xyz(_frames(bad, "species:S:1:pos:R:3:tag:I:2"), "ints.xyz", fixed_width=fixed)
        messages.append(str(err.value))
    assert messages[0] == messages[1]
    assert "ints.xyz" in messages[0] and "line 4" in messages[0] and "9.5" in messages[0]
