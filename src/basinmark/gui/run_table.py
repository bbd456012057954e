"""The run table: one row per run with its labels, quick filters, and a count bar per outcome."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from PySide6.QtCore import (QAbstractTableModel, QItemSelectionModel, QModelIndex, QRectF, QSignalBlocker,
                            QSize, QSortFilterProxyModel, Qt)
from PySide6.QtGui import QPainter, QPalette
from PySide6.QtWidgets import (QAbstractItemView, QButtonGroup, QHBoxLayout, QHeaderView, QLabel, QSizePolicy,
                               QTableView, QToolButton, QVBoxLayout, QWidget)

from basinmark.core import stats
from basinmark.core.classify import signed_commit_time
from basinmark.core.labels import FIXED_LABELS
from basinmark.gui.colours import outcome_colour
from basinmark.gui.state import AppState

#: (column in the labels table, header shown)
COLUMNS: tuple[tuple[str, str], ...] = (
    ("run", "Run"),
    ("auto_label", "Automatic"),
    ("hand_label", "Hand"),
    ("final_label", "Final"),
    ("product_final_entry_fs", "Product commit fs"),
    ("flags", "Flags"),
    ("labeler", "Labeler"),
    ("data_changed", "Data"),
)

COMMIT_TIP = ("Product-side commit, final entry: when the run entered the product basin for the stay it keeps, "
              "in fs on the run's time axis (negative when the product is at the backward end). "
              "Sorted by distance from the transition state.")

FILTERS: tuple[tuple[str, str, str], ...] = (
    ("all", "All", "Every run"),
    ("flagged", "Flagged", "Runs with at least one flag"),
    ("unlabeled", "Unlabeled", "Runs without a hand label"),
    ("disagree", "Disagree", "Runs whose hand label differs from the automatic outcome"),
    ("changed", "Changed", "Runs whose files changed since they were labeled"),
)


def row_matches(row: dict, mode: str) -> bool:
    """Whether a labels-table row passes a quick filter."""
    if mode == "flagged":
        return bool(row.get("flags"))
    if mode == "unlabeled":
        return not row.get("hand_label")
    if mode == "disagree":
        return bool(row.get("hand_label")) and row.get("hand_label") != row.get("auto_label")
    if mode == "changed":
        return bool(row.get("data_changed"))
    return True


class RunTableModel(QAbstractTableModel):
    """A read-only Qt model over the labels DataFrame (rows kept as plain lists for speed)."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self._rows: list[dict] = []
        self._index: dict[str, int] = {}
        self.products: list[str] = []

    def set_table(self, df: pd.DataFrame, products: list[str] | None = None) -> None:
        if products is not None:
            self.products = list(products)
        self.beginResetModel()
        self._rows = df.to_dict("records")
        self._index = {r["run"]: i for i, r in enumerate(self._rows)}
        self.endResetModel()

    def rowCount(self, parent=QModelIndex()) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(self._rows)

    def columnCount(self, parent=QModelIndex()) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(COLUMNS)

    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):  # noqa: N802
        if orientation == Qt.Orientation.Horizontal and role == Qt.ItemDataRole.DisplayRole:
            return COLUMNS[section][1]
        if (orientation == Qt.Orientation.Horizontal and role == Qt.ItemDataRole.ToolTipRole
                and COLUMNS[section][0] == "product_final_entry_fs"):
            return COMMIT_TIP
        return None

    def row(self, r: int) -> dict:
        return self._rows[r]

    def row_of(self, run_id: str) -> int | None:
        return self._index.get(run_id)

    def data(self, index: QModelIndex, role=Qt.ItemDataRole.DisplayRole) -> Any:
        if not index.isValid():
            return None
        row = self._rows[index.row()]
        key = COLUMNS[index.column()][0]
        value = row.get(key)
        if role == Qt.ItemDataRole.DisplayRole:
            if key == "product_final_entry_fs":  # on the run's time axis: negative at the backward end
                t = signed_commit_time(row.get("product_end"), value)
                return "" if t is None else f"{t:.1f}"
            if key == "data_changed":
                return "changed" if value else ""
            if key == "flags":
                return (value or "").replace(";", ", ")
            return "" if value is None else str(value)
        if role == Qt.ItemDataRole.UserRole:  # sort key
            if key == "product_final_entry_fs":  # by distance from the TS, whichever end
                return float("inf") if value is None or not np.isfinite(value) else float(value)
            if key == "run":
                return index.row()  # the set's natural order
            return str(value or "")
        if role == Qt.ItemDataRole.ToolTipRole:
            if key == "product_final_entry_fs":
                return COMMIT_TIP
            if key == "hand_label" and row.get("reason"):
                return f"reason: {row['reason']}"
            if key == "data_changed" and value:
                return "The run's files changed after this label was set; look at it again."
        if role == Qt.ItemDataRole.DecorationRole and key in ("final_label", "auto_label") and value:
            return outcome_colour(str(value), self.products)
        if role == Qt.ItemDataRole.FontRole and key == "final_label" and row.get("hand_label"):
            from PySide6.QtGui import QFont
            f = QFont()
            f.setBold(True)
            return f
        return None


