"""Bad input: each case raises TrajectoryFileError naming the file and the 1-based line (or warns on a partial read)."""

from __future__ import annotations

import gzip
import warnings

import numpy as np
import pytest

from basinmark.core.errors import BasinmarkError, PartialReadWarning, TrajectoryFileError
from basinmark.core.io import read_frames
from basinmark.core.io.xyz import parse_xyz

GOOD = b"2\ntime=0\nC 0.0 0.0 0.0\nH 0.0 0.0 1.1\n2\ntime=1\nC 0.0 0.0 0.1\nH 0.0 0.0 1.2\n"

# (name, bytes, line, words that must appear in the message)
BAD = [
    ("empty", b"", None, ["empty"]),
    ("blank", b"\n  \n\t\n", None, ["empty"]),
    ("count-word", b"two\n\nC 0 0 0\n", 1, ["number of atoms", "'two'"]),
    ("count-float", b"2.0\n\nC 0 0 0\nH 0 0 1\n", 1, ["positive whole number"]),
    ("count-negative", b"-2\n\nC 0 0 0\nH 0 0 1\n", 1, ["positive whole number"]),
    ("count-zero", b"0\n\n", 1, ["at least one atom"]),
    ("count-too-small", b"2\n\nC 0 0 0\nH 0 0 1\nO 0 0 2\n2\n\nC 0 0 0\nH 0 0 1\n", 1,
     ["says 2 atoms", "more atom lines", "line 5"]),
    ("count-too-large", b"3\n\nC 0 0 0\nH 0 0 1\n3\n\nC 0 0 0\nH 0 0 1\nO 1 1 1\n", 1, ["says 3 atoms", "only 2",
                                                                                     "line 5"]),
    ("count-changes", GOOD + b"3\n\nC 0 0 0\nH 0 0 1\nO 1 1 1\n", 9, ["atom count changes", "frame 3", "3 atoms"]),
    ("second-count-garbage", b"1\n\nH 0 0 0\nxx\n\nH 0 0 0\n", 4, ["number of atoms", "'xx'"]),
    ("non-numeric", GOOD.replace(b"H 0.0 0.0 1.2", b"H 0.0 abc 1.2"), 8, ["y coordinate", "'abc'", "not a number"]),
    ("nan", GOOD.replace(b"C 0.0 0.0 0.1", b"C 0.0 0.0 nan"), 7, ["z coordinate", "not a finite number"]),
    ("inf", GOOD.replace(b"C 0.0 0.0 0.1", b"C -inf 0.0 0.1"), 7, ["x coordinate", "not a finite number"]),
    ("fortran-overflow", GOOD.replace(b"C 0.0 0.0 0.1", b"C 1.0D+999 0.0 0.1"), 7, ["not a finite number"]),
    ("unknown-element", GOOD.replace(b"H 0.0 0.0 1.1", b"Qx 0.0 0.0 1.1"), 4, ["'Qx'", "not an element"]),
    ("unknown-element-later", GOOD.replace(b"H 0.0 0.0 1.2", b"Zz 0.0 0.0 1.2"), 8, ["'Zz'", "not an element"]),
    ("bad-atomic-number", GOOD.replace(b"H 0.0 0.0 1.1", b"200 0.0 0.0 1.1"), 4, ["'200'"]),
    ("order-changes", GOOD.replace(b"C 0.0 0.0 0.1\nH", b"H 0.0 0.0 0.1\nC"), 7, ["element order changes", "atom 1",
                                                                                  "frame 2"]),
    ("missing-coordinate", GOOD.replace(b"H 0.0 0.0 1.2", b"H 0.0 1.2"), 8, ["3 values", "4 are expected"]),
    ("too-few-columns", b"1\n\nH 0 0\n", 3, ["3 values", "element and three coordinates"]),
    ("nul-byte", GOOD.replace(b"time=1", b"time=\x001"), 6, ["binary"]),
    ("not-utf8", GOOD.replace(b"time=1", b"name=\xe9t\xe9"), 6, ["not UTF-8", "0xe9"]),
    ("properties-bad", b"1\nProperties=species:S\nH 0 0 0\n", 2, ["Properties=", "not a valid column list"]),
    ("properties-no-pos", b"1\nProperties=species:S:1:xyz:R:3\nH 0 0 0\n", 2, ["no 'pos' column"]),
    ("properties-change", b"1\nProperties=species:S:1:pos:R:3\nH 0 0 0\n1\nProperties=species:S:1:pos:R:3:q:R:1\n"
     b"H 0 0 0 1\n", 5, ["frame 2", "different per-atom columns"]),
    ("only-partial-frame", b"3\n\nC 0 0 0\nH 0 0 1\n", 4, ["no complete frame", "2 of 3 atom lines"]),
    ("only-partial-line", b"2\n\nC 0 0 0\nH 0 0", 4, ["no complete frame", "cut short"]),
]


