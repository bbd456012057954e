"""The run table: one row per run with its labels, quick filters (with counts), and a count bar per outcome.

The table's selected row is always the window's current run (``AppState.run_id``): a click, a
filter or a sort never leaves the molecule, traces and label panel on a run the table does not
select.  A filter that hides the current run moves to its first visible run (or to no run when it
is empty); a run whose new label no longer matches the filter stays listed (in italics) while it
is on screen, so that a label never moves the view to another run by itself.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import time

from PySide6.QtCore import (QAbstractProxyModel, QAbstractTableModel, QEvent, QItemSelectionModel, QModelIndex,
                            QPointF, QRectF, QSignalBlocker, QSize, Qt, QTimer, Signal)
from PySide6.QtGui import (QColor, QFont, QFontMetrics, QIcon, QKeyEvent, QPainter, QPalette, QPen, QPixmap,
                           QPolygonF)
from PySide6.QtWidgets import (QAbstractItemView, QButtonGroup, QFrame, QHBoxLayout, QHeaderView, QLabel, QLineEdit,
                               QSizePolicy, QStyle, QTableView, QToolButton, QVBoxLayout, QWidget)

from basinmark.core import stats
from basinmark.core.classify import flag_words, signed_commit_time
from basinmark.core.labels import FIXED_LABELS
from basinmark.gui.colours import outcome_colour
from basinmark.gui.label_table import LABEL_COLUMNS, final_label_counts
from basinmark.gui.flow_layout import FlowLayout, FlowRow
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
    ("look", "Needs a look", "Runs without a hand label that are flagged or not cleanly reactive "
                             "(recrossing, unfinished or ambiguous)"),
    ("flagged", "Flagged", "Runs with at least one flag"),
    ("unlabeled", "Unlabeled", "Runs without a hand label"),
    ("disagree", "Disagree", "Runs whose hand label differs from the automatic outcome"),
    ("changed", "Changed", "Runs whose files changed since they were labeled"),
)
FILTER_NAMES: dict[str, str] = {k: text for k, text, _tip in FILTERS}

#: automatic outcomes that are not a clean reaction into one product
NOT_CLEAN: frozenset[str] = frozenset({"recrossing", "unfinished", "ambiguous"})


def row_matches(row: dict, mode: str) -> bool:
    """Whether a labels-table row passes a quick filter (the same rules as :func:`filter_counts`)."""
    if mode == "flagged":
        return bool(row.get("flags"))
    if mode == "unlabeled":
        return not row.get("hand_label")
    if mode == "disagree":
        return bool(row.get("hand_label")) and row.get("hand_label") != row.get("auto_label")
    if mode == "changed":
        return bool(row.get("data_changed"))
    if mode == "look":
        return not row.get("hand_label") and (bool(row.get("flags")) or row.get("auto_label") in NOT_CLEAN)
    return True


def _texts(values) -> np.ndarray:
    return pd.Series(values, dtype=object).fillna("").astype(str).to_numpy(dtype=object)


def filter_masks(columns) -> dict[str, np.ndarray]:
    """Per quick filter, which rows of a labels table pass it (whole columns at once; the rules of
    :func:`row_matches`).  ``columns``: a labels DataFrame or a mapping of its columns to arrays."""
    hand, auto, flags = (_texts(columns[k]) for k in ("hand_label", "auto_label", "flags"))
    changed = pd.Series(columns["data_changed"], dtype=object).fillna(False).astype(bool).to_numpy()
    flagged = flags != ""
    unlabeled = hand == ""
    return {
        "all": np.ones(hand.size, dtype=bool),
        "look": unlabeled & (flagged | np.isin(auto, list(NOT_CLEAN))),
        "flagged": flagged,
        "unlabeled": unlabeled,
        "disagree": ~unlabeled & (hand != auto),
        "changed": changed,
    }


def filter_counts(df: pd.DataFrame) -> dict[str, int]:
    """How many rows of a labels table pass each quick filter (vectorised; the rules of row_matches)."""
    if not len(df):
        return {k: 0 for k, _t, _tip in FILTERS}
    return {k: int(m.sum()) for k, m in filter_masks(df).items()}


_NOTE_ROLES = (Qt.ItemDataRole.DecorationRole, Qt.ItemDataRole.ToolTipRole)
_NOTE_ICON: list[QIcon] = []


def note_icon() -> QIcon:
    """The mark of a run with a note: a small page with a folded corner, drawn once."""
    if not _NOTE_ICON:
        pix = QPixmap(14, 14)
        pix.fill(Qt.GlobalColor.transparent)
        p = QPainter(pix)
        p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
        ink = QColor("#5b5b5b")
        p.setPen(QPen(ink, 1.2))
        p.setBrush(QColor("#fff6c8"))
        p.drawPolygon(QPolygonF([QPointF(2.5, 1.5), QPointF(9, 1.5), QPointF(12, 4.5), QPointF(12, 12.5),
                                 QPointF(2.5, 12.5)]))
        for y in (6.0, 8.5, 11.0):
            p.drawLine(QPointF(4.5, y - 1), QPointF(10, y - 1))
        p.end()
        _NOTE_ICON.append(QIcon(pix))
    return _NOTE_ICON[0]


def note_cell(row: dict, role, extra_note=lambda row: "") -> Any:
    """The Run cell's note mark (decoration) and note text (tooltip) of a labels-table row; None without a note
    (and for the tooltip of a row listed only while on screen, which says that instead)."""
    note = row.get("note") or ""
    if not note:
        return None
    if role == Qt.ItemDataRole.DecorationRole:
        return note_icon()
    return None if extra_note(row) else f"note: {note}"


def search_text(df: pd.DataFrame) -> pd.Series:
    """Per run, the lower-cased searched cells joined by a line break (which no typed text contains)."""
    parts = []
    for col in SEARCHED:
        if col in df:
            cells = df[col].fillna("").astype(str)
            if col == "flags":
                cells = cells.str.replace("_", " ", regex=False).str.replace(";", ", ", regex=False)
            parts.append(cells)
    joined = parts[0].str.cat(parts[1:], sep="\n") if parts else pd.Series([""] * len(df))
    return joined.str.lower()


def search_runs(df: pd.DataFrame, text: str, haystack: pd.Series | None = None) -> list[str]:
    """Runs whose id, labels, flags (as words), labeler, reason or note contain ``text`` (any case), in order.

    ``haystack``: :func:`search_text` of ``df`` when already made (one pass per keystroke instead of eight)."""
    needle = text.strip().lower()
    if not needle or not len(df):
        return list(df["run"]) if len(df) else []
    hay = search_text(df) if haystack is None else haystack
    hit = hay.str.contains(needle, regex=False).to_numpy(dtype=bool)
    return [str(r) for r in df["run"].to_numpy()[hit]]


#: the columns the search field looks in
SEARCHED = ("run", "auto_label", "hand_label", "final_label", "flags", "labeler", "reason", "note")


class RunTableModel(QAbstractTableModel):
    """A read-only Qt model over the labels table, kept as one numpy array per column.

    Only the cells on screen are asked for (``data``); sorting and filtering never go through it: they are
    computed on the arrays (:meth:`sort_key`, :meth:`mask`) by :class:`RunFilterProxy`.  While a set loads,
    :meth:`append_runs` lists the runs that arrived (one ``rowsInserted`` per batch); the full table with
    outcomes and labels replaces them with one reset when loading ends (:meth:`set_table`).
    """

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self._c: dict[str, np.ndarray] = _blank_columns([])
        self._index: dict[str, int] = {}
        self.products: list[str] = []
        #: says why a row is listed although the filter would hide it ("" when it matches); set by the proxy
        self.extra_note = lambda row: ""
        #: the run listed even when it no longer matches the filter ("" for none); set by the proxy
        self.pinned_run = lambda: ""
        self._fonts: dict[tuple[bool, bool], QFont] = {}
        self._masks: dict[str, np.ndarray] | None = None   # per quick filter, kept until the rows change
        self._keys: dict[int, np.ndarray] = {}               # per column, likewise

    # --- contents ---------------------------------------------------------------------------
    def set_table(self, df: pd.DataFrame, products: list[str] | None = None) -> None:
        """Replace every row by the labels table ``df`` (one reset)."""
        if products is not None:
            self.products = list(products)
        self.beginResetModel()
        self._c = _columns_of(df)
        self._masks, self._keys = None, {}
        self._index = {r: i for i, r in enumerate(self._c["run"].tolist())}
        self.endResetModel()

    def update_rows(self, df: pd.DataFrame, runs) -> list[int] | None:
        """The rows of ``runs`` taken again from the labels table ``df`` (the model's runs in the model's order): their
        cells change (``dataChanged``), nothing is reset.  Returns those rows, or None when ``df`` lists other runs
        (then :meth:`set_table` is needed)."""
        rows = sorted(self._index[r] for r in runs if r in self._index)
        if len(df) != self.n_rows or len(rows) != len(set(runs)):
            return None
        sub = _columns_of(df.iloc[rows])
        if sub["run"].tolist() != self._c["run"][rows].tolist():
            return None
        self._c = {k: v.copy() for k, v in self._c.items()}   # never write into arrays a table may share
        for k, v in sub.items():
            self._c[k][rows] = v
        if self._masks is not None:   # the quick filters' masks: only these rows change
            self._masks = {mode: m.copy() for mode, m in self._masks.items()}
            for mode, m in filter_masks(sub).items():
                self._masks[mode][rows] = m
        self._keys = {}
        last = len(COLUMNS) - 1
        for r in rows:
            self.dataChanged.emit(self.index(r, 0), self.index(r, last))
        return rows

    def append_runs(self, run_ids) -> int:
        """List runs that arrived while the set loads (no outcome or label yet): one ``rowsInserted``.

        Runs already listed are skipped; returns how many were added."""
        new = [str(r) for r in dict.fromkeys(run_ids) if str(r) not in self._index]
        if not new:
            return 0
        n = len(self._c["run"])
        add = _blank_columns(new)
        self.beginInsertRows(QModelIndex(), n, n + len(new) - 1)
        self._c = {k: np.concatenate([v, add[k]]) for k, v in self._c.items()}
        self._masks, self._keys = None, {}
        self._index.update({r: n + i for i, r in enumerate(new)})
        self.endInsertRows()
        return len(new)

    @property
    def n_rows(self) -> int:
        return len(self._c["run"])

    def column(self, key: str) -> np.ndarray:
        """One column of every row, in the model's (the set's) order."""
        return self._c[key]

    def row(self, r: int) -> dict:
        return {k: _plain(v[r]) for k, v in self._c.items()}

    def row_of(self, run_id: str) -> int | None:
        return self._index.get(run_id)

    # --- arrays for the proxy -----------------------------------------------------------------
    def mask(self, mode: str) -> np.ndarray:
        """Which rows pass quick filter ``mode`` (the rules of :func:`row_matches`, on whole columns)."""
        if self._masks is None:
            self._masks = filter_masks(self._c)
        return self._masks[mode].copy() if mode in self._masks else np.ones(self.n_rows, dtype=bool)

    def sort_key(self, column: int) -> np.ndarray:
        """A number per row whose order is the column's order (ties are broken by the set's order)."""
        if column not in self._keys:
            self._keys[column] = self._sort_key(COLUMNS[column][0])
        return self._keys[column]

    def _sort_key(self, key: str) -> np.ndarray:
        values = self._c[key]
        if key == "run":
            return np.arange(len(values), dtype=np.float64)  # the set's natural order
        if key == "product_final_entry_fs":  # by distance from the TS, whichever end; no commit last
            v = values.astype(np.float64)
            return np.where(np.isfinite(v), v, np.inf)
        if key == "data_changed":
            return values.astype(bool).astype(np.float64)
        if key == "flags":
            values = np.array([flag_words(v) for v in values.tolist()], dtype=object)
        text = np.array([str(v or "") for v in values.tolist()], dtype=object)
        # ranks of the texts in code-point order (the order Qt's own string sort used)
        _uniq, codes = np.unique(text.astype(str), return_inverse=True) if len(text) else (None, np.zeros(0, int))
        return codes.astype(np.float64)

    # --- Qt's model interface ------------------------------------------------------------------
    def rowCount(self, parent=QModelIndex()) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(self._c["run"])

    def columnCount(self, parent=QModelIndex()) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(COLUMNS)

    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):  # noqa: N802
        if orientation == Qt.Orientation.Horizontal and role == Qt.ItemDataRole.DisplayRole:
            return COLUMNS[section][1]
        if (orientation == Qt.Orientation.Horizontal and role == Qt.ItemDataRole.ToolTipRole
                and COLUMNS[section][0] == "product_final_entry_fs"):
            return COMMIT_TIP
        return None

    def _note(self, r: int) -> str:
        pinned = self.pinned_run()
        if not pinned or self._c["run"][r] != pinned:
            return ""
        return self.extra_note(self.row(r))

    def _font(self, italic: bool, bold: bool) -> QFont:
        f = self._fonts.get((italic, bold))
        if f is None:
            f = QFont()
            f.setItalic(italic)
            f.setBold(bold)
            self._fonts[(italic, bold)] = f
        return f

    def data(self, index: QModelIndex, role=Qt.ItemDataRole.DisplayRole) -> Any:
        if not index.isValid():
            return None
        return self.cell(index.row(), index.column(), role)

    def cell(self, r: int, column: int, role=Qt.ItemDataRole.DisplayRole) -> Any:
        """What :meth:`data` gives for row ``r``, ``column`` and ``role`` (asked directly by the filter proxy)."""
        if column == 0 and role in _NOTE_ROLES and self._c["note"][r]:
            # the run's note: a mark beside its id, the text on hover
            shown = note_cell(self.row(r), role, self.extra_note)
            if shown is not None:
                return shown
        key = COLUMNS[column][0]
        value = _plain(self._c[key][r])
        if role == Qt.ItemDataRole.DisplayRole:
            if key == "product_final_entry_fs":  # on the run's time axis: negative at the backward end
                t = signed_commit_time(self._c["product_end"][r], value)
                return "" if t is None else f"{t:.1f}"
            if key == "data_changed":
                return "changed" if value else ""
            if key == "flags":
                return flag_words(value)
            return "" if value is None else str(value)
        if role == Qt.ItemDataRole.ToolTipRole:
            note = self._note(r)
            if note:
                return note
            if key == "product_final_entry_fs":
                return COMMIT_TIP
            if key == "hand_label" and self._c["reason"][r]:
                return f"reason: {self._c['reason'][r]}"
            if key == "data_changed" and value:
                return "The run's files changed after this label was set; look at it again."
        if role == Qt.ItemDataRole.DecorationRole and key in ("final_label", "auto_label") and value:
            return outcome_colour(str(value), self.products)
        if role == Qt.ItemDataRole.FontRole:
            extra = bool(self._note(r))
            bold = key == "final_label" and bool(self._c["hand_label"][r])
            if extra or bold:
                return self._font(extra, bold)  # italic: listed only while on screen (no longer matches)
        return None


def _plain(value):
    """A numpy scalar as the Python value the rest of the window expects."""
    return value.item() if isinstance(value, np.generic) else value


def _blank_columns(run_ids) -> dict[str, np.ndarray]:
    """Rows for runs with no outcome and no label yet (listed while the set loads)."""
    n = len(run_ids)
    out = {}
    for k in LABEL_COLUMNS:
        if k == "run":
            out[k] = np.array([str(r) for r in run_ids], dtype=object)
        elif k in _NUMBER_COLUMNS:
            out[k] = np.full(n, np.nan)
        elif k == "data_changed":
            out[k] = np.zeros(n, dtype=bool)
        else:
            out[k] = np.full(n, "", dtype=object)
    return out


_NUMBER_COLUMNS = frozenset({"product_final_entry_fs", "product_first_arrival_fs"})

#: the flags of every cell of the table (what QAbstractTableModel gives): selectable, enabled, no children
_CELL_FLAGS = Qt.ItemFlag.ItemIsSelectable | Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemNeverHasChildren


def _columns_of(df: pd.DataFrame) -> dict[str, np.ndarray]:
    """The labels table as one array per column (text as objects, "" for missing; times as floats)."""
    out = _blank_columns([])
    n = len(df)
    for k in LABEL_COLUMNS:
        if k not in df.columns:
            out[k] = _blank_columns([""] * n)[k]
        elif k in _NUMBER_COLUMNS:
            out[k] = pd.to_numeric(df[k], errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
        elif k == "data_changed":
            out[k] = df[k].fillna(False).astype(bool).to_numpy()
        else:
            out[k] = df[k].fillna("").to_numpy(dtype=object)
    out["run"] = np.array([str(r) for r in out["run"].tolist()], dtype=object)
    return out


class RunFilterProxy(QAbstractProxyModel):
    """The rows of the quick filter (plus the pinned run) in the chosen column's order, computed on arrays.

    A sort or filter is one numpy pass over the source model's columns (a stable sort: ties keep the set's
    order, as Qt's own sorting proxy did), never a call per cell.  Each change of the source reaches the
    view as one signal: a reset, or ``rowsInserted`` when runs that arrived while loading go at the end.
    A sort keeps the selection (a layout change).
    """

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.mode = "all"
        self.only: frozenset[str] | None = None  # a given list of runs (e.g. a summary warning's) instead
        self.pinned = ""   # the run on screen: listed even when it no longer matches the filter
        self.sort_column = -1
        self.sort_order = Qt.SortOrder.AscendingOrder
        self._rows = np.zeros(0, dtype=np.intp)   # proxy row -> source row
        self._pos = np.zeros(0, dtype=np.intp)    # source row -> proxy row, -1 when hidden

    # --- the mapping --------------------------------------------------------------------------
    def _order(self) -> np.ndarray:
        model = self.sourceModel()
        n = model.n_rows if model is not None else 0
        if n == 0:
            return np.zeros(0, dtype=np.intp)
        if self.only is not None:
            # one lookup per given run in the model's index (numpy's isin on text compared every given id with
            # every listed one: 1.3 s per keystroke of a search matching most of 10,000 runs)
            keep = np.zeros(n, dtype=bool)
            rows = [r for r in map(model.row_of, self.only) if r is not None]
            keep[np.array(rows, dtype=np.intp)] = True
        else:
            keep = model.mask(self.mode)
        if self.pinned:
            r = model.row_of(self.pinned)
            if r is not None:
                keep[r] = True
        rows = np.flatnonzero(keep)
        if self.sort_column >= 0 and rows.size:
            key = model.sort_key(self.sort_column)[rows]
            if self.sort_order == Qt.SortOrder.DescendingOrder:
                key = -key
            rows = rows[np.argsort(key, kind="stable")]
        return rows

    def _install(self, rows: np.ndarray) -> None:
        self._rows = rows.astype(np.intp, copy=False)
        n = self.sourceModel().n_rows if self.sourceModel() is not None else 0
        pos = np.full(n, -1, dtype=np.intp)
        pos[self._rows] = np.arange(self._rows.size, dtype=np.intp)
        self._pos = pos

    def _reset(self) -> None:
        self.beginResetModel()
        self._install(self._order())
        self.endResetModel()

    def _source_about_to_reset(self) -> None:
        self.beginResetModel()

    def _source_reset(self) -> None:
        self._install(self._order())
        self.endResetModel()

    def _source_inserted(self, _parent, _first, _last) -> None:
        new = self._order()
        old = self._rows
        if new.size > old.size and np.array_equal(new[:old.size], old):
            self.beginInsertRows(QModelIndex(), int(old.size), int(new.size) - 1)
            self._install(new)
            self.endInsertRows()
        elif np.array_equal(new, old):
            self._install(new)  # the new runs are all filtered out: nothing the view shows changes
        else:
            self.beginResetModel()
            self._install(new)
            self.endResetModel()

    def setSourceModel(self, model) -> None:  # noqa: N802
        super().setSourceModel(model)
        model.extra_note = self.extra_note
        model.pinned_run = lambda: self.pinned
        model.modelAboutToBeReset.connect(self._source_about_to_reset)
        model.modelReset.connect(self._source_reset)
        model.rowsInserted.connect(self._source_inserted)
        model.dataChanged.connect(self._source_data_changed)
        self._reset()

    def _source_data_changed(self, top_left, bottom_right, roles=()) -> None:
        for r in range(top_left.row(), bottom_right.row() + 1):
            p = self._pos[r] if r < self._pos.size else -1
            if p >= 0:
                self.dataChanged.emit(self.index(int(p), top_left.column()),
                                      self.index(int(p), bottom_right.column()), roles)

    def _source_row(self, index: QModelIndex) -> int | None:
        """The source row behind a proxy index, found in Python (None: no such row, or no source)."""
        r = index.row()
        if self.sourceModel() is None or not 0 <= r < self._rows.size or not index.isValid():
            return None
        return int(self._rows[r])

    def data(self, index: QModelIndex, role=Qt.ItemDataRole.DisplayRole) -> Any:
        """The source row's cell, asked of the source model in Python.  (The base class maps the index through
        :meth:`mapToSource`, whose source index calls back into Python twice: each call from Qt into Python waits
        for Python's lock, which a busy loader thread holds, and a repaint of the table made ~4 such calls per
        cell and role.)"""
        row = self._source_row(index)
        return None if row is None else self.sourceModel().cell(row, index.column(), role)

    def multiData(self, index: QModelIndex, roles) -> None:  # noqa: N802
        """Every role a cell is painted with, filled in one call from Qt (the item delegate asks seven roles per
        cell at once; answered role by role, each was a call from Qt into Python waiting for Python's lock)."""
        row = self._source_row(index)
        if row is None:
            for item in roles:
                item.clearData()
            return
        model, column = self.sourceModel(), index.column()
        for item in roles:
            item.setData(model.cell(row, column, item.role()))

    def flags(self, index: QModelIndex):
        """Enabled and selectable (the source's own flags, without mapping the index through Python twice)."""
        if not index.isValid():
            return Qt.ItemFlag.NoItemFlags
        return _CELL_FLAGS

    def mapToSource(self, proxy_index: QModelIndex) -> QModelIndex:  # noqa: N802
        if not proxy_index.isValid() or self.sourceModel() is None:
            return QModelIndex()
        r = proxy_index.row()
        if not 0 <= r < self._rows.size:
            return QModelIndex()
        return self.sourceModel().index(int(self._rows[r]), proxy_index.column())

    def mapFromSource(self, source_index: QModelIndex) -> QModelIndex:  # noqa: N802
        if not source_index.isValid():
            return QModelIndex()
        r = source_index.row()
        if not 0 <= r < self._pos.size or self._pos[r] < 0:
            return QModelIndex()
        return self.createIndex(int(self._pos[r]), source_index.column())

    def index(self, row: int, column: int, parent=QModelIndex()) -> QModelIndex:
        if parent.isValid() or not (0 <= row < self._rows.size and 0 <= column < len(COLUMNS)):
            return QModelIndex()
        return self.createIndex(row, column)

    def parent(self, *args):  # noqa: D401  (index.parent() and QObject.parent() share the name)
        if args:
            return QModelIndex()
        return super().parent()

    def rowCount(self, parent=QModelIndex()) -> int:  # noqa: N802
        return 0 if parent.isValid() else int(self._rows.size)

    def columnCount(self, parent=QModelIndex()) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(COLUMNS)

    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):  # noqa: N802
        if orientation == Qt.Orientation.Horizontal and self.sourceModel() is not None:
            return self.sourceModel().headerData(section, orientation, role)
        return None

    def sort(self, column: int, order=Qt.SortOrder.AscendingOrder) -> None:
        """Order the rows by ``column`` (a layout change: the selection stays on its run)."""
        self.sort_column, self.sort_order = column, order
        self._relayout(self._order())

    def rows_changed(self) -> None:
        """Some source rows' cells changed: filter and sort again; the same rows in another order are a layout change,
        other rows listed a reset (nothing at all when neither)."""
        rows = self._order()
        if np.array_equal(rows, self._rows):
            return
        if rows.size == self._rows.size and np.array_equal(np.sort(rows), np.sort(self._rows)):
            self._relayout(rows)
        else:
            self.beginResetModel()
            self._install(rows)
            self.endResetModel()

    def _relayout(self, rows: np.ndarray) -> None:
        self.layoutAboutToBeChanged.emit()
        persistent = self.persistentIndexList()
        sources = [(int(self._rows[i.row()]) if 0 <= i.row() < self._rows.size else -1, i.column())
                   for i in persistent]
        self._install(rows)
        self.changePersistentIndexList(persistent, [
            self.createIndex(int(self._pos[s]), c) if s >= 0 and self._pos[s] >= 0 else QModelIndex()
            for s, c in sources])
        self.layoutChanged.emit()

    def source_rows(self) -> np.ndarray:
        """The source rows listed, in the view's order."""
        return self._rows.copy()

    def visible_runs(self) -> list[str]:
        model = self.sourceModel()
        return model.column("run")[self._rows].tolist() if model is not None and self._rows.size else []

    # --- the filter ---------------------------------------------------------------------------
    def set_mode(self, mode: str, only: frozenset[str] | None = None) -> None:
        self.mode, self.only, self.pinned = mode, only, ""
        self._reset()

    def matches(self, row: dict) -> bool:
        """The row passes the quick filter (or is one of the given runs), pin aside."""
        if self.only is not None:
            return row["run"] in self.only
        return row_matches(row, self.mode)

    def describe(self) -> str:
        return "the given list of runs" if self.only is not None else f"the filter '{FILTER_NAMES.get(self.mode, self.mode)}'"

    def set_pinned(self, run_id: str) -> None:
        """Pin another run; the filter is run again only when the old pin was listed for its pin alone."""
        old = self.pinned
        if run_id == old:
            return
        model = self.sourceModel()
        r = model.row_of(old) if old else None
        extra = r is not None and not self.matches(model.row(r))
        self.pinned = run_id
        if extra:
            self._reset()

    def is_extra(self, source_row: int) -> bool:
        """The row is listed only because it is pinned (it no longer matches the filter)."""
        return bool(self.extra_note(self.sourceModel().row(source_row)))

    def extra_note(self, row: dict) -> str:
        if not self.pinned or row["run"] != self.pinned or self.matches(row):
            return ""
        return f"Listed while it is on screen: it no longer matches {self.describe()}."


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


