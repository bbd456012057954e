"""Gzip data inflated by ISA-L (when installed) gives exactly what Python's zlib gives, and damage is reported the
same way (zlib, the reference, is not our code)."""

from __future__ import annotations

import gzip
import zlib

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from basinmark.core.errors import TrajectoryFileError
from basinmark.core.io import registry
from basinmark.core.io.registry import ByteStream, load_bytes

isal_zlib = pytest.importorskip("isal.isal_zlib")


def test_the_fast_inflater_is_the_one_used():
    assert registry._inflate is isal_zlib


@settings(max_examples=40, deadline=None)
@given(st.lists(st.binary(min_size=0, max_size=5000), min_size=1, max_size=3), st.integers(0, 3),
       st.sampled_from([64, 1000, 1 << 20]))
def test_inflated_bytes_equal_zlibs_for_members_padding_and_pieces(tmp_path_factory, members, padding, piece):
    packed = [gzip.compress(m, compresslevel=6) for m in members]
    raw = b"".join(p + b"\x00" * padding for p in packed)
    path = tmp_path_factory.mktemp("gz") / "run.fwd.xyz.gz"
    path.write_bytes(raw)
    want = b"".join(zlib.decompress(p, wbits=31) for p in packed)  # zlib's reading, member by member
    assert load_bytes(path)[0] == want
    assert b"".join(ByteStream(path, piece)) == want


@pytest.mark.parametrize("inflater", ["isal", "zlib"])
def test_damage_and_a_cut_are_reported_alike(tmp_path, monkeypatch, inflater):
    if inflater == "zlib":
        monkeypatch.setattr(registry, "_inflate", zlib)
    raw = gzip.compress(b"3\ntime=0.0\nC 0 0 0\nH 1 0 0\nO 0 1 0\n" * 50)
    bad = tmp_path / "bad.xyz.gz"
    bad.write_bytes(raw[:-8] + bytes([raw[-8] ^ 1]) + raw[-7:])  # the stored checksum no longer matches
    with pytest.raises(TrajectoryFileError, match="damaged and cannot be decompressed"):
        load_bytes(bad)
    with pytest.raises(TrajectoryFileError, match="damaged and cannot be decompressed"):
        b"".join(ByteStream(bad))
    cut = tmp_path / "cut.xyz.gz"
    cut.write_bytes(raw[: len(raw) // 2])
    with pytest.warns(Warning):
        data, _sha, said = load_bytes(cut)
    assert said and "ends early" in said[0]
    assert data == zlib.decompressobj(wbits=31).decompress(raw[: len(raw) // 2])


@pytest.mark.parametrize("inflater", ["isal", "zlib"])
def test_a_member_starting_at_the_end_of_a_read_is_not_dropped(tmp_path, monkeypatch, inflater):
    """Two faults of the streamed reading of several gzip members, found by the property test above: a member
    whose first bytes straddled two reads was taken for trailing garbage and silently dropped; and with zlib, a
    member ending in a step whose output was limited left its following bytes both in ``unused_data`` and in
    ``unconsumed_tail``, so they were read twice and the next member was "damaged".  Every piece size must give
    every member, as zlib gives them member by member."""
    if inflater == "zlib":
        monkeypatch.setattr(registry, "_inflate", zlib)
    members = [b"3\nt=0\n", b"C 0 0 0\nH 1 0 0\nO 0 1 0\n" * 3, b"3\nt=1\n"]
    packed = [gzip.compress(m) for m in members]
    path = tmp_path / "run.bwd.xyz.gz"
    path.write_bytes(b"".join(p + b"\x00\x00" for p in packed))
    want = b"".join(zlib.decompress(p, wbits=31) for p in packed)
    wrong = [piece for piece in range(1, path.stat().st_size + 2) if b"".join(ByteStream(path, piece)) != want]
    assert wrong == []
