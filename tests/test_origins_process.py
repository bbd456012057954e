"""The starting-conditions analysis fits in a process of its own (core/origins_process.py).

Found at 10,000 runs (bench/bench_window_daily.py, /work-style probe of the review): while the Origins tab's
worker thread fitted its classifiers, choosing the review's two sources took a turn of 101-198 ms of which the
window's thread ran 63-79 ms: the rest it waited for Python's lock, which scikit-learn's Python between its native
calls held (the fits cannot pause to give way: one fit is one call).  In another process they take the other core
and no lock of the window's."""

from __future__ import annotations

import pickle
import time

import numpy as np
import pytest
from origins_sets import MONITORS, toy_set, window_with_origins

from basinmark.core import origins
from basinmark.core.origins import AnalysisCancelled, Settings, analyse
from basinmark.core.origins_process import AnalysisProcess
from basinmark.core.origins_start import starting_conditions

QUICK = Settings(n_repeats=1, n_permutations=19, importance_repeats=2, C=1.0)
LONG = Settings(n_repeats=1, n_permutations=5000, importance_repeats=2)   # minutes of fits: never ends here



@pytest.fixture(scope="module")
def toy():
    tset, outcome = toy_set(n=40, seed=3)
    return starting_conditions(tset, MONITORS), outcome


@pytest.fixture(scope="module")
def process():
    p = AnalysisProcess()
    yield p
    p.close()


def test_a_cancelled_analysis_crosses_a_process_boundary():
    back = pickle.loads(pickle.dumps(AnalysisCancelled()))
    assert isinstance(back, AnalysisCancelled) and str(back) == str(AnalysisCancelled())


def test_the_process_gives_the_same_analysis_as_the_caller_would(toy, process):
    start, outcome = toy
    here = analyse(start, outcome, QUICK)
    seen = []
    there = process.analyse(start, outcome, QUICK, progress=lambda *a: seen.append(a))
    assert there.sentence == here.sentence
    assert list(there.importance["feature"]) == list(here.importance["feature"])
    np.testing.assert_allclose(there.importance["mean"], here.importance["mean"], rtol=0, atol=0)
    assert there.top_two() == here.top_two()
    # every fit was heard of, in order, and the last says all were done
    assert seen and [d for d, _t, _s in seen] == sorted(d for d, _t, _s in seen)
    assert seen[-1][0] == seen[-1][1]


def test_a_cancel_stops_the_process_within_a_fit_or_two_and_it_serves_the_next(toy, process):
    start, outcome = toy
    heard = []
    asked = []

    def cancelled() -> bool:
        if len(heard) >= 3 and not asked:
            asked.append(time.perf_counter())
        return bool(asked)

    with pytest.raises(AnalysisCancelled):
        process.analyse(start, outcome, LONG, progress=lambda *a: heard.append(a), cancelled=cancelled)
    assert time.perf_counter() - asked[0] < 5.0
    # the next analysis is not cancelled by the last one's request, nor told of its fits
    heard.clear()
    again = process.analyse(start, outcome, QUICK, progress=lambda *a: heard.append(a))
    assert again.classified and heard[-1][1] < 1000


def test_an_error_of_the_analysis_is_the_callers_error(toy, process):
    start, outcome = toy
    with pytest.raises(origins.OriginsError, match="unknown penalty"):
        process.analyse(start, outcome, Settings(n_repeats=1, n_permutations=19, penalty="l3"))


@pytest.mark.gui
def test_the_window_does_not_fit_in_its_own_process(qtbot, tmp_path, monkeypatch):
    def here(*_a, **_k):
        raise AssertionError("fitted in the window's process")

    monkeypatch.setattr(origins, "analyse", here)
    w = window_with_origins(qtbot, tmp_path, QUICK)
    assert w.origins_panel.error == ""
    assert w.origins_panel.analysis is not None and w.origins_panel.analysis.classified
    w.close()


def test_the_bar_says_the_fits_are_starting_while_the_process_starts(monkeypatch):
    """The process's first analysis imports scikit-learn (~1-2 s) before its first fit: the bar said "200 of 200
    runs read, Reading the starting conditions" meanwhile, as if reading had stalled."""
    import threading

    from basinmark.core import origins_process, origins_start
    from basinmark.core.origins import work_total
    from basinmark.gui import origins_view

    heard = []

    class Fits:
        @staticmethod
        def analyse(*_a, **_k):
            heard.append("fits")

    monkeypatch.setattr(origins_start, "starting_conditions", lambda *a, **k: None)
    monkeypatch.setattr(origins_process, "shared_process", lambda: Fits)
    th = threading.Thread(target=lambda: origins_view.run_analysis(object(), None, {}, None, None, QUICK,
                                                                   progress=lambda *a: heard.append(a)))
    th.start()
    th.join(5)
    assert heard[-1] == "fits"
    done, total, stage = heard[-2]
    assert (done, total) == (0, work_total(QUICK)) and stage.startswith("starting the fits")
