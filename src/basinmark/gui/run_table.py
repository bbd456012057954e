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

from PySide6.QtCore import (QAbstractTableModel, QEvent, QItemSelectionModel, QModelIndex, QRectF, QSignalBlocker,
                            QSize, QSortFilterProxyModel, Qt, Signal)
from PySide6.QtCore import QPointF
from PySide6.QtGui import (QColor, QFont, QFontMetrics, QIcon, QKeyEvent, QPainter, QPalette, QPen, QPixmap,
                           QPolygonF)
from PySide6.QtWidgets import (QAbstractItemView, QButtonGroup, QFrame, QHBoxLayout, QHeaderView, QLabel, QLineEdit,
                               QSizePolicy, QStyle, QTableView, QToolButton, QVBoxLayout, QWidget)

from basinmark.core import stats
from basinmark.core.classify import signed_commit_time
from basinmark.core.labels import FIXED_LABELS
from basinmark.gui.colours import outcome_colour
from basinmark.gui.label_table import final_label_counts
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


def filter_counts(df: pd.DataFrame) -> dict[str, int]:
    """How many rows of a labels table pass each quick filter (vectorised; the rules of row_matches)."""
    if not len(df):
        return {k: 0 for k, _t, _tip in FILTERS}
    hand = df["hand_label"].fillna("").astype(str)
    auto = df["auto_label"].fillna("").astype(str)
    flagged = df["flags"].fillna("").astype(str) != ""
    unlabeled = hand == ""
    return {
        "all": len(df),
        "look": int((unlabeled & (flagged | auto.isin(NOT_CLEAN))).sum()),
        "flagged": int(flagged.sum()),
        "unlabeled": int(unlabeled.sum()),
        "disagree": int(((hand != "") & (hand != auto)).sum()),
        "changed": int(df["data_changed"].fillna(False).astype(bool).sum()),
    }


def flag_words(flags: str | None) -> str:
    """``late_commit;several_visits`` as people read it: ``late commit, several visits``."""
    return ", ".join(f.strip().replace("_", " ") for f in (flags or "").split(";") if f.strip())


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
    """A read-only Qt model over the labels DataFrame (rows kept as plain lists for speed)."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self._rows: list[dict] = []
        self._index: dict[str, int] = {}
        self.products: list[str] = []
        #: says why a row is listed although the filter would hide it ("" when it matches); set by the proxy
        self.extra_note = lambda row: ""

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
        if index.column() == 0 and role in _NOTE_ROLES:  # the run's note: a mark beside its id, the text on hover
            shown = note_cell(self.row(index.row()), role, self.extra_note)
            if shown is not None:
                return shown
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
                return flag_words(value)
            return "" if value is None else str(value)
        if role == Qt.ItemDataRole.UserRole:  # sort key
            if key == "product_final_entry_fs":  # by distance from the TS, whichever end
                return float("inf") if value is None or not np.isfinite(value) else float(value)
            if key == "run":
                return index.row()  # the set's natural order
            return str(value or "")
        if role == Qt.ItemDataRole.ToolTipRole:
            note = self.extra_note(row)
            if note:
                return note
            if key == "product_final_entry_fs":
                return COMMIT_TIP
            if key == "hand_label" and row.get("reason"):
                return f"reason: {row['reason']}"
            if key == "data_changed" and value:
                return "The run's files changed after this label was set; look at it again."
        if role == Qt.ItemDataRole.DecorationRole and key in ("final_label", "auto_label") and value:
            return outcome_colour(str(value), self.products)
        if role == Qt.ItemDataRole.FontRole:
            extra = bool(self.extra_note(row))
            bold = key == "final_label" and bool(row.get("hand_label"))
            if extra or bold:
                f = QFont()
                f.setItalic(extra)   # listed only while on screen: it no longer matches the filter
                f.setBold(bold)
                return f
        return None


class RunFilterProxy(QSortFilterProxyModel):
    """Sorts by each column's sort key and keeps the rows of the quick filter, plus the pinned run."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.mode = "all"
        self.only: frozenset[str] | None = None  # a given list of runs (e.g. a summary warning's) instead
        self.pinned = ""   # the run on screen: listed even when it no longer matches the filter
        self.setSortRole(Qt.ItemDataRole.UserRole)

    def _refilter(self, change) -> None:
        if hasattr(self, "beginFilterChange"):  # Qt >= 6.9; invalidateFilter is deprecated there
            self.beginFilterChange()
            change()
            self.endFilterChange()
        else:
            change()
            self.invalidateFilter()

    def set_mode(self, mode: str, only: frozenset[str] | None = None) -> None:
        def change() -> None:
            self.mode, self.only, self.pinned = mode, only, ""
        self._refilter(change)

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

        def change() -> None:
            self.pinned = run_id
        if extra:
            self._refilter(change)
        else:
            self.pinned = run_id

    def is_extra(self, source_row: int) -> bool:
        """The row is listed only because it is pinned (it no longer matches the filter)."""
        return bool(self.extra_note(self.sourceModel().row(source_row)))

    def extra_note(self, row: dict) -> str:
        if not self.pinned or row["run"] != self.pinned or self.matches(row):
            return ""
        return f"Listed while it is on screen: it no longer matches {self.describe()}."

    def setSourceModel(self, model) -> None:  # noqa: N802
        super().setSourceModel(model)
        model.extra_note = self.extra_note

    def filterAcceptsRow(self, source_row: int, source_parent: QModelIndex) -> bool:  # noqa: N802
        row = self.sourceModel().row(source_row)
        return (bool(self.pinned) and row["run"] == self.pinned) or self.matches(row)


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
    """Quick-filter buttons (with counts), the sortable table, and the counts of the final labels."""

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
        lay.addWidget(self.search)
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

    # --- data ------------------------------------------------------------------------------
    def _on_labels(self) -> None:
        self._syncing = True  # rows vanish and reappear: Qt moves the current row, which is not a choice
        try:
            self.model.set_table(self.state.labels, list(getattr(self.state.rules, "products", []) or []))
        finally:
            self._syncing = False
        self.view.end_find()
        self._select_run(self.state.run_id)
        self._update_counts()
        self.fit_columns()

    def fit_columns(self) -> None:
        """Widen every column whose header or widest text would be cut (never narrows one a person widened)."""
        df = self.state.labels
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
        return filter_counts(self.state.labels)

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
        fcounts = self.filter_counts()
        for key, text, _tip in FILTERS:
            self.filter_buttons[key].setText(f"{text} {fcounts.get(key, 0)}")
        self._update_empty()

    def _update_empty(self) -> None:
        empty = len(self.state.labels) > 0 and self.proxy.rowCount() == 0
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
        return [self.proxy.index(r, 0).data() for r in range(self.proxy.rowCount())]

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
        rows = {r["run"]: r for r in self.model._rows}
        for rid in order:
            if rid != cur and rid in rows and row_matches(rows[rid], mode):
                if rid not in shown:
                    self.set_filter("all")
                self.state.set_run(rid)
                return True
        return False
