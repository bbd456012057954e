"""The process pool's tasks of several runs: the same runs as one by one, failures kept per run (a bad file, a
killed worker), progress monotone, cancel within a task or so."""

from __future__ import annotations

import concurrent.futures as cf
import os
import threading

import numpy as np
import pytest

from basinmark.core import sets as sets_mod
from basinmark.core.model import LoadFailure
from basinmark.core.process_context import WORKER_NICE
from basinmark.core.sets import _parsed, _tasks, discover, open_set

from tests.test_sets import write_run

N_RUNS = 20


@pytest.fixture(scope="module")
def batch_set(tmp_path_factory):
    root = tmp_path_factory.mktemp("batches") / "set"
    for i in range(N_RUNS):
        write_run(root / "runs", f"run-{i + 1:04d}", n_bwd=3 + i % 3, n_fwd=4 + i % 4)
    # a broken run among good ones: it lands inside a task of several runs
    (root / "runs" / "run-0007.bwd.xyz").unlink(missing_ok=True)
    for half in ("bwd", "fwd"):
        (root / "runs" / f"run-0007.{half}.xyz.gz").unlink()
        (root / "runs" / f"run-0007.{half}.xyz").write_text("3\nnot a frame\nC 0 0\n")
    return root


@pytest.fixture
def big_tasks(monkeypatch):
    """Tasks of up to 8 runs on this small set (by default a set this small gets one run per task)."""
    monkeypatch.setattr(sets_mod, "TASKS_PER_WORKER", 1)
    monkeypatch.setattr(sets_mod, "BATCH_RUNS", 8)


def dies_on_run_12(spec, layout):
    """Reads a run as the pool does, except that run-0012 kills its worker process (as the system does when
    memory runs out).  Module level, so that the worker processes can import it."""
    if spec.run_id == "run-0012":
        os._exit(9)
    return sets_mod._parse_or_fail(spec, layout)


def test_tasks_cover_every_run_once_in_order_and_start_small():
    specs = list(range(1000))
    for workers in (1, 2, 4):
        tasks = _tasks(specs, workers)
        assert [s for t in tasks for s in t] == specs
        assert all(1 <= len(t) <= sets_mod.BATCH_RUNS for t in tasks)
        assert [len(t) for t in tasks[:workers]] == [1] * workers  # the first runs come back soon
        assert len(tasks) >= workers * sets_mod.TASKS_PER_WORKER
    assert [len(t) for t in _tasks(list(range(10)), 2)] == [1] * 10  # a small set: one run per task
    assert _tasks([], 2) == []


def _same(a, b):
    assert list(a.run_ids) == list(b.run_ids)
    for rid in a.run_ids:
        np.testing.assert_array_equal(a[rid].positions, b[rid].positions)
        np.testing.assert_array_equal(a[rid].times, b[rid].times)
        assert a[rid].content_hash == b[rid].content_hash
        assert a[rid].problems == b[rid].problems
    assert [(f.path, f.reason, f.line) for f in a.failures] == [(f.path, f.reason, f.line) for f in b.failures]


def test_batched_pool_gives_the_runs_one_by_one_reading_gives(batch_set, big_tasks):
    assert max(len(t) for t in _tasks(discover(batch_set).runs, 2)) > 1  # really several runs per task
    progress = []
    batched = open_set(batch_set, use_cache=False, processes=True, workers=2,
                       progress=lambda done, total, rid: progress.append(done))
    alone = open_set(batch_set, use_cache=False, processes=False, workers=1)
    _same(batched, alone)
    assert len(batched) == N_RUNS - 1 and len(batched.failures) == 1
    failure = batched.failures[0]
    assert failure.path.name == "run-0007.bwd.xyz" and failure.line == 3  # file and line, as when read alone
    assert progress == list(range(N_RUNS + 1))  # one step per run, never backwards


def test_a_killed_worker_fails_only_the_run_that_kills_it(batch_set, big_tasks, monkeypatch):
    monkeypatch.setattr(sets_mod, "LOCAL_RUNS_MAX", 0)  # every run read in a worker (none here while it starts)
    plan = discover(batch_set)
    got = {spec.run_id: result for spec, result, _ in _parsed(plan, plan.runs, 2, None, True, work=dies_on_run_12)}
    assert sorted(got) == [s.run_id for s in plan.runs]  # every run answered exactly once
    failed = {rid: r for rid, r in got.items() if isinstance(r, LoadFailure)}
    assert sorted(failed) == ["run-0007", "run-0012"]
    assert "run-0012" in failed["run-0012"].reason and "stopped before it finished" in failed["run-0012"].reason
    assert "killed" in failed["run-0012"].reason
    # its batch-mates were read in full
    alone = open_set(batch_set, use_cache=False, processes=False, workers=1)
    for rid, result in got.items():
        if rid not in failed:
            np.testing.assert_array_equal(result.positions, alone[rid].positions)


