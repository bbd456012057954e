"""The window's worker threads hold back while a person acts (gui/give_way.py).

Found at 10,000 runs: bringing the summary to the front while the map's workers still measured, drew and indexed
took a turn of 95-144 ms against 37-58 ms with nothing beside it; choosing the review's sources while the starting
conditions were analysed, 94-123 ms.  Python runs one thread at a time, and a worker doing numpy work takes its lock
back after every call, so the window's thread waited at each of its own hand-overs."""

from __future__ import annotations

import threading

import pytest
from PySide6.QtCore import QSettings, Qt
from PySide6.QtTest import QTest

from basinmark.gui import give_way
from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui


@pytest.fixture(autouse=True)
def _quiet():
    give_way.reset()
    yield
    give_way.reset()


def _waited_in_a_thread(max_wait_s: float = give_way.MAX_WAIT_S) -> float:
    out = []
    th = threading.Thread(target=lambda: out.append(give_way.give_way(max_wait_s)))
    th.start()
    th.join(5)
    return out[0]


def test_a_worker_waits_while_the_person_acts_and_not_otherwise():
    assert _waited_in_a_thread() < 0.05 and not give_way.holding()
    give_way.acting(0.2)
    assert give_way.holding()
    waited = _waited_in_a_thread()
    assert 0.1 <= waited <= 0.45, waited
    give_way.acting(10.0)   # typing on and on: the work must still come
    assert 0.25 <= _waited_in_a_thread(max_wait_s=0.3) <= 0.8


def test_keys_clicks_and_shown_panels_mark_the_persons_actions(qtbot, tmp_path):
    from basinmark.gui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    qtbot.waitExposed(win)
    for act in (lambda: QTest.keyClick(win.run_table.view, Qt.Key.Key_Down),
                lambda: QTest.mouseClick(win.run_table.search, Qt.MouseButton.LeftButton),
                lambda: (win.docks["label"].hide(), win.docks["label"].show())):
        give_way.reset()
        act()
        assert give_way.holding()
    win.close()


