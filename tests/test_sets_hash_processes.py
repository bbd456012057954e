"""A large set's files are hashed in worker processes, not in threads of the calling process.

Hashing threads hand Python's lock back and forth thousands of times a second; in the window, every call from Qt
into Python (a table cell, a row count) then waits for the lock: after a quick open of 10,000 runs, with the
background check of the files hashing in two threads, a repaint of the run table took 30-51 ms instead of 7 ms
(and an index of its model 22-26 µs instead of 2.3 µs).  The background check asks for processes on a large set;
small sets, where starting processes would cost more than it saves, are still hashed in threads.  Every way gives what ``hashlib`` gives."""

from __future__ import annotations

import hashlib
import threading

import pytest

from basinmark.core import sets as sets_mod
from basinmark.core.sets import discover, hash_files

from tests.test_sets import write_run


@pytest.fixture(scope="module")
def plan(tmp_path_factory):
    root = tmp_path_factory.mktemp("hashes") / "set"
    for i in range(12):
        write_run(root / "runs", f"run-{i + 1:04d}", n_bwd=3 + i % 3, n_fwd=4 + i % 4)
    return discover(root)


def _expected(plan):
    return {p: hashlib.sha256(p.read_bytes()).hexdigest() for spec in plan.runs for p in spec.files}


def test_processes_give_what_hashlib_gives_and_hash_nothing_here(plan, monkeypatch):
    def not_here(path):
        raise AssertionError(f"{path} hashed in the calling process")

    monkeypatch.setattr(sets_mod, "_sha256_file", not_here)   # the workers have their own module
    before = {t.ident for t in threading.enumerate()}
    got = hash_files(plan, processes=True)
    assert got == _expected(plan)
    assert not [t.name for t in threading.enumerate() if t.ident not in before and "hash" in t.name]


def test_threads_give_what_hashlib_gives(plan):
    assert hash_files(plan, processes=False) == _expected(plan)


def test_the_background_check_hashes_a_large_set_in_processes(plan, monkeypatch):
    """full_check (run while the window is in use) asks for processes on a large set, threads on a small one."""
    from basinmark.core import quick_open

    seen = []
    real = sets_mod._hash_in_processes
    monkeypatch.setattr(sets_mod, "_hash_in_processes", lambda paths, n: seen.append(n) or real(paths, n))
    monkeypatch.setattr(sets_mod, "cores", lambda: 2)
    monkeypatch.setattr(sets_mod, "PROCESSES_FROM_BYTES", 1)
    assert quick_open.full_check(plan).checked == sum(len(s.files) for s in plan.runs)
    assert seen
    seen.clear()
    monkeypatch.setattr(sets_mod, "PROCESSES_FROM_BYTES", 1 << 40)
    quick_open.full_check(plan)
    assert not seen


def test_a_missing_file_is_left_out_either_way(plan, tmp_path):
    import shutil

    root = tmp_path / "copy"
    shutil.copytree(plan.root, root)
    copy = discover(root)
    gone = copy.runs[3].files[0]
    gone.unlink()
    for processes in (True, False):
        got = hash_files(copy, processes=processes)
        assert gone not in got and len(got) == sum(len(s.files) for s in copy.runs) - 1
