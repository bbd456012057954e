"""While a set loads (runs arriving a few at a time), random run switches, keys and clicks never leave the window
showing something else than one current run: the table selects it, the traces, molecule and label panel draw it,
the rows listed are the runs that arrived in their order, and when the load ends the run a person chose stays.

The runs reach the window through the real loader thread, slowed down; the test keeps a small model of what must
be on screen and checks it after every action."""

from __future__ import annotations

import random
import threading
import time

import pytest
from PySide6.QtCore import QSettings, Qt
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QApplication

import basinmark.core.sets as core_sets
from basinmark.gui.main_window import MainWindow

from gui_fixtures import TOY_ENDS, make_toy_set

pytestmark = pytest.mark.gui

N_RUNS = 40


@pytest.fixture(scope="module")
def toy_root(tmp_path_factory):
    rng = random.Random(5)
    outcomes = [rng.choice(sorted(TOY_ENDS)) for _ in range(N_RUNS)]
    return make_toy_set(tmp_path_factory.mktemp("arrivals") / "toyset", outcomes)


def _trickle(monkeypatch, rng: random.Random, gate: threading.Event):
    """Runs reach ``on_run`` one by one with small random pauses (the worker's thread), as a slow disk would give
    them; the load ends once ``gate`` is set."""
    real = core_sets.open_set
    delays = [rng.choice([0.0, 0.002, 0.01, 0.03]) for _ in range(N_RUNS)]

    def slow(path, *args, on_run=None, cancel=None, **kwargs):
        tset = real(path, *args, **kwargs)
        for traj, pause in zip(tset.runs.values(), delays):
            if cancel is not None and cancel():
                break
            time.sleep(pause)
            if on_run is not None:
                on_run(traj)
        gate.wait(30)
        return tset

    monkeypatch.setattr(core_sets, "open_set", slow)


def _check(win, chosen: str | None) -> None:
    st = win.state
    tset = st.tset
    arrived = list(tset.runs)
    listed = win.run_table.model.column("run").tolist()[:win.run_table.model.n_rows]
    assert listed == arrived[:len(listed)], "rows listed out of arrival order"
    # the status bar counts the runs loaded so far against the set's total while they arrive, all of them after
    status = win.status_where.text()
    if st.loading and len(arrived) < N_RUNS:
        assert f"({len(arrived)} of {N_RUNS} runs loaded)" in status, status
    elif not win.busy:
        assert f"({len(arrived)} runs)" in status, status
    if not st.run_id:
        assert not win.traces._traj and win.label_panel.shown_run == ""
        return
    traj = tset[st.run_id]
    assert win.traces._traj is traj, (st.run_id, getattr(win.traces._traj, "run_id", None))
    assert win.molecule._traj is traj
    assert win.label_panel.shown_run == st.run_id
    assert win.run_table.selected_run() == st.run_id
    if chosen is not None:
        assert st.run_id == chosen


def _act(win, rng: random.Random, qtbot) -> str | None:
    """One random action; returns the run it chose (None when it chose none)."""
    st = win.state
    kind = rng.choice(["next", "previous", "down", "up", "click", "frame", "wait"])
    before = st.run_id
    if kind == "next":
        win.actions_["next_run"].trigger()
    elif kind == "previous":
        win.actions_["previous_run"].trigger()
    elif kind in ("down", "up"):
        win.run_table.view.setFocus()
        QTest.keyClick(win.run_table.view, Qt.Key.Key_Down if kind == "down" else Qt.Key.Key_Up)
    elif kind == "click":
        rows = win.run_table.proxy.rowCount()
        if rows:
            view = win.run_table.view
            index = win.run_table.proxy.index(rng.randrange(rows), 0)
            view.scrollTo(index)
            QTest.mouseClick(view.viewport(), Qt.MouseButton.LeftButton, pos=view.visualRect(index).center())
    elif kind == "frame" and st.traj is not None:
        st.set_frame(rng.randrange(st.traj.n_frames))
    qtbot.wait(rng.choice([0, 1, 5, 20]))
    return st.run_id if st.run_id != before else None


@pytest.mark.parametrize("seed", range(5))
def test_random_switches_while_runs_arrive(qtbot, tmp_path, monkeypatch, toy_root, seed):
    rng = random.Random(seed)
    gate = threading.Event()
    _trickle(monkeypatch, rng, gate)
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    win.open_set(toy_root, use_cache=False)
    qtbot.waitUntil(lambda: win.state.run_id != "", timeout=20000)
    # nothing chosen yet: the first run that arrived is the one shown
    assert win.state.run_id == next(iter(win.state.tset.runs))
    chosen = None
    for _ in range(40):
        picked = _act(win, rng, qtbot)
        if picked is not None:
            chosen = picked
        QApplication.processEvents()
        _check(win, None)
        if chosen is not None:
            assert win.state.run_id in win.state.tset
    with qtbot.waitSignal(win.set_loaded, timeout=30000):
        gate.set()
    qtbot.wait(200)   # the run table lists the last arrivals, the traces lay their labels out
    _check(win, chosen if chosen is not None and chosen != win._auto_run else None)
    assert win.run_table.model.n_rows == len(win.state.tset) == N_RUNS
    if chosen is None or chosen == win._auto_run:
        assert win.state.run_id == win.state.run_ids[0]
    # the traces now carry the rules: threshold lines for the run shown
    assert win.traces.threshold_labels(win.traces.p_dist)
    win.close()
