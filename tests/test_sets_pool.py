"""Parsing a set's runs in a process pool: the same set as in threads, progress and cancel kept, no pool left over."""

from __future__ import annotations

import concurrent.futures as cf

import numpy as np
import pytest

from basinmark.core import sets as sets_mod
from basinmark.core.sets import discover, iter_runs, open_set, use_processes

from tests.test_sets import write_run

N_RUNS = 12


@pytest.fixture(scope="module")
def small_set(tmp_path_factory):
    root = tmp_path_factory.mktemp("pool") / "set"
    for i in range(N_RUNS):
        write_run(root / "runs", f"run-{i + 1:04d}", n_bwd=4 + i % 3, n_fwd=6 + i % 4)
    # one broken run: its failure must come back from a worker like any other
    (root / "runs" / "run-0099.bwd.xyz").write_text("3\nnot a frame\nC 0 0\n")
    (root / "runs" / "run-0099.fwd.xyz").write_text("3\nnot a frame\nC 0 0\n")
    return root


class RecordingPool(cf.ProcessPoolExecutor):
    """The real pool, remembering its worker processes so the test can see that they have ended."""

    made: list["RecordingPool"] = []

    def __init__(self, *a, **k):
        super().__init__(*a, **k)
        self.workers: list = []
        self.shut = False
        RecordingPool.made.append(self)

    def submit(self, *a, **k):
        fut = super().submit(*a, **k)
        if self._processes:
            self.workers = list(self._processes.values())
        return fut

    def shutdown(self, *a, **k):
        self.shut = True
        return super().shutdown(*a, **k)


@pytest.fixture
def recording(monkeypatch):
    RecordingPool.made = []
    monkeypatch.setattr(sets_mod, "ProcessPoolExecutor", RecordingPool)
    return RecordingPool.made


def _same(a, b):
    assert list(a.run_ids) == list(b.run_ids)
    for rid in a.run_ids:
        ta, tb = a[rid], b[rid]
        np.testing.assert_array_equal(ta.positions, tb.positions)
        np.testing.assert_array_equal(ta.times, tb.times)
        assert ta.energies.keys() == tb.energies.keys()
        assert ta.content_hash == tb.content_hash
        assert ta.problems == tb.problems
    assert sorted(f.reason for f in a.failures) == sorted(f.reason for f in b.failures)


def test_process_pool_gives_the_same_set_as_threads(small_set, recording):
    progress = []
    in_pool = open_set(small_set, use_cache=False, processes=True, workers=2,
                       progress=lambda done, total, rid: progress.append((done, total)))
    threads = open_set(small_set, use_cache=False, processes=False)
    assert len(recording) == 1  # the first open used a process pool, the second none
    assert len(in_pool) == N_RUNS and len(in_pool.failures) == 1
    assert "run-0099" in in_pool.failures[0].reason
    _same(in_pool, threads)
    # progress: a start, then one call per run in order of completion
    assert progress[0] == (0, N_RUNS + 1) and [d for d, _ in progress[1:]] == list(range(1, N_RUNS + 2))
    pool = recording[0]
    assert pool.shut and pool.workers and all(p.exitcode is not None for p in pool.workers)


def test_process_pool_with_the_cache_reopens_the_same(small_set, recording, tmp_path):
    import shutil

    root = tmp_path / "copy"
    shutil.copytree(small_set, root)
    first = open_set(root, processes=True, workers=2)
    again = open_set(root, processes=True, workers=2)
    _same(first, again)


def test_cancel_stops_the_pool_and_leaves_no_worker(small_set, recording):
    seen = []
    tset = open_set(small_set, use_cache=False, processes=True, workers=2,
                    on_run=lambda t: seen.append(t.run_id), cancel=lambda: len(seen) >= 3)
    assert 3 <= len(tset) < N_RUNS
    assert any("cancelled" in w for w in tset.warnings)
    pool = recording[0]
    assert pool.shut and all(p.exitcode is not None for p in pool.workers)


def test_leaving_the_loop_early_shuts_the_pool(small_set, recording):
    plan = discover(small_set)
    it = iter_runs(plan, use_cache=False, processes=True, workers=2)
    next(it)
    it.close()  # a caller that stops reading: the pool goes with the generator
    pool = recording[0]
    assert pool.shut and all(p.exitcode is not None for p in pool.workers)


def test_small_sets_stay_in_threads_and_large_ones_use_every_core(small_set, monkeypatch):
    plan = discover(small_set)
    monkeypatch.setattr(sets_mod, "cores", lambda: 2)
    assert not use_processes(plan)  # a few kilobytes: starting processes would cost more than it saves
    monkeypatch.setattr(sets_mod, "PROCESSES_FROM_BYTES", 1)
    assert use_processes(plan)
    assert not use_processes(plan, workers=1)  # one worker asked for: no pool
    assert not use_processes(plan, processes=False)
    monkeypatch.setattr(sets_mod, "cores", lambda: 1)
    assert not use_processes(plan)  # one core: nothing to spread over


def test_each_file_is_decompressed_once_and_hashed_as_before(tmp_path, monkeypatch):
    """The reader's own pass gives the content hash (same value as hashing the file on its own)."""
    import gzip

    from basinmark.core.content_hash import content_sha256
    from basinmark.core.io import read_frames

    root = tmp_path / "set"
    write_run(root / "runs", "run-0001", gz=True)
    write_run(root / "runs", "run-0002", gz=False)
    # a gzip file of two members with zero padding between them (read as one stream)
    text = (root / "runs" / "run-0002.fwd.xyz").read_bytes()
    cut = text.index(b"\n4\n") + 1
    (root / "runs" / "run-0003.fwd.xyz.gz").write_bytes(gzip.compress(text[:cut]) + b"\0\0" + gzip.compress(text[cut:]))
    (root / "runs" / "run-0003.bwd.xyz.gz").write_bytes(gzip.compress((root / "runs" / "run-0002.bwd.xyz").read_bytes()))
    for path in sorted((root / "runs").iterdir()):
        assert read_frames(path).content_sha256 == content_sha256(path), path.name
    expected = open_set(root, use_cache=False)
    calls = []
    monkeypatch.setattr(sets_mod, "content_sha256", lambda p: calls.append(p) or content_sha256(p))
    tset = open_set(root, use_cache=False, processes=False)
    assert calls == []  # no file was decompressed a second time to hash it
    for rid in expected.run_ids:
        assert tset[rid].content_hash == expected[rid].content_hash
        assert [s.sha256 for s in tset[rid].sources] == [content_sha256(s.path) for s in tset[rid].sources]
    # the same content stored plainly and gzipped keeps its hash (labels stay bound across re-compression)
    assert tset["run-0003"].sources[0].sha256 == tset["run-0002"].sources[0].sha256