def _widest(texts, metrics: QFontMetrics) -> int:
    return max((metrics.horizontalAdvance(t) for t in texts if t), default=0)


def column_widths(view: QTableView, df: pd.DataFrame, products: list[str]) -> list[int]:
    """Pixels each column needs to show its widest text whole, with the cell's margins and colour mark.

    Measured on the distinct texts, not on a sample of rows: a label set later (or a long labeler name)
    must not come out as "ambigu…".  The label columns fit every label of the rules, set or not.
    """
    style = view.style()
    pad = 2 * (style.pixelMetric(QStyle.PixelMetric.PM_FocusFrameHMargin, None, view) + 1) + 6  # + italic slack
    icon = view.iconSize().width() if view.iconSize().isValid() else -1
    icon = (icon if icon > 0 else style.pixelMetric(QStyle.PixelMetric.PM_SmallIconSize, None, view)) + pad
    fm = QFontMetrics(view.font())
    bold = QFont(view.font())
    bold.setBold(True)
    fmb = QFontMetrics(bold)
    vocabulary = list(products) + list(FIXED_LABELS)

    def texts(col: str) -> list[str]:
        return [str(x) for x in pd.unique(df[col].fillna("").astype(str))] if col in df else []

    out = []
    for key, _title in COLUMNS:
        if key == "run":
            runs = df["run"].astype(str)
            ids = list(runs[runs.str.len().nlargest(40).index])  # the longest ids (widths follow lengths)
            w = _widest(ids, fm) + pad + (icon if "note" in df and (df["note"].fillna("") != "").any() else 0)
        elif key in ("auto_label", "final_label"):
            w = _widest(vocabulary + texts(key), fmb if key == "final_label" else fm) + pad + icon
        elif key == "hand_label":
            w = _widest(vocabulary + texts(key), fm) + pad
        elif key == "product_final_entry_fs":
            v = pd.to_numeric(df[key], errors="coerce").to_numpy(float)
            ok = np.isfinite(v)
            w = _widest([f"{-x:.1f}" for x in (v[ok].min(), v[ok].max())] if ok.any() else [], fm) + pad
        elif key == "flags":
            w = _widest([flag_words(t) for t in texts(key)], fm) + pad
        elif key == "data_changed":
            w = _widest(["changed"], fm) + pad
        else:
            w = _widest(texts(key), fm) + pad
        out.append(int(w))
    return out


