"""The wrapping row (gui/flow_layout.py): one row when there is room, more rows when narrow, never an item cut
off or two on top of each other, and the height it asks for grows with the rows."""

from __future__ import annotations

import pytest
from PySide6.QtWidgets import QApplication, QLineEdit, QToolButton, QVBoxLayout, QWidget

from basinmark.gui.flow_layout import flow_row

pytestmark = pytest.mark.gui

TEXTS = ["All 200", "Needs a look 26", "Flagged 18", "Unlabeled 188", "Disagree 12", "Changed 0"]


def _build(qtbot):
    top = QWidget()
    qtbot.addWidget(top)
    lay = QVBoxLayout(top)
    buttons = []
    for t in TEXTS:
        b = QToolButton()
        b.setText(t)
        buttons.append(b)
    search = QLineEdit()
    row = flow_row(top, [*buttons, (search, True)])
    lay.addWidget(row)
    lay.addStretch(1)
    top.show()
    return top, row, buttons, search


def _settle(qtbot):
    for _ in range(3):
        QApplication.processEvents()
        qtbot.wait(10)


@pytest.mark.parametrize("width", [1400, 700, 420, 260, 150])
def test_items_wrap_without_overlap_or_cut(qtbot, width):
    top, row, buttons, search = _build(qtbot)
    top.resize(width, 400)
    _settle(qtbot)
    items = [*buttons, search]
    rects = [w.geometry() for w in items]
    inside = row.rect()
    for w, r in zip(items, rects):
        assert inside.contains(r), f"{w} at {r} is cut off (row {inside})"
        if isinstance(w, QToolButton):
            assert r.width() >= w.sizeHint().width(), f"{w.text()!r} is narrower than its text"
    for i in range(len(rects)):
        for j in range(i + 1, len(rects)):
            assert not rects[i].intersects(rects[j]), f"{items[i]} overlaps {items[j]}"
    n_rows = len({r.top() for r in rects})
    one_row = sum(b.sizeHint().width() for b in items) + 4 * (len(items) - 1)
    assert (n_rows == 1) == (row.width() >= one_row)
    assert row.height() >= row.flow.heightForWidth(row.width())
    # the smallest width is the widest item's, never the whole row's
    assert row.minimumSizeHint().width() <= max(w.sizeHint().width() for w in items) + 2


def test_search_stretches_to_fill_its_row(qtbot):
    top, row, buttons, search = _build(qtbot)
    top.resize(1400, 300)
    _settle(qtbot)
    assert search.geometry().right() >= row.width() - 2


def test_squeezed_height_still_shows_every_row(qtbot):
    """Squeezed vertically, the row keeps the height its rows need (the rest of the window gives way)."""
    top, row, buttons, search = _build(qtbot)
    top.resize(200, 40)
    _settle(qtbot)
    assert row.minimumHeight() == row.flow.heightForWidth(row.width())
    assert row.height() >= row.flow.heightForWidth(row.width())
