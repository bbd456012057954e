"""Opening a cached set after a size-and-time check only, and the full check that finds what that misses."""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np
import pytest

from basinmark.core.quick_open import full_check, quick_open, record_path
from basinmark.core.sets import discover, open_set

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
    record_path(discover(root)).write_text('{"version": "1", "key": 3, "files": {}}')
    assert quick_open(root) is None
