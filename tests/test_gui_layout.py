"""The window fits a 1366×768 laptop screen with every analysis view open in turn.

Each check is on geometries: the window's minimum size, the run table's visible rows and the status bar's
place.  The offscreen platform has no window frame, so the whole 1366×768 is the window's to use.
"""

from __future__ import annotations

import pytest
from PySide6.QtCore import QRect, QSettings, Qt
from PySide6.QtWidgets import QApplication

from basinmark.gui.app import install_extras
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

SCREEN = QRect(0, 0, 1366, 768)
VIEWS = ("summary", "review", "rules", "sensitivity")
OUTCOMES = ["left", "right", "recrossing", "unfinished"] * 4


def _window_on(root, qtbot, tmp_path, timeout: int) -> MainWindow:
    """A shown window fitted to the screen with the set at ``root`` opened (read from its files)."""
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    install_extras(w)
    w.show()
    qtbot.waitExposed(w)
    fit_on_screen(w)
    with qtbot.waitSignal(w.set_loaded, timeout=timeout):
        w.open_set(root, use_cache=False)
    return w


@pytest.fixture
def win(qtbot, tmp_path):
    w = _window_on(make_toy_set(tmp_path / "toyset", OUTCOMES), qtbot, tmp_path, timeout=20000)
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


# --- the sample set, with hand labels, every analysis view in turn -----------------------------------------

#: every view that opens as a tab of the analysis area (the map and origins as well)
ALL_VIEWS = ("summary", "review", "rules", "sensitivity", "origins", "map")
#: hand labels that differ from the automatic outcome: enough for two-digit counts in the filter buttons
N_HAND = 12


def _hand_label_with_keys(win, qtbot, n: int) -> None:
    """Label ``n`` alpha runs beta with the number key, from the run table, as a person does."""
    from PySide6.QtTest import QTest

    win.set_labeler("kim")
    win.actions_["ask_reason"].setChecked(False)
    win.actions_["auto_advance"].setChecked(False)
    labels = win.state.labels
    alpha = [r for r, a in zip(labels["run"], labels["auto_label"]) if a == "alpha"][:n]
    products = list(win.state.rules.products)
    key = getattr(Qt.Key, f"Key_{products.index('beta') + 1}")
    view = win.run_table.view
    for run in alpha:
        win.run_table.go_to(run)
        view.setFocus()
        QTest.keyClick(view, key)
    _settle(qtbot)
    hand = win.state.labels.set_index("run")["hand_label"]
    assert all(hand[r] == "beta" for r in alpha), "the number key did not label the runs"


def test_sample_set_with_hand_labels_fits_with_every_view(qtbot, tmp_path):
    """The bundled sample set, a dozen hand labels, then Summary, Review, Rules, Sensitivity, Origins and the
    map in turn: the window's minimum size stays within 1366×768, the table shows 10 rows, the status bar is on
    the screen, and no analysis view scrolls sideways."""
    import shutil

    from basinmark.gui.app import bundled_sample_set

    root = tmp_path / "ringfork"
    shutil.copytree(bundled_sample_set(), root, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.*"))
    w = _window_on(root, qtbot, tmp_path, timeout=60000)
    _settle(qtbot)
    _hand_label_with_keys(w, qtbot, N_HAND)
    assert w.run_table.filter_counts()["disagree"] >= 10
    fit_on_screen(w)
    _settle(qtbot)
    _fits(w)
    for view in ALL_VIEWS:
        dock = w.docks[view]
        dock.show()
        dock.raise_()
        _settle(qtbot)
        fit_on_screen(w)
        _settle(qtbot)
        assert dock.isVisible() and not dock.visibleRegion().isEmpty(), f"{view} is not in front"
        _fits(w)
        _no_sideways_scrolling(dock, view)
        # dragged narrower (the molecule wider), the view still fits its width
        w.resizeDocks([dock], [380], Qt.Orientation.Horizontal)
        _settle(qtbot)
        assert dock.width() <= 400
        _fits(w)
        _no_sideways_scrolling(dock, view)
        dock.hide()
    w.close()


def _no_sideways_scrolling(dock, view: str) -> None:
    """The view's content fits the width its dock gives it: no horizontal scroll bar in its scroll area."""
    from PySide6.QtWidgets import QScrollArea

    area = dock.widget()
    if not isinstance(area, QScrollArea):
        return   # (the map fills its dock itself: its minimum width is part of the window's, checked above)
    inner = area.widget()
    need = max(inner.minimumSizeHint().width(), inner.minimumWidth())
    assert need <= area.viewport().width(), f"{view} needs {need} px, gets {area.viewport().width()}"
    assert not area.horizontalScrollBar().isVisible(), f"{view} scrolls sideways"
    # a plot never scrolls: what it cannot fit (a long title, plots side by side) is cut off at the right
    import pyqtgraph as pg

    for gv in inner.findChildren(pg.GraphicsView):
        centre = gv.centralWidget
        if gv.isVisible() and centre is not None:
            least = centre.effectiveSizeHint(Qt.SizeHint.MinimumSize).width()
            assert least <= gv.viewport().width() + 1, f"{view}: plots need {least:.0f} px, get {gv.viewport().width()}"
