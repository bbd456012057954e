"""The map of a large set is measured off the window's thread and drawn thinned, saying so."""

from __future__ import annotations

import threading

import numpy as np
import pytest
from PySide6.QtCore import QSettings

from basinmark.core.geometry import distance
from basinmark.gui import map_view
from basinmark.gui.main_window import MainWindow
from basinmark.gui.map_data import MIN_DRAW_POINTS, draw_points
from basinmark.gui.map_view import MapPanel, install_map_dock

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished", "left", "left"]


@pytest.fixture
def win(qtbot, tmp_path, monkeypatch):
    monkeypatch.setattr(MapPanel, "WORKER_FROM_FRAMES", 0)  # the toy set counts as large: measured in the worker
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    dock = install_map_dock(w)
    w.show()
    qtbot.waitExposed(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    dock.show()
    dock.raise_()
    yield w
    w.close()


def test_map_is_measured_in_a_worker_thread_and_drawn(win, qtbot, monkeypatch):
    panel = win.map_panel
    qtbot.waitUntil(lambda: not panel.busy and panel.canvas.data is not None, timeout=20000)
    threads = []
    real_build = map_view.MapData.build.__func__

    def build(cls, *args, **kw):
        threads.append(threading.current_thread())
        return real_build(cls, *args, **kw)

    monkeypatch.setattr(map_view.MapData, "build", classmethod(build))
    panel.cache.clear()
    panel.refresh()
    # at once, in the window's thread: nothing measured yet, the panel says it is measuring
    assert panel.busy and panel.canvas.data is None
    assert "Measuring the map of 6 runs" in panel.note.text()
    qtbot.waitUntil(lambda: not panel.busy and panel.canvas.data is not None, timeout=20000)
    assert threads and all(t is not threading.main_thread() for t in threads)
    # the same values as the core's geometry, drawn in the labels' curves
    traj = win.state.tset["toy-002"]
    np.testing.assert_allclose(panel.canvas.data.run_xy("toy-002")[0], distance(traj.positions, 0, 1))
    assert panel.canvas.counts == {"left": 3, "right": 1, "recrossing": 1, "unfinished": 1}
    assert "Measuring" not in panel.note.text()


def test_thinned_drawing_says_so_and_keeps_the_point_budget(win, qtbot):
    panel = win.map_panel
    panel.canvas.max_points = 20
    panel.refresh()
    qtbot.waitUntil(lambda: not panel.busy and panel.canvas.data is not None, timeout=20000)
    longest = int((panel.canvas.data.ends - panel.canvas.data.starts).max())
    assert longest > 20
    assert f"at most 20 points of each run (the longest has {longest} frames)" in panel.note.text()
    drawn = sum(int(np.isfinite(c.getData()[0]).sum()) for c in panel.canvas.curves.values())
    assert drawn <= 20 * len(OUTCOMES)
    # picking still uses every frame: a click on a frame between the drawn points finds its run
    x, y = panel.canvas.data.run_xy("toy-002")
    assert panel.canvas.pick_at(float(x[-5]), float(y[-5]), radius_px=2.0)[0] == "toy-002"


def test_a_newer_request_drops_the_older_result(win, qtbot):
    panel = win.map_panel
    qtbot.waitUntil(lambda: not panel.busy, timeout=20000)
    win.state.add_monitor((2, 3))
    panel.set_axes("d_left", "d(2-3)")  # each choice is a request; only the last one is drawn
    qtbot.waitUntil(lambda: not panel.busy and panel.canvas.data is not None, timeout=20000)
    qtbot.wait(200)
    assert panel.canvas.data.y_axis.key == "d(2-3)"


def test_points_per_run_shrink_with_the_number_of_runs():
    assert draw_points(200) == 160          # few runs: the usual thinning
    assert draw_points(10_000) == 40        # 10,000 runs share the drawing budget
    assert draw_points(10 ** 6) == MIN_DRAW_POINTS  # never below the floor
    assert draw_points(10, max_points=20) == 20