def _show(widget: QWidget, on: bool) -> None:
    """Show or hide only on a change: each setVisible call re-runs the layout (measured: ~1 ms each)."""
    if widget.isHidden() == on:
        widget.setVisible(on)


_MODIFIER_KEYS = frozenset({Qt.Key.Key_Shift, Qt.Key.Key_Control, Qt.Key.Key_Alt, Qt.Key.Key_Meta,
                            Qt.Key.Key_AltGr, Qt.Key.Key_CapsLock})


class FrozenRunColumn(QTableView):
    """The Run column drawn again over the table's left edge, so the run id stays in view when the table
    scrolls right.  It shares the table's model and selection; it never takes the keyboard focus (clicks in
    it give the focus to the table, where number keys and finding a run by its id act)."""

    def __init__(self, table: "RunTableView") -> None:
        super().__init__(table)
        self.table = table
        self.setObjectName("frozenRunColumn")
        self.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        self.verticalHeader().setVisible(False)
        self.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Fixed)
        self.horizontalHeader().setSortIndicatorShown(True)
        self.horizontalHeader().setSectionsClickable(True)
        self.horizontalHeader().sectionClicked.connect(lambda c: self.table._frozen_sort(c))
        self.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.setAlternatingRowColors(True)
        self.setFrameShape(QFrame.Shape.NoFrame)
        self.setTextElideMode(Qt.TextElideMode.ElideMiddle)  # if ever narrowed by hand: both ends of an id stay

    def mousePressEvent(self, event) -> None:  # noqa: N802
        self.table.end_find()
        self.table.setFocus(Qt.FocusReason.MouseFocusReason)
        super().mousePressEvent(event)

    def wheelEvent(self, event) -> None:  # noqa: N802
        self.table.wheelEvent(event)


