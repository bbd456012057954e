"""The turn of the window's event loop that ends a load does each piece of work once: the traces are drawn once,
progress reaches the window in a few signals rather than one per run, and the work in that turn does not grow
with the number of runs beyond what whole-column (numpy/pandas) operations cost.  Work is counted, never timed
(timings are in bench/bench_window_scale.py)."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest
from PySide6.QtCore import QSettings

from gui_fixtures import make_toy_set, toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished"]


def _window(qtbot, tmp_path: Path, extras: bool = False):
    from basinmark.gui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    if extras:
        from basinmark.gui.app import install_extras

        install_extras(win)
    qtbot.addWidget(win)
    win.show()
    return win


def _gated_open(monkeypatch):
    """The core's open_set replaced by one whose runs reach the window at once and whose load ends only when the
    returned event is set (the window's loader calls it in its thread)."""
    import threading

    import basinmark.core.sets as core_sets

    gate = threading.Event()
    real_open = core_sets.open_set

    def slow(path, *args, on_run=None, cancel=None, **kwargs):
        tset = real_open(path, *args, **kwargs)
        for traj in tset.runs.values():
            if on_run is not None:
                on_run(traj)
        gate.wait(30)
        return tset

    monkeypatch.setattr(core_sets, "open_set", slow)
    return gate


class _TracesTurns:
    """Which of the window's methods ``names`` was running each time the traces of ``self.win`` drew their
    monitors (``where``: "" outside them); ``after(name, window)`` is called as each of them returns."""

    def __init__(self, monkeypatch, names, after=None) -> None:
        from basinmark.gui.main_window import MainWindow
        from basinmark.gui.traces import TracesView

        self.where: list[str] = []
        self.now = ""
        self.win = None
        real_draw = TracesView._draw_monitors
        turns = self

        def counting_draw(view):
            if turns.win is not None and view is turns.win.traces:
                turns.where.append(turns.now)
            return real_draw(view)

        def named(name):
            real = getattr(MainWindow, name)

            def run(window, *args):
                turns.now = name
                try:
                    return real(window, *args)
                finally:
                    turns.now = ""
                    if after is not None:
                        after(name, window)
            return run

        monkeypatch.setattr(TracesView, "_draw_monitors", counting_draw)
        for name in names:
            if hasattr(MainWindow, name):
                monkeypatch.setattr(MainWindow, name, named(name))


def test_traces_are_drawn_once_when_a_load_ends(qtbot, tmp_path, monkeypatch):
    """Set, journal, rules and monitors all change at the end of a load: the traces are rebuilt once, not once
    per change (three times before)."""
    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.traces import TracesView

    root = make_toy_set(tmp_path / "toyset", OUTCOMES * 2)
    inside = {"on": False}
    draws: list[int] = []
    real_draw = TracesView._draw_monitors

    def counting_draw(self):
        if inside["on"] and self is win.traces:
            draws.append(1)
        return real_draw(self)

    def counted(real):
        def run(self, *args):
            inside["on"] = True
            try:
                return real(self, *args)
            finally:
                inside["on"] = False
        return run

    monkeypatch.setattr(TracesView, "_draw_monitors", counting_draw)
    # the turns that end a load (the second exists only once the work was split in two)
    monkeypatch.setattr(MainWindow, "_on_loaded", counted(MainWindow._on_loaded))
    for name in ("_draw_traces", "_end_load"):
        if hasattr(MainWindow, name):
            monkeypatch.setattr(MainWindow, name, counted(getattr(MainWindow, name)))
    win = _window(qtbot, tmp_path)
    win.open_set(root, use_cache=False)
    qtbot.waitUntil(lambda: not win.busy, timeout=20000)
    assert win.state.rules is not None and win.state.traj is not None
    assert len(draws) == 1
    # what is drawn is the final state: the run shown with its rules' thresholds
    assert win.traces.threshold_lines
    win.close()


def test_progress_reaches_the_window_in_a_few_signals(qtbot, tmp_path, monkeypatch):
    """Thousands of runs reported by the core become a handful of progress signals, the last one complete."""
    from basinmark.core import sets
    from basinmark.core.model import TrajectorySet
    from basinmark.gui.loader import SetLoader

    root = tmp_path / "many"
    root.mkdir()

    def fake_open(path, *, progress=None, on_run=None, **_kw):
        for i in range(5000):
            progress(i + 1, 5000, f"run-{i}")
        return TrajectorySet(Path(path), {}, metadata={"name": "many"})

    monkeypatch.setattr(sets, "open_set", fake_open)
    loader = SetLoader(root, use_cache=False)
    seen: list[tuple[str, int, int]] = []
    loader.progress.connect(lambda phase, done, total: seen.append((phase, done, total)))
    loader.run()  # in this thread: the signal is delivered at once
    loading = [s for s in seen if s[0] == "Loading"]
    assert 1 <= len(loading) <= 50
    assert loading[0] == ("Loading", 1, 5000) and loading[-1] == ("Loading", 5000, 5000)


def _profiled_end_of_load(qtbot, tmp_path: Path, n: int) -> list[int]:
    """Python calls (both Python and C functions, so per-element loops count) in each turn of the event loop that
    ends the load of an in-memory set of ``n`` runs, with every panel installed."""
    from basinmark.core.model import TrajectorySet
    from basinmark.core.sets import rules_path
    from basinmark.gui.loader import classify_with_rules

    root = tmp_path / f"set{n}"
    tset = toy_set(root, (OUTCOMES * n)[:n])
    result = {"path": root, "tset": tset, "error": "", "cancelled": False, "quick": None, "use_cache": False,
              **classify_with_rules(tset, rules_path(root))}
    win = _window(qtbot, tmp_path / f"w{n}", extras=True)
    win.state.set_set(TrajectorySet(root, {}, metadata={"name": root.name}))
    win._busy(True, "Loading")
    win.state.add_runs(list(tset))
    win.run_table.list_arrived_runs()
    calls = [0]

    def count(_frame, event, _arg):
        if event in ("call", "c_call"):
            calls[0] += 1

    turns = []
    for turn in (lambda: win._on_loaded(result), getattr(win, "_draw_traces", None),
                 getattr(win, "_build_labels", None), getattr(win, "_end_load", None)):
        if turn is None:
            continue
        calls[0] = 0
        sys.setprofile(count)
        try:
            turn()
        finally:
            sys.setprofile(None)
        turns.append(calls[0])
    assert len(win.state.labels) == n and win.run_table.proxy.rowCount() == n and not win.busy
    win.close()
    return turns


def test_end_of_load_work_does_not_grow_per_run(qtbot, tmp_path):
    """Reference: the same turns for 50 runs.  For 500 runs each may cost more calls only by a small amount per run
    (whole-column work calls a function per column, not per row; what is left is reading each run's kept content
    hash, two calls); a per-row Python loop anywhere in a turn (a dict per row, a call per cell, a map measured
    in the turn, a redraw per change) adds several calls per run each (60 per run before)."""
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    small = _profiled_end_of_load(qtbot, tmp_path / "a", 50)
    large = _profiled_end_of_load(qtbot, tmp_path / "b", 500)
    for turn, (s, g) in enumerate(zip(small, large)):
        per_run = (g - s) / 450
        assert per_run < 3, f"turn {turn + 1}: {s} calls for 50 runs, {g} for 500: {per_run:.1f} more per run"


def test_end_of_load_is_split_in_turns_each_smaller_than_the_whole(qtbot, tmp_path):
    """The set, journal and rules go in one turn, the traces in the next, the label table in a third and its views in
    a fourth: no turn does most of the work (one turn did all of it before; the third and fourth were one until the
    label table was the largest part of the longest turn at 10,000 runs)."""
    (tmp_path / "c").mkdir()
    turns = _profiled_end_of_load(qtbot, tmp_path / "c", 300)
    assert len(turns) == 4 and max(turns) < 0.5 * sum(turns), turns


def test_the_traces_are_drawn_in_a_turn_of_their_own(qtbot, tmp_path, monkeypatch):
    """Drawing the traces of the run shown, and the paint that follows, made the first turn that ends a load the
    longest one of a 10,000-run open (115-144 ms with the paint, bench/bench_window_scale.py): they get a turn of
    their own, after the set, journal and rules are in place and painted, before the label table."""
    root = make_toy_set(tmp_path / "toyset", OUTCOMES * 2)
    turns = _TracesTurns(monkeypatch, ("_on_loaded", "_draw_traces", "_end_load", "_finish_load"))
    win = turns.win = _window(qtbot, tmp_path)
    win.open_set(root, use_cache=False)
    qtbot.waitUntil(lambda: not win.busy, timeout=20000)
    ending = [w for w in turns.where if w]
    assert ending == ["_draw_traces"], turns.where
    assert win.traces.threshold_lines and win.state.traj is not None
    win.close()


def test_the_label_table_is_built_in_a_turn_before_its_views_are_rebuilt(qtbot, tmp_path, monkeypatch):
    """Building the label table and rebuilding every view of it (run table, label panel, map) made the longest turn
    that ends a 10,000-run load from the cache (73 ms under cProfile, 94-113 ms with its paint): the table is built
    in a turn of its own, the views rebuilt in the next, each painted apart."""
    from basinmark.gui import run_table, state

    root = make_toy_set(tmp_path / "toyset", OUTCOMES * 2)
    turns = _TracesTurns(monkeypatch, ("_on_loaded", "_draw_traces", "_build_labels", "_end_load", "_finish_load"))
    built, shown = [], []
    real_build = state.build_label_table
    monkeypatch.setattr(state, "build_label_table", lambda *a, **k: built.append(turns.now) or real_build(*a, **k))
    real_views = run_table.RunTable._on_labels
    monkeypatch.setattr(run_table.RunTable, "_on_labels",
                        lambda self, *a: shown.append(turns.now) or real_views(self, *a))
    win = turns.win = _window(qtbot, tmp_path)
    win.open_set(root, use_cache=False)
    qtbot.waitUntil(lambda: not win.busy, timeout=20000)
    assert [b for b in built if b] == ["_build_labels"], built
    assert [v for v in shown if v] == ["_end_load"], shown
    assert len(win.state.labels) == len(OUTCOMES) * 2
    win.close()


def test_a_new_open_between_the_turns_lets_the_traces_go(qtbot, tmp_path):
    """Another set opened after the first turn that ends a load (the traces still held back) starts cleanly: the
    traces are let go, and the new set's run is drawn."""
    from basinmark.gui.main_window import MainWindow

    first = make_toy_set(tmp_path / "one", OUTCOMES)
    second = make_toy_set(tmp_path / "two", OUTCOMES[::-1] * 2)
    win = _window(qtbot, tmp_path)
    real = MainWindow._on_loaded
    opened = {"again": False}

    def then_open_again(result):
        real(win, result)
        if not opened["again"]:
            opened["again"] = True
            win.open_set(second, use_cache=False)   # before the traces' turn

    win.job = None
    win._on_loaded = then_open_again   # the job connects to this bound attribute
    win.open_set(first, use_cache=False)
    qtbot.waitUntil(lambda: opened["again"] and not win.busy and win.state.tset is not None
                    and win.state.tset.root == second, timeout=30000)
    assert not win.traces._held
    assert win.state.traj is not None and win.traces.curves
    win.close()


def test_the_banner_is_in_place_before_the_traces_are_drawn(qtbot, tmp_path, monkeypatch):
    """The banner over the window (here: a file left out of the set) is shown in the first turn that ends a load,
    so the traces are laid out and drawn once at their final size.  Shown in the last turn, it pushed every panel
    down: the traces were laid out and drawn again, their axes too (a 55 ms paint at 10,000 runs)."""
    from basinmark.gui.main_window import MainWindow

    root = make_toy_set(tmp_path / "toyset", OUTCOMES * 2)
    (root / "ts-guess.xyz").write_text("3\nsingle geometry\nC 0 0 0\nH 0 0 1.1\nH 0 1.1 0\n")
    seen = {}
    real = MainWindow._draw_traces

    def draw(self):
        seen["banner"] = (self.banner.isVisible(), self.banner.text() if hasattr(self.banner, "text") else "")
        real(self)
        seen["size"] = self.traces.size().toTuple()

    monkeypatch.setattr(MainWindow, "_draw_traces", draw)
    win = _window(qtbot, tmp_path)
    win.open_set(root, use_cache=False)
    qtbot.waitUntil(lambda: not win.busy, timeout=20000)
    qtbot.wait(50)
    assert win.banner.isVisible(), "the set's note (a file left out) is not shown"
    assert seen["banner"] == (True, win.banner.text() if hasattr(win.banner, "text") else "")
    assert seen["size"] == win.traces.size().toTuple()
    win.close()


def test_the_traces_are_not_painted_again_before_their_turn(qtbot, tmp_path, monkeypatch):
    """Between the first turn that ends a load and the traces' own turn the traces show what they showed before: when
    the banner appears in the first turn it moves them, and they were painted again with those old plots (a 52 ms
    paint in the longest end turn at 10,000 runs), only to be drawn anew a turn later.  They are not painted until
    their turn."""
    from PySide6.QtCore import QEvent, QObject

    from basinmark.gui.main_window import MainWindow

    root = make_toy_set(tmp_path / "toyset", OUTCOMES * 2)
    (root / "ts-guess.xyz").write_text("3\nsingle geometry\nC 0 0 0\nH 0 0 1.1\nH 0 1.1 0\n")   # a banner
    state = {"between": False, "paints": 0, "resized": 0}

    class Paints(QObject):
        def eventFilter(self, obj, event):
            if state["between"]:
                if event.type() == QEvent.Type.Paint:
                    state["paints"] += 1
                elif event.type() == QEvent.Type.Resize:
                    state["resized"] += 1
            return False

    real_loaded, real_draw = MainWindow._on_loaded, MainWindow._draw_traces

    def loaded(self, result):
        state["between"] = True   # (a paint never comes inside the turn itself)
        real_loaded(self, result)

    def draw(self):
        state["between"] = False
        real_draw(self)

    monkeypatch.setattr(MainWindow, "_on_loaded", loaded)
    monkeypatch.setattr(MainWindow, "_draw_traces", draw)
    win = _window(qtbot, tmp_path)
    watcher = Paints()
    win.traces.glw.viewport().installEventFilter(watcher)
    win.traces.glw.installEventFilter(watcher)
    win.open_set(root, use_cache=False)
    qtbot.waitUntil(lambda: not win.busy, timeout=20000)
    assert win.banner.isVisible()
    assert state["resized"], "the banner did not move the traces: the test shows nothing"
    assert state["paints"] == 0
    win.close()


def test_the_first_run_that_arrives_has_its_traces_drawn_in_a_turn_of_their_own(qtbot, tmp_path, monkeypatch):
    """The first run shown while a set loads: the table, molecule and label panel show it in one turn, the traces
    are drawn in the next, each turn painted apart (together, with the paint, they were the longest turn of a
    10,000-run open, 113-144 ms: bench/bench_window_scale.py)."""
    root = make_toy_set(tmp_path / "toyset", OUTCOMES * 2)
    gate = _gated_open(monkeypatch)
    seen_in_first_turn = {}

    def after(name, window):
        if name == "_show_first_run" and window.state.traj is not None:
            seen_in_first_turn.update(molecule=window.molecule._traj is window.state.traj,
                                      panel=window.label_panel.shown_run == window.state.run_id)

    turns = _TracesTurns(monkeypatch, ("_show_first_run", "_draw_first_traces"), after)
    win = turns.win = _window(qtbot, tmp_path)
    win.open_set(root, use_cache=False)
    try:
        qtbot.waitUntil(lambda: win.state.traj is not None and bool(win.traces.curves), timeout=20000)
        assert turns.where and turns.where[0] == "_draw_first_traces", turns.where
        assert seen_in_first_turn == {"molecule": True, "panel": True}
        assert not win.traces._held
    finally:
        with qtbot.waitSignal(win.set_loaded, timeout=30000):
            gate.set()
    assert not win.traces._held and win.traces.threshold_lines
    win.close()


def test_the_first_run_to_arrive_reaches_the_window_without_waiting_for_the_next_poll(qtbot, tmp_path, monkeypatch):
    """Runs are taken from the loader every LoadJob.ARRIVALS_MS; the first is taken as soon as it arrives (on
    average half a poll sooner: 30 ms of the 0.5 s target for the first run from the cache)."""
    from basinmark.gui.loader import LoadJob

    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    gate = _gated_open(monkeypatch)
    monkeypatch.setattr(LoadJob, "ARRIVALS_MS", 60_000)   # the poll never comes during the test
    win = _window(qtbot, tmp_path)
    win.open_set(root, use_cache=False)
    try:
        qtbot.waitUntil(lambda: win.state.run_id != "", timeout=5000)
        assert win.run_table.model.n_rows >= 1
    finally:
        with qtbot.waitSignal(win.set_loaded, timeout=30000):
            gate.set()
    assert win.run_table.model.n_rows == len(OUTCOMES)
    win.close()
