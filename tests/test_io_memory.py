"""Memory bounded by the data: compact per-frame keys, a streamed file, and MemoryError said plainly."""

from __future__ import annotations

import bz2
import gzip
import lzma
import tracemalloc
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from basinmark.core.errors import TrajectoryFileError
from basinmark.core.io import read_frames
from basinmark.core.io.comment_keys import MAX_DISTINCT, TextColumn
from basinmark.core.io.registry import ByteStream, load_bytes
from basinmark.core.io.xyz import parse_xyz, read_xyz

#: working memory beside the results while one piece of text is parsed (pieces of CHUNK_BYTES = 2 MB;
#: common practice, no source: measured about 12 MB, with room for other numpy versions)
FIXED_OVERHEAD = 16e6


def changing_word_file(n_frames: int, seed: int = 1) -> bytes:
    """Three atoms per frame, each comment line with a word that changes every frame, as some writers do."""
    rng = np.random.default_rng(seed)
    xyz = rng.normal(size=(n_frames, 9))
    rows = ["3\nframe %d time=%d.0\nO %12.6f %12.6f %12.6f\nH %12.6f %12.6f %12.6f\nH %12.6f %12.6f %12.6f\n"
            % ((i, i) + tuple(xyz[i])) for i in range(n_frames)]
    return "".join(rows).encode()


def peak_of(fn):
    tracemalloc.start()
    try:
        result = fn()
        return result, tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()


def test_a_word_that_changes_every_frame_keeps_memory_within_the_bound(tmp_path):
    # before: every such word became a key with a list over all frames (66 MB at 2,000 frames, measured)
    path = tmp_path / "changing.xyz"
    path.write_bytes(changing_word_file(20_000))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        block, peak = peak_of(lambda: read_xyz(path))
        f32 = block.positions.size * 4
        assert peak < 3 * f32 + FIXED_OVERHEAD, (peak, f32)
        # in small pieces the same file stays below 3x its coordinates plus a small overhead, and below the
        # size of its text (3 MB, four times its coordinates): the text is never held whole
        small, peak_small = peak_of(lambda: read_xyz(path, chunk_bytes=64 * 1024))
    assert peak_small < 3 * f32 + 1e6, (peak_small, f32)
    assert path.stat().st_size > peak_small
    np.testing.assert_array_equal(small.positions, block.positions)
    np.testing.assert_array_equal(block.info["time"], np.arange(20_000.0))
    assert set(block.text_info) == set() and "17" not in block.info
    assert len(block.warnings) == 1 and "words without '='" in block.warnings[0]


def test_text_kept_compactly_and_text_that_always_changes_dropped_with_one_note():
    n = MAX_DISTINCT + 200
    frames = [f"1\nmode={'hot' if i % 3 else 'cold'} stamp=s{i} time={i}\nH 0 0 {i}\n" for i in range(n)]
    block = parse_xyz("".join(frames).encode(), "c.xyz")
    mode = block.text_info["mode"]
    assert isinstance(mode, TextColumn) and mode.codes.dtype == np.int32 and len(mode.table) <= 3
    assert mode[:4] == ["cold", "hot", "hot", "cold"]
    assert "stamp" not in block.text_info
    notes = [w for w in block.warnings if "stamp" in w]
    assert len(notes) == 1 and "not kept" in notes[0]


def test_a_key_that_is_a_number_on_some_frames_and_text_on_others_is_text():
    data = b"1\nv=1.5\nH 0 0 0\n1\nv=high\nH 0 0 1\n1\n\nH 0 0 2\n"
    block = parse_xyz(data, "m.xyz")
    assert block.text_info["v"] == ["1.5", "high", ""]


@pytest.mark.parametrize("chunk", [7, 40, 200])
def test_pieces_join_to_the_same_block_as_one_read(chunk):
    rows = []
    for i in range(30):
        extra = f" note=\"r {i % 4}\" dip=[{i}, 0, 1]" if i % 5 else " flag"
        rows.append(f"2\ntime={i * 0.5}{extra}\r\nC 0.0\t0.0 {i}.0\nH 0.0 1.0 {i}.5\n")
    data = b"\xef\xbb\xbf\n\n" + "".join(rows).encode() + b"\n\n"
    whole = parse_xyz(data, "p.xyz")
    parts = parse_xyz(data, "p.xyz", chunk_bytes=chunk)
    np.testing.assert_array_equal(parts.positions, whole.positions)
    np.testing.assert_array_equal(parts.frame_lines, whole.frame_lines)
    assert whole.frame_lines[:2].tolist() == [3, 7]
    for key in whole.info:
        np.testing.assert_array_equal(parts.info[key], whole.info[key])
    np.testing.assert_array_equal(parts.vectors["dip"], whole.vectors["dip"])
    assert list(parts.text_info["note"]) == list(whole.text_info["note"])
    assert list(parts.text_info["flag"]) == list(whole.text_info["flag"]) == ["T" if i % 5 == 0 else ""
                                                                              for i in range(30)]