class RunTableView(QTableView):
    """The table of runs.  Typing a run id finds it; it never triggers single-letter commands.

    A letter (or ``-``, ``_``, ``.``) starts finding a run by its id; while finding (until a pause of
    ``FIND_TIMEOUT_S``, Escape, Enter, a click or leaving the table) digits go on into the text
    instead of labeling.  A digit typed when not finding is a label key (the label actions are
    attached to this view by the window).
    """

    find_typed = Signal(str)      # the whole text typed so far
    find_ended = Signal()

    FIND_TIMEOUT_S = 1.5
    _STARTERS = frozenset("-_.")

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.find_text = ""
        self._find_at = 0.0
        self.frozen = FrozenRunColumn(self)
        self.horizontalHeader().sectionResized.connect(self._column_resized)
        self.horizontalHeader().sortIndicatorChanged.connect(
            lambda section, order: self.frozen.horizontalHeader().setSortIndicator(section, order))
        self.verticalScrollBar().valueChanged.connect(self.frozen.verticalScrollBar().setValue)
        self.frozen.verticalScrollBar().valueChanged.connect(self.verticalScrollBar().setValue)

    # --- the Run column kept in view (FrozenRunColumn) -----------------------------------------
    def setModel(self, model) -> None:  # noqa: N802
        super().setModel(model)
        self.frozen.setModel(model)
        self.frozen.setSelectionModel(self.selectionModel())  # one selection: the current run
        model.modelReset.connect(self._frozen_columns)
        model.layoutChanged.connect(self._frozen_columns)
        self._frozen_columns()

    def _frozen_columns(self) -> None:
        model = self.model()
        for c in range(1, model.columnCount() if model is not None else 0):
            self.frozen.setColumnHidden(c, True)
        self._place_frozen()

    def _column_resized(self, column: int, _old: int, _new: int) -> None:
        if column == 0:
            self._place_frozen()

    def _place_frozen(self) -> None:
        """Lay the Run column over the table's left edge, as wide and high as the table's own."""
        f = self.frozen
        f.setColumnWidth(0, self.columnWidth(0))
        f.verticalHeader().setDefaultSectionSize(self.verticalHeader().defaultSectionSize())
        f.horizontalHeader().setFixedHeight(self.horizontalHeader().height())
        left = self.frameWidth() + (self.verticalHeader().width() if self.verticalHeader().isVisible() else 0)
        f.setGeometry(left, self.frameWidth(), self.columnWidth(0),
                      self.viewport().height() + self.horizontalHeader().height())
        f.verticalScrollBar().setValue(self.verticalScrollBar().value())

    def resizeEvent(self, event) -> None:  # noqa: N802
        super().resizeEvent(event)
        self._place_frozen()

    def updateGeometries(self) -> None:  # noqa: N802
        super().updateGeometries()
        self._place_frozen()

    def _frozen_sort(self, section: int) -> None:
        """A click on the Run header over the table sorts as a click on the table's own header would."""
        h = self.horizontalHeader()
        up = h.sortIndicatorSection() == section and h.sortIndicatorOrder() == Qt.SortOrder.AscendingOrder
        h.setSortIndicator(section, Qt.SortOrder.DescendingOrder if up else Qt.SortOrder.AscendingOrder)

    @property
    def finding(self) -> bool:
        if self.find_text and time.monotonic() - self._find_at > self.FIND_TIMEOUT_S:
            self.end_find()
        return bool(self.find_text)

    def end_find(self) -> None:
        if self.find_text:
            self.find_text = ""
            self.find_ended.emit()

    def _find_char(self, event: QKeyEvent) -> str:
        """The character this key adds to the find text, or "" when it is not part of finding."""
        if event.modifiers() & (Qt.KeyboardModifier.ControlModifier | Qt.KeyboardModifier.AltModifier
                                | Qt.KeyboardModifier.MetaModifier):
            return ""
        text = event.text()
        if len(text) != 1 or not text.isprintable() or text.isspace():
            return ""
        if text.isalpha() or text in self._STARTERS:
            return text
        return text if self.finding else ""

    def event(self, event) -> bool:  # noqa: D401
        if event.type() == QEvent.Type.ShortcutOverride:
            if self._find_char(event) or (self.finding and event.key() in (
                    Qt.Key.Key_Escape, Qt.Key.Key_Backspace, Qt.Key.Key_Return, Qt.Key.Key_Enter)):
                event.accept()  # the key is typed into the find text, not taken as a shortcut
                return True
            if self.find_text and event.key() not in _MODIFIER_KEYS:
                self.end_find()  # any other key (a shortcut) ends finding
        return super().event(event)

    def keyPressEvent(self, event: QKeyEvent) -> None:  # noqa: N802
        ch = self._find_char(event)
        if ch:
            self.find_text += ch
            self._find_at = time.monotonic()
            self.find_typed.emit(self.find_text)
            event.accept()
            return
        if self.finding and event.key() == Qt.Key.Key_Backspace:
            self.find_text = self.find_text[:-1]
            self._find_at = time.monotonic()
            if self.find_text:
                self.find_typed.emit(self.find_text)
            else:
                self.find_ended.emit()
            event.accept()
            return
        if self.find_text:
            self.end_find()
            if event.key() in (Qt.Key.Key_Escape, Qt.Key.Key_Return, Qt.Key.Key_Enter):
                event.accept()
                return
        super().keyPressEvent(event)

    def keyboardSearch(self, search: str) -> None:  # noqa: N802
        """Qt's own search by the first letters of any column is replaced by finding run ids (above)."""

    def mousePressEvent(self, event) -> None:  # noqa: N802
        self.end_find()
        super().mousePressEvent(event)

    def focusOutEvent(self, event) -> None:  # noqa: N802
        self.end_find()
        super().focusOutEvent(event)