@pytest.mark.parametrize("fixed_width", [True, False], ids=["fixed-width", "general"])
@pytest.mark.parametrize("name,data,line,words", BAD, ids=[b[0] for b in BAD])
def test_bad_input_names_file_and_line(tmp_path, name, data, line, words, fixed_width):
    path = tmp_path / f"{name}.xyz"
    path.write_bytes(data)
    with pytest.raises(TrajectoryFileError) as info:
        parse_xyz(data, path, fixed_width=fixed_width)
    err = info.value
    assert isinstance(err, BasinmarkError)
    assert err.path == path and err.line == line, str(err)
    for w in words:
        assert w in err.problem, (w, err.problem)
    assert str(path) in str(err) and (line is None or f"line {line}" in str(err))
    # the public entry point gives the same error
    with pytest.raises(TrajectoryFileError) as again:
        read_frames(path)
    assert again.value.line == line


def test_bad_input_inside_gzip_reports_the_decompressed_line(tmp_path):
    path = tmp_path / "z.xyz.gz"
    path.write_bytes(gzip.compress(GOOD.replace(b"H 0.0 0.0 1.2", b"H 0.0 ? 1.2")))
    with pytest.raises(TrajectoryFileError) as info:
        read_frames(path)
    assert info.value.line == 8 and info.value.path == path


@pytest.mark.parametrize("tail,loaded,words", [
    (b"2\ntime=2\nC 0 0 0\n", 2, ["from line 9", "ends at line 11", "1 of 2 atom lines", "2 complete frames"]),
    (b"2\n", 2, ["from line 9", "0 of 2 atom lines"]),
    (b"2\ntime=2\nC 0 0 0\nH 0.0 0.0", 2, ["from line 9", "line 12", "cut short"]),
])
def test_truncated_last_frame_loads_complete_frames_with_warning(tmp_path, tail, loaded, words):
    path = tmp_path / "cut.xyz"
    path.write_bytes(GOOD + tail)
    with pytest.warns(PartialReadWarning) as record:
        block = read_frames(path)
    assert block.n_frames == loaded and block.info["time"].tolist() == [0.0, 1.0]
    assert len(block.warnings) == 1
    for w in words:
        assert w in block.warnings[0], (w, block.warnings[0])
    assert block.warnings[0] in str(record[0].message) and str(path) in str(record[0].message)


def test_complete_file_without_final_newline_is_not_truncated(tmp_path):
    path = tmp_path / "ok.xyz"
    path.write_bytes(GOOD.rstrip(b"\n"))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        block = read_frames(path)
    assert block.n_frames == 2 and block.warnings == []


def test_gzip_cut_short_loads_what_decompressed(tmp_path):
    frames = b"".join(b"1\ntime=%d\nH 0 0 %d.5\n" % (i, i) for i in range(2000))
    packed = gzip.compress(frames)
    path = tmp_path / "cut.xyz.gz"
    path.write_bytes(packed[: len(packed) // 2])
    with pytest.warns(PartialReadWarning) as record:
        block = read_frames(path)
    assert any("gzip data ends early" in str(r.message) for r in record)
    assert 0 < block.n_frames < 2000
    assert np.array_equal(block.info["time"], np.arange(block.n_frames))
    assert any("gzip data ends early" in w for w in block.warnings)


def test_damaged_gzip_is_an_error(tmp_path):
    path = tmp_path / "bad.xyz.gz"
    path.write_bytes(b"\x1f\x8b\x08\x00" + b"\xff" * 40)
    with pytest.raises(TrajectoryFileError) as info:
        read_frames(path)
    assert "damaged" in info.value.problem and info.value.path == path


def test_missing_file_and_folder(tmp_path):
    with pytest.raises(TrajectoryFileError, match="does not exist"):
        read_frames(tmp_path / "nope.xyz")
    with pytest.raises(TrajectoryFileError, match="folder"):
        read_frames(tmp_path)


def test_unreadable_format_through_ase_fallback(tmp_path):
    path = tmp_path / "run.weird"
    path.write_bytes(b"this is not a trajectory\n")
    with pytest.raises(TrajectoryFileError) as info:
        read_frames(path)
    assert info.value.path == path and "XYZ" in info.value.problem


@pytest.mark.parametrize("props,words", [
    ("species:S:1:pos:S:3", ["pos as S:3", "R:3"]),
    ("species:S:1:pos:R:2", ["pos as R:2"]),
    ("species:S:2:pos:R:3", ["species with 2 values"]),
    ("Z:I:1:q:R:1", ["no 'pos' column"]),
    ("pos:R:3", ["no 'species'"]),
])
def test_properties_that_cannot_describe_atoms(tmp_path, props, words):
    data = f"1\nProperties={props}\nH 0 0 0\n".encode()
    with pytest.raises(TrajectoryFileError) as info:
        parse_xyz(data, tmp_path / "p.extxyz")
    assert info.value.line == 2
    for w in words:
        assert w in info.value.problem
