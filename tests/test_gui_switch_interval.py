"""The window's process hands Python's lock between threads every millisecond at most.

Every call from Qt into Python (a table cell, a plot item's paint) needs the lock; while a background thread of the
window's process computes in Python (the loader, the map's worker), each such call waited up to Python's default
switch interval of 5 ms.  Measured with a busy Python thread beside a loaded 10,000-run window: a repaint of the run
table 7.7 ms quiet, 210 ms at 5 ms, 59 ms at 1 ms; the traces 6.6, 35 and 13 ms.  A caller who set a shorter interval keeps it."""

from __future__ import annotations

import sys

import pytest
from PySide6.QtCore import QSettings

from basinmark.gui import main_window
from basinmark.gui.main_window import MainWindow

pytestmark = pytest.mark.gui


@pytest.fixture
def interval():
    before = sys.getswitchinterval()
    yield
    sys.setswitchinterval(before)


def test_the_window_shortens_the_switch_interval(qtbot, tmp_path, interval):
    sys.setswitchinterval(0.005)   # Python's default
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    assert sys.getswitchinterval() <= main_window.SWITCH_INTERVAL_S <= 0.001


def test_a_shorter_interval_is_kept(qtbot, tmp_path, interval):
    sys.setswitchinterval(0.0002)
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    assert sys.getswitchinterval() == pytest.approx(0.0002)