def test_cancel_in_the_middle_of_batches_stops_soon(batch_set, big_tasks):
    seen = []
    tset = open_set(batch_set, use_cache=False, processes=True, workers=2,
                    on_run=lambda t: seen.append(t.run_id), cancel=lambda: len(seen) >= 5)
    assert 5 <= len(tset) < N_RUNS - 1  # stopped where asked, not at the end of the set
    assert any("cancelled" in w for w in tset.warnings)


def test_the_first_runs_are_read_here_while_the_pool_starts(batch_set, monkeypatch):
    gate = threading.Event()

    class SlowStart(cf.ProcessPoolExecutor):
        """A pool whose start waits until the test lets it (as the forkserver's imports make it wait)."""

        def __init__(self, *a, **k):
            gate.wait(60)
            super().__init__(*a, **k)

    monkeypatch.setattr(sets_mod, "ProcessPoolExecutor", SlowStart)
    plan = discover(batch_set)
    it = _parsed(plan, plan.runs, 2, None, True)
    first = next(it)
    assert first[0].run_id == "run-0001" and not gate.is_set()  # read before any worker existed
    second = next(it)
    assert second[0].run_id == "run-0002"  # the pool still starting: the next run is read here too
    gate.set()
    rest = list(it)
    ids = [spec.run_id for spec, _, _ in [first, second] + rest]
    assert sorted(ids) == [s.run_id for s in plan.runs]  # every run once, the rest from the pool
    alone = open_set(batch_set, use_cache=False, processes=False, workers=1)
    np.testing.assert_array_equal(first[1].positions, alone["run-0001"].positions)


def test_beside_a_window_only_the_first_run_is_read_here(batch_set, monkeypatch):
    """A process that draws a window leaves the parsing to the pool once the first run is read: parsing in its own
    thread held Python's lock, and the window's first paints, which call into Python all the time, waited for it
    (the longest gap of a cold open of 10,000 runs, at its start: 197-221 ms, 87-121 ms reading one run here)."""
    gate = threading.Event()
    local = []

    class SlowStart(cf.ProcessPoolExecutor):
        def __init__(self, *a, **k):
            gate.wait(60)
            super().__init__(*a, **k)

    real = sets_mod._parse_or_fail

    def here(spec, layout):
        local.append(spec.run_id)
        return real(spec, layout)

    monkeypatch.setattr(sets_mod, "ProcessPoolExecutor", SlowStart)
    monkeypatch.setattr(sets_mod, "_parse_or_fail", here)   # the workers have their own module
    plan = discover(batch_set)
    with sets_mod.beside_a_window():
        it = _parsed(plan, plan.runs, 2, None, True)
        first = next(it)
        assert first[0].run_id == "run-0001" and not gate.is_set()
        gate.set()
        rest = list(it)
    assert local == ["run-0001"]
    assert sorted(spec.run_id for spec, _, _ in [first] + rest) == [s.run_id for s in plan.runs]
    # outside the context (another thread, or after it), the calling process reads while the pool starts again
    gate.clear()
    local.clear()
    it = _parsed(plan, plan.runs, 2, None, True)
    next(it), next(it)
    gate.set()
    list(it)
    assert local[:2] == ["run-0001", "run-0002"]


def reports_priority(spec, layout):
    """A worker's answer: its scheduling priority, as a failure's reason."""
    return LoadFailure(spec.files[0], f"nice {os.nice(0)}"), {}


@pytest.mark.skipif(not hasattr(os, "nice"), reason="no os.nice on this system")
def test_workers_yield_the_processor_to_the_caller(batch_set):
    """The pool's workers run at a lower priority than the caller (a window's thread keeps its share of a core
    while every core parses); the runs the caller reads itself while the pool starts are real runs."""
    plan = discover(batch_set)
    mine = os.nice(0)
    want = min(19, mine + WORKER_NICE)
    seen = [result.reason for _, result, _ in _parsed(plan, plan.runs, 2, None, True, work=reports_priority)
            if isinstance(result, LoadFailure) and result.reason.startswith("nice ")]
    assert seen, "no run was read by a worker"
    assert set(seen) == {f"nice {want}"}
    assert os.nice(0) == mine  # the caller's own priority is untouched
