"""What the window says while a set loads: the status bar counts the runs loaded so far against the set's total
(it used to keep the count of the first batch, "6 runs" of 10,000, until the end), the progress bar's text fits it,
and the label panel says the run shown can be labeled once loading ends (it used to say "No run selected" beside
the run it showed)."""

from __future__ import annotations

import threading
import time

import pytest
from PySide6.QtCore import QSettings
from PySide6.QtGui import QFontMetrics

import basinmark.core.sets as core_sets
from basinmark.gui.main_window import MainWindow

from gui_fixtures import TOY_ENDS, make_toy_set

pytestmark = pytest.mark.gui

N_RUNS = 24


@pytest.fixture(scope="module")
def toy_root(tmp_path_factory):
    ends = sorted(TOY_ENDS)
    return make_toy_set(tmp_path_factory.mktemp("status") / "toyset", [ends[i % len(ends)] for i in range(N_RUNS)])


def _half_then_wait(monkeypatch, gate: threading.Event, first: int):
    """The first ``first`` runs reach the window, then the load waits for ``gate`` before the rest."""
    real = core_sets.open_set

    def slow(path, *args, on_run=None, cancel=None, **kwargs):
        tset = real(path, *args, **kwargs)
        for i, traj in enumerate(tset.runs.values()):
            if i == first:
                gate.wait(30)
            if cancel is not None and cancel():
                break
            if on_run is not None:
                on_run(traj)
            time.sleep(0.001)
        return tset

    monkeypatch.setattr(core_sets, "open_set", slow)


def test_status_and_label_panel_while_loading(qtbot, tmp_path, monkeypatch, toy_root):
    gate = threading.Event()
    _half_then_wait(monkeypatch, gate, first=7)
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.resize(1366, 768)
    win.show()
    win.open_set(toy_root, use_cache=False)
    try:
        qtbot.waitUntil(lambda: win.state.tset is not None and len(win.state.tset) == 7 and bool(win.state.run_id),
                        timeout=20000)
        qtbot.wait(150)   # the arrivals are listed every 60 ms
        status = win.status_where.text()
        assert f"(7 of {N_RUNS} runs loaded)" in status, status
        panel = win.label_panel.current.text()
        assert "No run selected" not in panel, panel
        assert "loading" in panel.lower(), panel
        # the progress bar's text is shown whole: the bar is wide enough for it on one line
        bar = win.progress
        shown = bar.text()
        assert shown and QFontMetrics(bar.font()).horizontalAdvance(shown) + 16 <= bar.width(), (shown, bar.width())
    finally:
        gate.set()
    with qtbot.waitSignal(win.set_loaded, timeout=30000):
        pass
    qtbot.waitUntil(lambda: not win.busy, timeout=10000)
    status = win.status_where.text()
    assert f"({N_RUNS} runs)" in status and "loaded)" not in status, status
    assert "No run selected" not in win.label_panel.current.text()
