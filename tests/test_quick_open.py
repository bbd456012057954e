"""Opening a cached set after a size-and-time check only, and the full check that finds what that misses."""

from __future__ import annotations

import os
import shutil
from pathlib import Path

import numpy as np
import pytest

from basinmark.core import sets as sets_mod
from basinmark.core.quick_open import full_check, quick_open, record_path
from basinmark.core.sets import cache_folder, discover, open_set

from gui_fixtures import make_toy_set

OUTCOMES = ["left", "right", "recrossing", "unfinished"]


def change_keeping_size_and_time(path: Path) -> None:
    """Rewrite one coordinate digit of the last frame (same length) and put the old modification time back."""
    st = os.stat(path)
    text = path.read_text()
    head, last_line = text.rstrip("\n").rsplit("\n", 1)
    sym, x, y, z = last_line.split()
    digit = "1" if x[-1] != "1" else "2"
    path.write_text(head + "\n" + " ".join([sym, x[:-1] + digit, y, z]) + "\n")
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns))
    assert os.stat(path).st_size == st.st_size


@pytest.fixture
def cached(tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    tset = open_set(root)            # writes the snapshot
    assert quick_open(root) is None  # no record yet: the usual open is needed once
    found = full_check(root)         # hashes every file and records them beside the snapshot
    assert found.recorded and not found.changed and found.checked == 2 * len(OUTCOMES)
    return root, tset


def test_quick_open_gives_the_same_set_as_a_full_open(cached):
    root, tset = cached
    seen = []
    quick = quick_open(root, on_run=seen.append)
    assert quick is not None
    assert quick.tset.run_ids == tset.run_ids and sorted(t.run_id for t in seen) == sorted(tset.run_ids)
    for rid in tset.run_ids:
        np.testing.assert_array_equal(quick.tset[rid].positions, tset[rid].positions)
        assert quick.tset[rid].content_hash == tset[rid].content_hash
    # nothing changed: the full check says so and keeps the record
    again = full_check(root, quick)
    assert again.changed == [] and again.describe() == "" and again.recorded


def test_a_new_time_or_size_means_no_quick_open(cached):
    root, _ = cached
    f = root / "toy-002.fwd.xyz"
    st = os.stat(f)
    os.utime(f, ns=(st.st_atime_ns, st.st_mtime_ns + 10**9))
    assert quick_open(root) is None
    os.utime(f, ns=(st.st_atime_ns, st.st_mtime_ns))
    assert quick_open(root) is not None
    (root / "toy-005.bwd.xyz").write_bytes((root / "toy-001.bwd.xyz").read_bytes())
    (root / "toy-005.fwd.xyz").write_bytes((root / "toy-001.fwd.xyz").read_bytes())
    assert quick_open(root) is None  # a run more


def test_full_check_names_a_change_the_quick_check_cannot_see(cached):
    root, tset = cached
    change_keeping_size_and_time(root / "toy-003.fwd.xyz")
    quick = quick_open(root)
    assert quick is not None  # sizes and times alone cannot tell
    assert quick.tset["toy-003"].content_hash == tset["toy-003"].content_hash  # the cached (old) content
    found = full_check(root, quick)
    assert found.changed == ["toy-003.fwd.xyz"]
    assert "1 file of this set changed since it was cached" in found.describe()
    assert "toy-003.fwd.xyz" in found.describe() and "read again" in found.describe()
    # the record vouched for content that is gone: it is dropped, so the next open hashes every file
    assert not record_path(discover(root)).exists()
    assert quick_open(root) is None
    fresh = open_set(root)
    assert fresh["toy-003"].content_hash != tset["toy-003"].content_hash


def test_a_damaged_record_is_ignored(cached):
    root, _ = cached
    record_path(discover(root)).write_text("{not json")
    assert quick_open(root) is None
    record_path(discover(root)).write_text('{"version": "2", "key": 3, "files": {}}')
    assert quick_open(root) is None
    record_path(discover(root)).write_text('{"version": "2", "key": "k", "files": {"toy-001.bwd.xyz": [1, 2]}}')
    assert quick_open(root) is None


@pytest.fixture
def one_run_segments(monkeypatch):
    """Every run in a segment of its own, so that the order in which segments are read can be seen."""
    monkeypatch.setattr(sets_mod, "segment_length", lambda mean: 1)


def test_quick_open_reads_every_segment_and_gives_the_first_run_before_reading_the_others(
        tmp_path, one_run_segments, monkeypatch):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    tset = open_set(root)
    assert len(list(cache_folder(root).glob("seg-*"))) == len(OUTCOMES)
    assert full_check(root).recorded
    events: list[tuple[str, str]] = []
    real = sets_mod.load_segment

    def logged(folder, key, *a, **k):
        events.append(("read", key))
        return real(folder, key, *a, **k)

    monkeypatch.setattr(sets_mod, "load_segment", logged)
    monkeypatch.setattr(sets_mod, "hash_files", lambda *a, **k: pytest.fail("hashed before showing"))
    monkeypatch.setattr(sets_mod, "_parse_or_fail", lambda *a: pytest.fail("parsed from the files"))
    quick = quick_open(root, on_run=lambda t: events.append(("run", t.run_id)))
    assert quick is not None and quick.tset.run_ids == tset.run_ids
    # the first run of the table is handed over as soon as its segment is read, before any other is read
    assert [e[0] for e in events[:2]] == ["read", "run"] and events[1][1] == tset.run_ids[0]
    assert sorted(rid for kind, rid in events if kind == "run") == sorted(tset.run_ids)
    assert sum(kind == "read" for kind, _ in events) == len(OUTCOMES)


def test_a_missing_segment_means_no_quick_open(tmp_path, one_run_segments):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    open_set(root)
    assert full_check(root).recorded
    shutil.rmtree(sorted(cache_folder(root).glob("seg-*"))[1])
    assert quick_open(root) is None
    open_set(root)  # the usual open writes it again
    assert quick_open(root) is not None


def test_a_damaged_segment_met_by_the_quick_open_is_read_from_its_files(tmp_path, one_run_segments):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    fresh = open_set(root, use_cache=False)
    open_set(root)
    assert full_check(root).recorded
    entry = sorted(cache_folder(root).glob("seg-*"))[2]
    p = entry / "positions.npy"
    data = bytearray(p.read_bytes())
    data[-4:] = np.float32(123.0).tobytes()
    p.write_bytes(bytes(data))
    seen = []
    quick = quick_open(root, on_run=lambda t: seen.append(t.run_id))
    assert quick is not None and sorted(seen) == sorted(fresh.run_ids)  # every run once
    said = [w for w in quick.tset.warnings if "cache entry" in w]
    assert len(said) == 1 and "damaged" in said[0] and str(entry) in said[0]
    for rid in fresh.run_ids:
        np.testing.assert_array_equal(quick.tset[rid].positions, fresh[rid].positions)
    assert len(list(cache_folder(root).glob("seg-*"))) == len(OUTCOMES)  # rebuilt