def test_the_maps_measuring_gives_way_on_its_worker_thread(qtbot, tmp_path, monkeypatch):
    """Every 64 runs measured and every piece of the pick index offers to give way, from the map's own thread."""
    import basinmark.gui.map_data as map_data
    from basinmark.core.sets import open_set

    root = make_toy_set(tmp_path / "toyset", ["left", "right"] * 70)
    tset = open_set(root, use_cache=False)
    seen = []
    monkeypatch.setattr(map_data, "give_way", lambda: seen.append(threading.current_thread().name))
    from basinmark.core.rules import load_rules

    rules = load_rules(root / "basins.toml", n_atoms=tset.n_atoms)
    axes = map_data.map_axes(rules)
    assert len(axes) >= 2, "the toy rules give two map axes"
    t = threading.Thread(target=lambda: map_data.MapData.build(tset, axes[0], axes[1]), name="worker")
    t.start()
    t.join(20)
    assert seen.count("worker") >= 2 * (140 // map_data.GIVE_WAY_RUNS + 1) - 1


def test_a_click_on_the_map_does_not_hold_back_the_maps_own_workers(qtbot, tmp_path):
    """The map's picture and pick index are what a person clicking or zooming the map waits for."""
    from basinmark.gui.app import install_extras
    from basinmark.gui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    install_extras(win)
    win.show()
    qtbot.waitExposed(win)
    canvas = win.map_panel.canvas
    win.docks["map"].show()
    win.docks["map"].raise_()
    qtbot.waitUntil(canvas.isVisible, timeout=5000)
    give_way.reset()
    QTest.mouseClick(canvas.viewport(), Qt.MouseButton.LeftButton)
    assert not give_way.holding()
    QTest.mouseClick(win.run_table.view.viewport(), Qt.MouseButton.LeftButton)   # elsewhere: they do
    assert give_way.holding()
    win.close()


def test_a_panel_shown_marks_it_before_its_own_work(qtbot, tmp_path, monkeypatch):
    """Qt shows a dock's children before the dock: the summary's showEvent (its numbers) ran before the dock's Show
    event marked the moment, so the workers went on through that turn."""
    from basinmark.gui.app import install_extras
    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.summary_view import SummaryPanel

    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    install_extras(win)
    win.show()
    qtbot.waitExposed(win)
    seen = []
    real = SummaryPanel.showEvent
    monkeypatch.setattr(SummaryPanel, "showEvent", lambda self, ev: (seen.append(give_way.holding()), real(self, ev)))
    give_way.reset()
    win.docks["summary"].show()
    win.docks["summary"].raise_()
    assert seen and seen[0] is True
    win.close()


def test_the_first_run_of_a_set_is_shown_and_drawn_with_the_readers_holding_back(qtbot, tmp_path, monkeypatch):
    """Found at 10,000 runs opened from the cache: the first run's turns (shown, drawn, painted) took 79-194 ms of
    wall clock for 35-43 ms of the window's own work while two threads read the other segments; gaps of 112-408 ms.
    The window now says it is busy when the first run arrives, and the readers wait (tests/test_set_cache.py)."""
    from basinmark.gui.main_window import MainWindow

    root = make_toy_set(tmp_path / "toyset", ["left", "right"] * 6)
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    qtbot.waitExposed(win)
    seen = []
    for name in ("_show_first_run", "_draw_first_traces"):
        real = getattr(MainWindow, name)
        monkeypatch.setattr(MainWindow, name, lambda self, _real=real, _n=name: (seen.append((_n, give_way.holding())),
                                                                               _real(self)))
    give_way.reset()
    with qtbot.waitSignal(win.set_loaded, timeout=30000):
        win.open_set(root, use_cache=False)
    qtbot.waitUntil(lambda: win.state.run_id != "", timeout=10000)
    assert ("_show_first_run", True) in seen and ("_draw_first_traces", True) in seen, seen
    win.close()


# --- imports made by a worker give way too ---------------------------------------------------------------------
# Found at 10,000 runs (bench/bench_window_daily.py): choosing the review's sources right after the starting-conditions
# tab came up took a turn of 87-126 ms, because that tab's worker was importing scikit-learn and SciPy (about 1 s of
# module bodies), and an import had no point at which to wait.

def _write_modules(folder, stem: str) -> str:
    (folder / f"{stem}_outer.py").write_text(f"import {stem}_inner\nVALUE = {stem}_inner.VALUE + 1\n")
    (folder / f"{stem}_inner.py").write_text("VALUE = 41\n")
    return f"{stem}_outer"


def _import_in_a_thread(name: str, giving_way: bool) -> tuple[float, int]:
    import importlib
    import time

    out = []

    def work():
        t0 = time.monotonic()
        if giving_way:
            with give_way.imports_give_way():
                mod = importlib.import_module(name)
        else:
            mod = importlib.import_module(name)
        out.append((time.monotonic() - t0, mod.VALUE))

    th = threading.Thread(target=work)
    th.start()
    th.join(5)
    return out[0]


@pytest.fixture
def module_folder(tmp_path, monkeypatch):
    import sys

    monkeypatch.syspath_prepend(str(tmp_path))
    before = set(sys.modules)
    yield tmp_path
    for name in set(sys.modules) - before:
        if name.startswith("bm_gw_"):
            del sys.modules[name]


def test_a_workers_imports_wait_while_the_person_acts(module_folder):
    name = _write_modules(module_folder, "bm_gw_a")
    give_way.acting(0.3)
    waited, value = _import_in_a_thread(name, giving_way=True)
    assert value == 42
    assert 0.2 <= waited <= 0.9, waited   # held back at the first module it looked for, then went on


def test_imports_wait_only_on_a_worker_that_asked_and_only_while_the_person_acts(module_folder):
    import importlib
    import time

    quiet, value = _import_in_a_thread(_write_modules(module_folder, "bm_gw_b"), giving_way=True)
    assert value == 42 and quiet < 0.1, quiet                    # nobody acts: no wait
    give_way.acting(0.5)
    other, _ = _import_in_a_thread(_write_modules(module_folder, "bm_gw_c"), giving_way=False)
    assert other < 0.1, other                                    # a worker that did not ask is not held back
    t0 = time.monotonic()
    with give_way.imports_give_way():                            # the window's own thread never waits for itself
        assert importlib.import_module(_write_modules(module_folder, "bm_gw_d")).VALUE == 42
    assert time.monotonic() - t0 < 0.1
    assert not give_way.imports_giving_way()


def test_the_starting_conditions_worker_imports_giving_way(monkeypatch):   # (a mode file's reader imports SciPy)
    from basinmark.core import origins_process, origins_start
    from basinmark.gui import origins_view

    seen = []

    class Fits:   # (the fits themselves run in a process of their own: tests/test_origins_process.py)
        @staticmethod
        def analyse(*_a, **_k):
            seen.append(give_way.imports_giving_way())

    monkeypatch.setattr(origins_start, "starting_conditions", lambda *a, **k: seen.append(give_way.imports_giving_way()))
    monkeypatch.setattr(origins_process, "shared_process", lambda: Fits)
    th = threading.Thread(target=lambda: origins_view.run_analysis(object(), None, {}, None, None, None))
    th.start()
    th.join(5)
    assert seen == [True, True]
    assert not give_way.imports_giving_way()
