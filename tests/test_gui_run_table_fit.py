"""The run table at the default size and at 1366×768: the Run column stays in view when the table scrolls right,
no header or cell text is cut (also labels set after the table was sized), runs with a note carry a mark, the
search finds text in notes, and the label table export carries the notes."""

from __future__ import annotations

import csv

import pytest
from PySide6.QtCore import QPoint, QRect, QSettings, Qt
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QAbstractButton, QApplication

from basinmark.gui.app import install_extras
from basinmark.gui.exports import export_label_table
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished", "left", "right", "left", "left"]
SIZES = {"default": None, "laptop": QRect(0, 0, 1366, 768)}


def _settle(qtbot) -> None:
    for _ in range(3):
        QApplication.processEvents()
        qtbot.wait(20)


@pytest.fixture(params=list(SIZES))
def win(request, qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES, drift_runs=[1])
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    install_extras(w)
    w.show()
    qtbot.waitExposed(w)
    if SIZES[request.param] is not None:
        w.setGeometry(SIZES[request.param])
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    w.set_labeler("kim")
    w.actions_["ask_reason"].setChecked(False)
    _settle(qtbot)
    yield w
    w.close()


def _label(win, run: str, label: str, reason: str = "") -> None:
    win.state.set_run(run)
    win.state.journal.record(run, label, content_hash=win.state.traj.content_hash, reason=reason,
                             labeler="a labeler with a rather long name")
    win.state.refresh_labels()


def test_no_header_or_cell_text_is_cut(win, qtbot):
    # labels set after the table was first sized: the longest label and a long labeler name
    _label(win, "toy-002", "ambiguous", "two products at once")
    _label(win, "toy-003", "excluded", "broken run")
    _settle(qtbot)
    view = win.run_table.view
    header = view.horizontalHeader()
    model = view.model()
    for c in range(model.columnCount()):
        name = model.headerData(c, Qt.Orientation.Horizontal)
        assert header.sectionSize(c) >= header.sectionSizeHint(c), f"header {name!r} is cut"
        need = view.sizeHintForColumn(c)   # the delegate's size of the widest cell of the column
        assert view.columnWidth(c) >= need, f"a cell of column {name!r} is cut ({view.columnWidth(c)} < {need})"
    shown = {model.index(r, c).data() for r in range(model.rowCount()) for c in range(model.columnCount())}
    assert {"ambiguous", "excluded"} <= shown
    # the buttons around the table and in the label panel show their whole text
    for widget in (win.run_table, win.label_panel):
        for b in widget.findChildren(QAbstractButton):
            if b.isVisible() and b.text():
                assert b.width() >= b.minimumSizeHint().width(), f"button {b.text()!r} is cut"


def test_the_run_column_stays_in_view_when_scrolling_right(win, qtbot):
    view = win.run_table.view
    dock = win.docks["runs"]
    dock.setMinimumWidth(0)
    win.resizeDocks([dock], [320], Qt.Orientation.Horizontal)
    _settle(qtbot)
    bar = view.horizontalScrollBar()
    assert bar.maximum() > 0, "the table should need to scroll at this width"
    bar.setValue(bar.maximum())
    _settle(qtbot)
    model = view.model()
    vp = view.viewport()
    for r in range(min(model.rowCount(), 5)):
        run = model.index(r, 0).data()
        y = view.visualRect(model.index(r, 1)).center().y()
        at = vp.mapTo(view, QPoint(4, y))
        w = view.childAt(at)
        frozen = view.frozen
        assert w is frozen.viewport(), f"row {r}: the run id is scrolled away"
        idx = frozen.indexAt(frozen.viewport().mapFrom(view, at))
        assert idx.isValid() and idx.data() == run
        assert frozen.visualRect(idx).width() >= frozen.sizeHintForColumn(0)
    # the frozen column's header says Run, and clicking a run there makes it the current run
    assert frozen.model().headerData(0, Qt.Orientation.Horizontal) == "Run"
    target = model.index(2, 0)
    QTest.mouseClick(frozen.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                     frozen.visualRect(target).center())
    assert win.state.run_id == target.data() == win.run_table.selected_run()
    assert view.hasFocus()   # number keys and finding stay with the table
    # its header sorts as the table's own does, and shows the same sort indicator
    fh = frozen.horizontalHeader()
    for order in (Qt.SortOrder.DescendingOrder, Qt.SortOrder.AscendingOrder):
        QTest.mouseClick(fh.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                         QPoint(fh.sectionViewportPosition(0) + 5, fh.height() // 2))
        header = view.horizontalHeader()
        assert (header.sortIndicatorSection(), header.sortIndicatorOrder()) == (0, order)
        assert (fh.sortIndicatorSection(), fh.sortIndicatorOrder()) == (0, order)
        runs = win.run_table.visible_runs()
        assert runs == sorted(runs, reverse=order == Qt.SortOrder.DescendingOrder)
    assert win.state.run_id == win.run_table.selected_run()


def test_a_note_shows_as_a_mark_is_found_by_search_and_exported(win, qtbot, tmp_path):
    panel, table = win.label_panel, win.run_table
    win.state.set_run("toy-004")
    panel.note.setText("check the C–C distance again")
    panel.note.returnPressed.emit()
    model = table.model
    r = model.row_of("toy-004")
    assert model.index(r, 0).data(Qt.ItemDataRole.DecorationRole) is not None
    assert "check the C–C distance again" in model.index(r, 0).data(Qt.ItemDataRole.ToolTipRole)
    others = [model.index(i, 0).data(Qt.ItemDataRole.DecorationRole) for i in range(model.rowCount()) if i != r]
    assert all(x is None for x in others)
    # the search field finds the run by a word of its note (and by labels and reasons too)
    table.search.setFocus()
    QTest.keyClicks(table.search, "DISTANCE ag")
    assert table.visible_runs() == ["toy-004"]
    assert win.state.run_id == "toy-004"
    table.search.clear()
    assert len(table.visible_runs()) == len(OUTCOMES)
    QTest.keyClicks(table.search, "unfinished")
    assert table.visible_runs() == ["toy-004"]
    table.search.clear()
    # the label table export carries the note
    out = export_label_table(win.state, tmp_path / "labels.csv")
    rows = {row["run"]: row for row in csv.DictReader(out.open(encoding="utf-8"))}
    assert rows["toy-004"]["note"] == "check the C–C distance again"
    assert rows["toy-001"]["note"] == ""