SEED = (b"2\nProperties=species:S:1:pos:R:3:q:R:1 time=0.5 tag=\"a b\"\nC 0.1 1.5 -2.25 0.1\nH 2.0 -0.5 0.75 0.3\n"
        b"2\nProperties=species:S:1:pos:R:3:q:R:1 time=1.0 tag=\"a b\"\nC 0.2 1.4 -2.15 0.1\nH 2.1 -0.4 0.65 0.3\n"
        b"2\nProperties=species:S:1:pos:R:3:q:R:1 time=1.5 tag=c\nC 0.3 1.3 -2.05 0.1\nH 2.2 -0.3 0.55 0.3\n")


@settings(max_examples=120, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 10_000), st.integers(0, 255), st.sampled_from(["replace", "insert",
                                                                                       "delete"])),
                max_size=3), st.integers(1, 120))
def test_damaged_or_not_a_file_read_in_pieces_gives_what_one_read_gives(edits, chunk):
    data = bytearray(SEED)
    for pos, byte, how in edits:
        pos %= len(data) + 1
        if how == "insert":
            data[pos:pos] = bytes([byte])
        elif pos < len(data):
            if how == "replace":
                data[pos] = byte
            else:
                del data[pos]
    data = bytes(data)

    def outcome(**kw):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            try:
                b = parse_xyz(data, "d.xyz", **kw)
            except TrajectoryFileError as err:
                return ("error", err.line)
        return ("ok", b.positions.tobytes(), b.numbers.tolist(), b.frame_lines.tolist(),
                {k: v.tobytes() for k, v in b.info.items()}, {k: list(v) for k, v in b.text_info.items()})

    whole, parts = outcome(), outcome(chunk_bytes=chunk)
    assert whole[0] == parts[0]
    if whole[0] == "ok":
        assert whole == parts


@pytest.mark.parametrize("compress", [gzip.compress, bz2.compress, lzma.compress, lambda b: b])
def test_streamed_bytes_equal_the_whole_file(tmp_path, compress):
    text = changing_word_file(300)
    path = tmp_path / "s.xyz.gz"
    path.write_bytes(compress(text) + compress(text[:500]))  # two members/streams, followed in turn
    stream = ByteStream(path, 1000)  # many small pieces
    got = b"".join(stream)
    data, sha, warns = load_bytes(path)
    assert got == data and stream.sha256 == sha  # reference: the whole-file reader (zlib/bz2/lzma one-shot)
    assert stream.warnings == warns


def test_streamed_file_cut_short_reads_what_decompressed(tmp_path):
    text = changing_word_file(2000)
    path = tmp_path / "cut.xyz.gz"
    packed = gzip.compress(text)
    path.write_bytes(packed[: len(packed) // 2])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        block = read_frames(path)
    assert 0 < block.n_frames < 2000
    assert any("ends early" in w for w in block.warnings)


def test_out_of_memory_is_a_sentence_naming_the_file_and_its_size(tmp_path, monkeypatch):
    import basinmark.core.io.xyz as xyz

    path = tmp_path / "big.xyz"
    path.write_bytes(changing_word_file(50))

    def no_memory(*args, **kwargs):
        raise MemoryError()

    monkeypatch.setattr(xyz, "parse_comments", no_memory)
    with pytest.raises(TrajectoryFileError) as err:
        read_xyz(path)
    text = str(err.value)
    assert "big.xyz" in text and "not enough memory" in text and "kB on disk" in text
    with pytest.raises(TrajectoryFileError) as err:
        parse_xyz(path.read_bytes(), path)
    assert "not enough memory" in str(err.value)


def test_out_of_memory_while_joining_a_run_names_its_files(tmp_path, monkeypatch):
    import basinmark.core.sets as sets

    for half in ("fwd", "bwd"):
        (tmp_path / f"run001.{half}.xyz").write_bytes(changing_word_file(5))

    def no_memory(*args, **kwargs):
        raise MemoryError()

    monkeypatch.setattr(sets, "_join", no_memory)
    tset = sets.open_set(tmp_path, use_cache=False)
    assert len(tset) == 0 and len(tset.failures) == 1
    text = tset.failures[0].reason
    assert "not enough memory" in text and "run001.bwd.xyz" in text and "MB on disk" in text