class RunFilterProxy(QSortFilterProxyModel):
    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.mode = "all"
        self.only: frozenset[str] | None = None  # a given list of runs (e.g. a summary warning's) instead
        self.setSortRole(Qt.ItemDataRole.UserRole)

    def set_mode(self, mode: str, only: frozenset[str] | None = None) -> None:
        if hasattr(self, "beginFilterChange"):  # Qt >= 6.9; invalidateFilter is deprecated there
            self.beginFilterChange()
            self.mode, self.only = mode, only
            self.endFilterChange()
        else:
            self.mode, self.only = mode, only
            self.invalidateFilter()

    def filterAcceptsRow(self, source_row: int, source_parent: QModelIndex) -> bool:  # noqa: N802
        model = self.sourceModel()
        if self.only is not None:
            return model.row(source_row)["run"] in self.only
        return row_matches(model.row(source_row), self.mode)


class CountBar(QWidget):
    """A horizontal bar split by outcome (final labels), with the counts written under it."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.counts: dict[str, int] = {}
        self.products: list[str] = []
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        self.setMinimumHeight(14)

    def sizeHint(self) -> QSize:
        return QSize(200, 14)

    def set_counts(self, counts: dict[str, int], products: list[str]) -> None:
        self.counts, self.products = dict(counts), list(products)
        tip = "\n".join(f"{k}: {v}" for k, v in self.counts.items())
        self.setToolTip(tip)
        self.update()

    def paintEvent(self, event) -> None:  # noqa: N802
        p = QPainter(self)
        rect = QRectF(self.rect()).adjusted(1, 1, -1, -1)
        p.fillRect(rect, self.palette().color(QPalette.ColorRole.AlternateBase))
        total = sum(self.counts.values())
        x = rect.left()
        for label, n in self.counts.items():
            if n <= 0 or total == 0:
                continue
            w = rect.width() * n / total
            p.fillRect(QRectF(x, rect.top(), w, rect.height()), outcome_colour(label, self.products))
            x += w
        p.setPen(self.palette().color(QPalette.ColorRole.Mid))
        p.drawRect(rect)
        p.end()


class RunTable(QWidget):
    """Quick-filter buttons, the sortable table, and the counts of the final labels."""

    def __init__(self, state: AppState, parent=None) -> None:
        super().__init__(parent)
        self.state = state
        self._sized: tuple = ()
        self._syncing = False
        self.model = RunTableModel(self)
        self.proxy = RunFilterProxy(self)
        self.proxy.setSourceModel(self.model)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(2, 2, 2, 2)
        bar = QHBoxLayout()
        bar.setSpacing(2)
        self.filter_group = QButtonGroup(self)
        self.filter_group.setExclusive(True)
        self.filter_buttons: dict[str, QToolButton] = {}
        for key, text, tip in FILTERS:
            b = QToolButton(self)
            b.setText(text)
            b.setToolTip(tip)
            b.setCheckable(True)
            b.setAutoRaise(True)
            b.setFocusPolicy(Qt.FocusPolicy.NoFocus)
            b.clicked.connect(lambda _c=False, k=key: self.set_filter(k))
            self.filter_group.addButton(b)
            self.filter_buttons[key] = b
            bar.addWidget(b)
        bar.addStretch(1)
        self.filter_buttons["all"].setChecked(True)
        lay.addLayout(bar)
        # "showing only these runs" (show_only_runs): a caption naming why, and a way back to every run
        only = QHBoxLayout()
        self.only_caption = QLabel(self)
        self.only_caption.setWordWrap(True)
        self.only_caption.setObjectName("onlyRunsCaption")
        self.only_clear = QToolButton(self)
        self.only_clear.setText("Show All Runs")
        self.only_clear.setToolTip("Leave this list and show every run again")
        self.only_clear.clicked.connect(self.clear_only_runs)
        only.addWidget(self.only_caption, 1)
        only.addWidget(self.only_clear)
        self.only_caption.setVisible(False)
        self.only_clear.setVisible(False)
        lay.addLayout(only)
        self.view = QTableView(self)
        self.view.setModel(self.proxy)
        self.view.setSortingEnabled(True)
        self.view.sortByColumn(0, Qt.SortOrder.AscendingOrder)
        self.view.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.view.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.view.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.view.setAlternatingRowColors(True)
        self.view.verticalHeader().setVisible(False)
        self.view.verticalHeader().setDefaultSectionSize(self.fontMetrics().height() + 6)
        self.view.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        self.view.horizontalHeader().setStretchLastSection(True)
        self.view.horizontalHeader().setResizeContentsPrecision(200)
        lay.addWidget(self.view, 1)
        self.count_bar = CountBar(self)
        lay.addWidget(self.count_bar)
        self.count_label = QLabel(self)
        self.count_label.setWordWrap(True)
        lay.addWidget(self.count_label)
        self.warning_label = QLabel(self)
        self.warning_label.setWordWrap(True)
        self.warning_label.setVisible(False)
        lay.addWidget(self.warning_label)
        self.view.selectionModel().currentRowChanged.connect(self._on_current)
        state.labels_changed.connect(self._on_labels)
        state.run_changed.connect(self._select_run)

    # --- data ------------------------------------------------------------------------------
    def _on_labels(self) -> None:
        self._syncing = True  # rows vanish and reappear: Qt moves the current row, which is not a choice
        try:
            self.model.set_table(self.state.labels, list(getattr(self.state.rules, "products", []) or []))
        finally:
            self._syncing = False
        self._select_run(self.state.run_id)
        self._update_counts()
        products = tuple(getattr(self.state.rules, "products", []) or [])
        if len(self.state.labels) and self._sized != (len(self.state.labels), products):
            self.view.resizeColumnsToContents()  # sampled: see setResizeContentsPrecision
            self._sized = (len(self.state.labels), products)

    def outcome_counts(self) -> dict[str, int]:
        """Counts of the final labels, products first, then the fixed labels, then anything else."""
        df = self.state.labels
        products = list(getattr(self.state.rules, "products", []) or [])
        counts = df["final_label"].replace("", "unclassified").value_counts().to_dict() if len(df) else {}
        order = products + [x for x in FIXED_LABELS] + sorted(k for k in counts if k not in products
                                                              and k not in FIXED_LABELS)
        return {k: int(counts.get(k, 0)) for k in order if counts.get(k, 0) or k in products}

    def _update_counts(self) -> None:
        counts = self.outcome_counts()
        products = list(getattr(self.state.rules, "products", []) or [])
        self.count_bar.set_counts(counts, products)
        n = len(self.state.labels)
        hand = int((self.state.labels["hand_label"] != "").sum()) if n else 0
        parts = [f"{k} {v}" for k, v in counts.items()]
        self.count_label.setText(f"{n} runs, {hand} labeled by hand" + (": " + " · ".join(parts) if parts else ""))
        warnings = stats.reliability_warnings({k: v for k, v in counts.items() if k != "unclassified"}, products) \
            if products and n else []
        more = f" (+{len(warnings) - 1} more: hover to read)" if len(warnings) > 1 else ""
        self.warning_label.setText(f"⚠ {warnings[0]}{more}" if warnings else "")
        self.warning_label.setToolTip("\n".join(warnings))
        self.warning_label.setVisible(bool(warnings))

    # --- filters and selection ---------------------------------------------------------------
    def set_filter(self, mode: str) -> None:
        self.filter_group.setExclusive(True)
        self.filter_buttons[mode].setChecked(True)
        self._show_only_caption("")
        self._syncing = True
        try:
            self.proxy.set_mode(mode)
        finally:
            self._syncing = False
        self._select_run(self.state.run_id)

    def show_only_runs(self, run_ids, caption: str) -> None:
        """Show exactly ``run_ids`` (e.g. the runs a summary warning names) under a caption saying why."""
        only = frozenset(str(r) for r in run_ids)
        self.filter_group.setExclusive(False)  # no quick filter is in force now
        for b in self.filter_buttons.values():
            b.setChecked(False)
        self._show_only_caption(f"Showing only {len(only)} run{'s' if len(only) != 1 else ''}: {caption}")
        self._syncing = True
        try:
            self.proxy.set_mode("all", only)
        finally:
            self._syncing = False
        self._select_run(self.state.run_id)

    def clear_only_runs(self) -> None:
        self.set_filter("all")

    def _show_only_caption(self, text: str) -> None:
        self.only_caption.setText(text)
        self.only_caption.setToolTip(text)
        self.only_caption.setVisible(bool(text))
        self.only_clear.setVisible(bool(text))

    @property
    def filter_mode(self) -> str:
        return self.proxy.mode

    def visible_runs(self) -> list[str]:
        return [self.proxy.index(r, 0).data() for r in range(self.proxy.rowCount())]

    def _on_current(self, current: QModelIndex, _previous: QModelIndex) -> None:
        if current.isValid() and not self._syncing:
            src = self.proxy.mapToSource(current)
            self.state.set_run(self.model.row(src.row())["run"])

    def _select_run(self, run_id: str) -> None:
        r = self.model.row_of(run_id) if run_id else None
        sel = self.view.selectionModel()
        with QSignalBlocker(sel):
            if r is None:
                sel.clearSelection()
                return
            idx = self.proxy.mapFromSource(self.model.index(r, 0))
            if not idx.isValid():
                sel.clearSelection()
                return
            sel.setCurrentIndex(idx, QItemSelectionModel.SelectionFlag.ClearAndSelect
                                | QItemSelectionModel.SelectionFlag.Rows)
        self.view.scrollTo(idx)
        self.view.viewport().update()

    # --- navigation -------------------------------------------------------------------------
    def _order_from_current(self) -> tuple[list[str], int]:
        """Visible runs in table order, and where to start looking after the current run.

        When the current run is filtered out (e.g. it was just labeled under "Unlabeled"),
        the search continues after it in the set's natural order.
        """
        visible = self.visible_runs()
        cur = self.state.run_id
        pos = {r: i for i, r in enumerate(visible)}
        if cur in pos:
            return visible, pos[cur] + 1
        natural = {r: i for i, r in enumerate(self.state.run_ids)}
        if cur not in natural:
            return visible, 0
        here = natural[cur]
        start = next((i for i, r in enumerate(visible) if natural.get(r, -1) > here), len(visible))
        return visible, start

    def step_run(self, step: int) -> bool:
        """Select the next (step > 0) or previous visible run; False at the end."""
        runs, start = self._order_from_current()
        if not runs:
            return False
        if self.state.run_id in runs:
            j = (start - 1) + step
        else:  # hidden current run: runs[start] is the next one after it, runs[start - 1] the previous
            j = start + step - 1 if step > 0 else start + step
        if not 0 <= j < len(runs):
            return False
        self.state.set_run(runs[j])
        return True

    def next_matching(self, mode: str) -> bool:
        """The next run after the current one (in the table's order, wrapping) that passes filter ``mode``.

        Runs hidden by the current filter are searched too (after the visible ones); the
        filter is reset to "All" when the run found is hidden.
        """
        order, start = self._order_from_current()
        order = order[start:] + order[:start]
        shown = set(order)
        order += [r for r in self.state.run_ids if r not in shown]
        cur = self.state.run_id
        rows = {r["run"]: r for r in self.model._rows}
        for rid in order:
            if rid != cur and rid in rows and row_matches(rows[rid], mode):
                if rid not in shown:
                    self.set_filter("all")
                self.state.set_run(rid)
                return True
        return False