class RunTable(QWidget):
    """Quick-filter buttons (with counts), the sortable table, and the counts of the final labels.

    While a set loads, the runs that arrived are listed every ``ARRIVAL_BATCH_MS`` (they can be looked at
    at once) with the count so far; their outcomes and labels fill in when loading ends.
    """

    ARRIVAL_BATCH_MS = 150

    def __init__(self, state: AppState, parent=None) -> None:
        super().__init__(parent)
        self.state = state
        self._syncing = False
        self._finding_run = False
        self._last_run = ""    # the run shown before a filter left no run to show
        self.model = RunTableModel(self)
        self.proxy = RunFilterProxy(self)
        self.proxy.setSourceModel(self.model)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(2, 2, 2, 2)
        # the quick filters wrap onto a second row in a narrow table (their counts grow with the labels: one row
        # of them once set the whole window's smallest width past a laptop screen's)
        bar = FlowLayout(None, 2, 0)
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
        self.filter_buttons["all"].setChecked(True)
        # search: runs whose id, labels, flags, labeler, reason or note contain the text (search_runs)
        self.search = QLineEdit(self)
        self.search.setObjectName("runSearch")
        self.search.setPlaceholderText("Search ids, labels, reasons, notes…")
        self.search.setClearButtonEnabled(True)
        self.search.setToolTip("List only the runs whose id, labels, flags, labeler, reason or note contain this "
                               "text (any case). Enter goes to the table; clearing it shows the filter again.")
        self.search.textChanged.connect(self._search_changed)
        self.search.returnPressed.connect(lambda: self.view.setFocus(Qt.FocusReason.OtherFocusReason))
        self._mode_before_search = ""    # the quick filter to go back to when the search is cleared
        # the search shares the filters' flow: in a table a little too narrow for all six filters, the last
        # filter moves beside the search instead of taking a row of its own
        bar.addWidget(self.search, stretch=True)
        self.search.setMinimumWidth(160)
        self.filter_row = FlowRow(self)
        self.filter_row.setObjectName("filterRow")
        self.filter_row.setLayout(bar)
        lay.addWidget(self.filter_row)
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
        self.view = RunTableView(self)
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
        self.view.setHorizontalScrollMode(QAbstractItemView.ScrollMode.ScrollPerPixel)  # the Run column stays put
        lay.addWidget(self.view, 1)
        self.find_label = QLabel(self)
        self.find_label.setVisible(False)
        lay.addWidget(self.find_label)
        self.empty_label = QLabel(self)
        self.empty_label.setWordWrap(True)
        self.empty_label.setVisible(False)
        lay.addWidget(self.empty_label)
        self.count_bar = CountBar(self)
        lay.addWidget(self.count_bar)
        self.count_label = QLabel(self)
        self.count_label.setWordWrap(True)
        lay.addWidget(self.count_label)
        self.warning_label = QLabel(self)
        self.warning_label.setWordWrap(True)
        self.warning_label.setVisible(False)
        lay.addWidget(self.warning_label)
        sel = self.view.selectionModel()
        sel.selectionChanged.connect(self._on_selection)
        sel.currentRowChanged.connect(self._on_current)
        self.view.horizontalHeader().sortIndicatorChanged.connect(self._on_sorted)
        self.view.find_typed.connect(self.find_run)
        self.view.find_ended.connect(lambda: _show(self.find_label, False))
        state.labels_changed.connect(self._on_labels)
        state.run_changed.connect(self._on_run_changed)
        # runs arriving while a set loads are listed in batches (one rowsInserted each), not one by one
        self._load_total = 0
        self._arrivals = QTimer(self)
        self._arrivals.setSingleShot(True)
        self._arrivals.setInterval(self.ARRIVAL_BATCH_MS)
        self._arrivals.timeout.connect(self.list_arrived_runs)
        if hasattr(state, "runs_arrived"):
            state.runs_arrived.connect(self._on_arrived)

    # --- data ------------------------------------------------------------------------------
    def _on_arrived(self) -> None:
        if self.model.n_rows == 0:  # the first runs of a set are listed at once: that is what a person waits for
            self.list_arrived_runs()
        elif not self._arrivals.isActive():
            self._arrivals.start()

    def set_load_progress(self, done: int, total: int) -> None:
        """How many runs the loading set has in all (for the count so far, said again when it changes)."""
        changed = int(total) != self._load_total
        self._load_total = int(total)
        if changed and self.model.n_rows and self.listing_arrivals:
            self._update_arrival_counts()

    @property
    def listing_arrivals(self) -> bool:
        """Runs are listed as they arrive: the set is loading and its label table is not built yet."""
        return self.model.n_rows > len(self.state.labels)

    def list_arrived_runs(self) -> int:
        """List the runs that arrived since the last batch (one rowsInserted); returns how many."""
        tset = self.state.tset
        if tset is None:
            return 0
        ids = list(tset.runs)
        if len(ids) <= self.model.n_rows:
            return 0
        self._syncing = True  # rows appear: Qt may move the current row, which is not a choice
        try:
            added = self.model.append_runs(ids[self.model.n_rows:])
        finally:
            self._syncing = False
        if added:
            if self.state.run_id and self.selected_run() != self.state.run_id:
                self._select_run(self.state.run_id)
            self._update_counts()
        return added

    def _on_labels(self) -> None:
        delta = getattr(self.state, "labels_delta", None)
        if delta is not None and self._update_rows(delta):
            return
        self._syncing = True  # rows vanish and reappear: Qt moves the current row, which is not a choice
        try:
            self.model.set_table(self.state.labels, list(getattr(self.state.rules, "products", []) or []))
        finally:
            self._syncing = False
        self.view.end_find()
        self._select_run(self.state.run_id)
        self._update_counts()
        self.fit_columns()

    def _update_rows(self, runs) -> bool:
        """Only ``runs``' rows of the label table changed (a hand label, undo or note): their cells, the filter and
        order, counts and widths are updated (rebuilding 10,000 rows per label took ~0.4 s); False when the table
        lists other runs than the model (then it is set whole)."""
        self._syncing = True
        try:
            rows = self.model.update_rows(self.state.labels, runs)
            if rows is None:
                return False
            self.proxy.rows_changed()
        finally:
            self._syncing = False
        self.view.end_find()
        self._select_run(self.state.run_id)
        self._update_counts()
        if rows:
            self.fit_columns(self.state.labels.iloc[rows])
        return True

    def fit_columns(self, df: pd.DataFrame | None = None) -> None:
        """Widen every column whose header or widest text would be cut (never narrows one a person widened);
        ``df``: only these rows changed (else the whole label table is measured)."""
        df = self.state.labels if df is None else df
        if not len(df):
            return
        need = column_widths(self.view, df, list(getattr(self.state.rules, "products", []) or []))
        header = self.view.horizontalHeader()
        last = len(COLUMNS) - 1
        for c, w in enumerate(need):
            w = max(w, header.sectionSizeHint(c))
            if c != last and self.view.columnWidth(c) < w:
                self.view.setColumnWidth(c, w)
        if header.stretchLastSection():
            header.setMinimumSectionSize(min(header.minimumSectionSize(), 40))
            self._last_width = max(need[last], header.sectionSizeHint(last))
            if self.view.columnWidth(last) < self._last_width:
                self.view.setColumnWidth(last, self._last_width)

    def outcome_counts(self) -> dict[str, int]:
        """Counts of the final labels, products first, then the fixed labels, then anything else."""
        key = (id(self.state.labels), tuple(getattr(self.state.rules, "products", []) or []))
        if getattr(self, "_counts_key", None) != key or getattr(self, "_counts_of", None) is not self.state.labels:
            # kept per label table: the status bar asks on every frame while a run plays
            self._counts = self._outcome_counts()
            self._counts_key, self._counts_of = key, self.state.labels
        return dict(self._counts)

    def _outcome_counts(self) -> dict[str, int]:
        df = self.state.labels
        products = list(getattr(self.state.rules, "products", []) or [])
        return final_label_counts(df["final_label"] if len(df) else [], products)

    def filter_counts(self) -> dict[str, int]:
        if len(self.state.labels) and self.model.n_rows == len(self.state.labels):
            # the model's masks (kept, and updated row by row after a label) are those of the label table
            return {k: int(self.model.mask(k).sum()) for k, _t, _tip in FILTERS}
        return filter_counts(self.state.labels)

    def _update_counts(self) -> None:
        if self.listing_arrivals:
            self._update_arrival_counts()
            return
        counts = self.outcome_counts()
        products = list(getattr(self.state.rules, "products", []) or [])
        self.count_bar.set_counts(counts, products)
        n = len(self.state.labels)
        hand = int((self.state.labels["hand_label"] != "").sum()) if n else 0
        parts = [f"{k} {v:,}" for k, v in counts.items()]
        self.count_label.setText(f"{n:,} runs, {hand:,} labeled by hand" + (": " + " · ".join(parts) if parts else ""))
        warnings = stats.reliability_warnings({k: v for k, v in counts.items() if k != "unclassified"}, products) \
            if products and n else []
        more = f" (+{len(warnings) - 1} more: hover to read)" if len(warnings) > 1 else ""
        self.warning_label.setText(f"⚠ {warnings[0]}{more}" if warnings else "")
        self.warning_label.setToolTip("\n".join(warnings))
        self.warning_label.setVisible(bool(warnings))
        fcounts = self.filter_counts()
        for key, text, _tip in FILTERS:
            self.filter_buttons[key].setText(f"{text} {fcounts.get(key, 0):,}")
        self._update_empty()

    def _update_arrival_counts(self) -> None:
        n = self.model.n_rows
        total = max(self._load_total, n)
        self.count_label.setText(f"Loading: {n:,} of {total:,} runs listed so far; their outcomes and labels "
                                 "appear when loading has finished.")
        self.count_bar.set_counts({}, [])
        self.warning_label.setVisible(False)
        for key, text, _tip in FILTERS:  # counts of labels not known yet would mislead: only All is counted
            self.filter_buttons[key].setText(f"{text} {n:,}" if key == "all" else text)
        self._update_empty()

    def _update_empty(self) -> None:
        empty = self.model.n_rows > 0 and self.proxy.rowCount() == 0
        if empty:
            self.empty_label.setText(f"No run matches {self.proxy.describe()}: no run is selected. "
                                     "Click 'All' to see every run.")
        _show(self.empty_label, empty)

    # --- filters and selection ---------------------------------------------------------------
    def set_filter(self, mode: str) -> None:
        """Show the runs of one quick filter; the current run moves into it when the filter hides it."""
        self._end_search()
        self.filter_group.setExclusive(True)
        self.filter_buttons[mode].setChecked(True)
        self._show_only_caption("")
        self._apply_filter(mode, None)

    def show_only_runs(self, run_ids, caption: str, *, searching: bool = False) -> None:
        """Show exactly ``run_ids`` (e.g. the runs a summary warning names) under a caption saying why."""
        if not searching:
            self._end_search()
        only = frozenset(str(r) for r in run_ids)
        self.filter_group.setExclusive(False)  # no quick filter is in force now
        for b in self.filter_buttons.values():
            b.setChecked(False)
        self._show_only_caption(f"Showing only {len(only)} run{'s' if len(only) != 1 else ''}: {caption}")
        self._apply_filter("all", only)

    def _apply_filter(self, mode: str, only: frozenset[str] | None) -> None:
        """Filter the rows, then keep one current run: the one shown if still listed, else the one shown
        before an empty filter, else the first listed run, else none (never a run the table hides)."""
        self.view.end_find()
        current = self.state.run_id or self._last_run
        self._syncing = True
        try:
            self.proxy.set_mode(mode, only)
        finally:
            self._syncing = False
        visible = self.visible_runs()
        if current in visible:
            target = current
        elif self._last_run in visible:
            target = self._last_run
        else:
            target = visible[0] if visible else ""
        self.proxy.set_pinned(target)  # it matches the filter: pinning it only keeps it listed after a label
        if target:
            self._last_run = ""
            if target != self.state.run_id:
                self.state.set_run(target)
            else:
                self._select_run(target)
        else:
            if self.state.run_id:
                self._last_run = self.state.run_id
            self.state.clear_run()
        self._update_empty()

    def clear_only_runs(self) -> None:
        self.set_filter("all")

    # --- search -------------------------------------------------------------------------------
    def _end_search(self) -> None:
        """Empty the search field without going back to the filter before it (a filter is being chosen)."""
        self._mode_before_search = ""
        if self.search.text():
            with QSignalBlocker(self.search):
                self.search.clear()

    def _search_changed(self, text: str) -> None:
        if not text.strip():
            if self._mode_before_search:
                self.set_filter(self._mode_before_search)
            return
        mode = self._mode_before_search or (self.proxy.mode if self.proxy.only is None else "all")
        df = self.state.labels
        if getattr(self, "_haystack_of", None) is not df:  # made once per label table, not per keystroke
            self._haystack, self._haystack_of = search_text(df), df
        runs = search_runs(df, text, self._haystack)
        self.show_only_runs(runs, f"the search for “{text.strip()}” (ids, labels, flags, reasons, notes)",
                            searching=True)
        self._mode_before_search = mode

    def _show_only_caption(self, text: str) -> None:
        self.only_caption.setText(text)
        self.only_caption.setToolTip(text)
        self.only_caption.setVisible(bool(text))
        self.only_clear.setVisible(bool(text))

    @property
    def filter_mode(self) -> str:
        return self.proxy.mode

    def visible_runs(self) -> list[str]:
        return self.proxy.visible_runs()

    def selected_run(self) -> str:
        """The run of the selected row ("" when no row is selected)."""
        rows = self.view.selectionModel().selectedRows()
        return rows[0].data() if rows else ""

    def _run_at(self, index: QModelIndex) -> str:
        src = self.proxy.mapToSource(index)
        return self.model.row(src.row())["run"] if src.isValid() else ""

    def _on_selection(self, _selected, _deselected) -> None:
        """A row chosen by a click or a key becomes the current run (also when Qt's current row did not move)."""
        if self._syncing:
            return
        run = self.selected_run()
        if run and run != self.state.run_id:
            self.state.set_run(run)
        elif not run and self.state.run_id:
            self._select_run(self.state.run_id)  # a row cannot be deselected: the shown run stays selected

    def _on_current(self, current: QModelIndex, _previous: QModelIndex) -> None:
        if current.isValid() and not self._syncing:
            run = self._run_at(current)
            if run and run != self.state.run_id:
                self.state.set_run(run)

    def _on_sorted(self, *_args) -> None:
        self.view.end_find()
        self._select_run(self.state.run_id)

    def _on_run_changed(self, run_id: str) -> None:
        if run_id:
            self._last_run = ""
        if not self._finding_run:
            self.view.end_find()
        self._syncing = True
        try:
            self.proxy.set_pinned(run_id)
        finally:
            self._syncing = False
        self._select_run(run_id)

    def _select_run(self, run_id: str) -> None:
        r = self.model.row_of(run_id) if run_id else None
        sel = self.view.selectionModel()
        self._syncing = True
        try:
            idx = self.proxy.mapFromSource(self.model.index(r, 0)) if r is not None else QModelIndex()
            if not idx.isValid():
                sel.clearSelection()
                sel.setCurrentIndex(QModelIndex(), QItemSelectionModel.SelectionFlag.NoUpdate)
                return
            column = max(0, sel.currentIndex().column()) if sel.currentIndex().isValid() else 0
            cur = self.proxy.index(idx.row(), column)
            sel.setCurrentIndex(cur, QItemSelectionModel.SelectionFlag.ClearAndSelect
                                | QItemSelectionModel.SelectionFlag.Rows)
        finally:
            self._syncing = False
        self.view.scrollTo(idx)
        self.view.viewport().update()

    # --- finding a run by typing its id ------------------------------------------------------
    def find_run(self, text: str) -> str:
        """Select the first visible run whose id starts with ``text`` (else contains it); returns it or ""."""
        needle = text.lower()
        visible = self.visible_runs()
        hit = next((r for r in visible if r.lower().startswith(needle)), "") or \
            next((r for r in visible if needle in r.lower()), "")
        if hit:
            self.find_label.setText(f"Find: {text}  →  {hit}   (Esc stops; Ctrl+G goes to any run)")
            self._finding_run = True
            try:
                self.state.set_run(hit)
            finally:
                self._finding_run = False
        else:
            hidden = next((r for r in self.state.run_ids if needle in r.lower()), "")
            where = f"{hidden} is hidden by {self.proxy.describe()}" if hidden else "no run id contains it"
            self.find_label.setText(f"Find: {text}  —  {where}   (Ctrl+G goes to any run)")
        _show(self.find_label, True)
        return hit

    def go_to(self, run_id: str) -> bool:
        """Show ``run_id``; the filter returns to All when it hides that run.  False for an unknown id."""
        if run_id not in self.state.run_ids:
            return False
        if run_id not in self.visible_runs():
            self.state.set_run(run_id)   # first, so that set_filter keeps it
            self.set_filter("all")
        self.state.set_run(run_id)
        return True

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
        passes = self.model.mask(mode)
        for rid in order:
            r = self.model.row_of(rid)
            if rid != cur and r is not None and passes[r]:
                if rid not in shown:
                    self.set_filter("all")
                self.state.set_run(rid)
                return True
        return False
