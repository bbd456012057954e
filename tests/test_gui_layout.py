"""The window fits a 1366×768 laptop screen with every analysis view open in turn.

Each check is on geometries: the window's minimum size, the run table's visible rows and the status bar's
place.  The offscreen platform has no window frame, so the whole 1366×768 is the window's to use.
"""

from __future__ import annotations

import pytest
from PySide6.QtCore import QRect, QSettings
from PySide6.QtWidgets import QApplication

from basinmark.gui.app import install_extras
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

SCREEN = QRect(0, 0, 1366, 768)
VIEWS = ("summary", "review", "rules", "sensitivity")
OUTCOMES = ["left", "right", "recrossing", "unfinished"] * 4


@pytest.fixture
def win(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    install_extras(w)
    w.show()
    qtbot.waitExposed(w)
    fit_on_screen(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    yield w
    w.close()


def fit_on_screen(w) -> None:
    """The window's frame (title bar and borders included) exactly covers SCREEN."""
    fg, g = w.frameGeometry(), w.geometry()
    w.setGeometry(SCREEN.adjusted(g.left() - fg.left(), g.top() - fg.top(),
                                  g.right() - fg.right(), g.bottom() - fg.bottom()))


def _settle(qtbot) -> None:
    for _ in range(3):
        QApplication.processEvents()
        qtbot.wait(20)


def _visible_rows(win) -> int:
    view = win.run_table.view
    vp = view.viewport().rect()
    model = view.model()
    return sum(1 for r in range(model.rowCount()) if vp.contains(view.visualRect(model.index(r, 0))))


def _status_rect(win) -> QRect:
    sb = win.statusBar()
    return QRect(sb.mapToGlobal(sb.rect().topLeft()), sb.size())


def _fits(win) -> None:
    room = SCREEN.size() - (win.frameGeometry().size() - win.size())  # the screen less the window frame
    for name, size in (("minimumSizeHint", win.minimumSizeHint()), ("minimumSize", win.minimumSize())):
        assert size.width() <= room.width() and size.height() <= room.height(), f"{name} is {size}, room {room}"
    assert SCREEN.contains(win.frameGeometry()), f"window {win.frameGeometry()} is off the screen"
    assert win.statusBar().isVisible()
    assert SCREEN.contains(_status_rect(win)), f"status bar at {_status_rect(win)}"
    assert win.docks["runs"].isVisible() and not win.docks["runs"].visibleRegion().isEmpty()
    assert _visible_rows(win) >= 10, f"the run table shows only {_visible_rows(win)} rows"


def test_plain_window_fits_a_laptop_screen(win, qtbot):
    _settle(qtbot)
    _fits(win)


@pytest.mark.parametrize("view", VIEWS)
def test_each_analysis_view_fits_and_closing_restores(win, qtbot, view):
    _settle(qtbot)
    rows_before = _visible_rows(win)
    dock = win.docks[view]
    dock.toggleViewAction().trigger()
    _settle(qtbot)
    assert dock.isVisible() and not dock.visibleRegion().isEmpty(), f"{view} is not in front"
    _fits(win)
    dock.toggleViewAction().trigger()
    _settle(qtbot)
    assert not dock.isVisible()
    _fits(win)
    assert _visible_rows(win) == rows_before


def test_analysis_views_share_one_area(win, qtbot):
    """The four views are tabs of one area (the traces' area), never a dock of their own that squeezes the table."""
    for view in VIEWS:
        win.docks[view].toggleViewAction().trigger()
        _settle(qtbot)
        tabbed = {d.objectName() for d in win.tabifiedDockWidgets(win.docks[view])}
        assert win.docks["traces"].objectName() in tabbed, f"{view} is not a tab beside the traces"
        assert win.dockWidgetArea(win.docks[view]) == win.dockWidgetArea(win.docks["traces"])


def test_reset_layout_puts_every_panel_back(win, qtbot):
    act = win.actions_["reset_layout"]
    assert act.text().replace("&", "") == "Reset Layout"
    win.docks["runs"].hide()
    win.docks["summary"].show()
    win.docks["summary"].setFloating(True)
    win.resize(600, 400)
    act.trigger()
    _settle(qtbot)
    fit_on_screen(win)  # (the offscreen screen is not 1366×768: place the window as on a laptop)
    _settle(qtbot)
    assert not win.docks["summary"].isVisible() and not win.docks["summary"].isFloating()
    assert win.docks["runs"].isVisible() and win.docks["traces"].isVisible()
    _fits(win)
