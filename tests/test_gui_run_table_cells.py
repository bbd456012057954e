"""The filter proxy answers a cell (role by role, all roles at once as the item delegate asks them, and its flags)
exactly as the source model answers the source cell, for every column, sort and filter.

The proxy asks the source model in Python instead of mapping each index through Qt: every call from Qt into Python
waits for Python's lock, which a busy loader thread holds, and a repaint of the run table made about four such
calls per cell and role (with a busy Python thread beside a loaded 10,000-run window: 59 ms per repaint at a 1 ms
switch interval, 7.7 ms since)."""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QStyledItemDelegate, QStyleOptionViewItem

from basinmark.gui.run_table import COLUMNS, FILTERS

from test_gui_run_table_arrays import model_proxy, random_table  # noqa: F401  (a fixture)

pytestmark = pytest.mark.gui

ROLES = [Qt.ItemDataRole.DisplayRole, Qt.ItemDataRole.DecorationRole, Qt.ItemDataRole.FontRole,
         Qt.ItemDataRole.ToolTipRole, Qt.ItemDataRole.TextAlignmentRole, Qt.ItemDataRole.ForegroundRole,
         Qt.ItemDataRole.BackgroundRole, Qt.ItemDataRole.CheckStateRole]


class _Delegate(QStyledItemDelegate):
    def options(self, index) -> QStyleOptionViewItem:
        opt = QStyleOptionViewItem()
        self.initStyleOption(opt, index)   # asks the model for its roles at once (multiData)
        return opt


def _same(a, b) -> bool:
    return a == b or (a is None and b is None)


@pytest.mark.parametrize("seed", [0, 1])
def test_proxy_cells_are_the_source_cells(model_proxy, seed):  # noqa: F811
    model, proxy = model_proxy
    rng = np.random.default_rng(seed)
    df = random_table(rng, 120)
    model.set_table(df)
    model.set_pinned(df["run"].iloc[3]) if hasattr(model, "set_pinned") else None
    delegate = _Delegate()
    for mode, _text, _tip in FILTERS[:4]:
        proxy.set_mode(mode)
        proxy.sort(int(rng.integers(len(COLUMNS))), Qt.SortOrder.DescendingOrder)
        rows = list(range(proxy.rowCount()))
        for r in rng.choice(rows, min(25, len(rows)), replace=False) if rows else []:
            for c in range(len(COLUMNS)):
                index = proxy.index(int(r), c)
                source = proxy.mapToSource(index)
                assert source.row() == int(proxy.source_rows()[r]) and source.column() == c
                for role in ROLES:
                    assert _same(index.data(role), source.data(role)), (mode, r, COLUMNS[c][0], role)
                assert proxy.flags(index) == model.flags(source)
                opt = delegate.options(index)
                shown = source.data(Qt.ItemDataRole.DisplayRole)
                assert opt.text == ("" if shown is None else str(shown)), (mode, r, COLUMNS[c][0])
                font = source.data(Qt.ItemDataRole.FontRole)
                if font is not None:
                    assert (opt.font.bold(), opt.font.italic()) == (font.bold(), font.italic())
                has_mark = source.data(Qt.ItemDataRole.DecorationRole) is not None
                assert bool(opt.features & QStyleOptionViewItem.ViewItemFeature.HasDecoration) == has_mark
    assert not proxy.index(proxy.rowCount(), 0).isValid()
    assert proxy.flags(proxy.index(proxy.rowCount(), 0)) == Qt.ItemFlag.NoItemFlags
