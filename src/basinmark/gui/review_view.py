"""Review mode: compare two label sources, list their disagreements, and adjudicate them.

Sources (A and B, see :mod:`basinmark.gui.review_sources`): any person who labeled in the open journal,
the automatic classification (made now with the current rules, or as recorded), the final labels, anyone's
hand labels, or any of these from another journal file.  Every number (matrix, agreement, kappa, interval, band) comes
from :mod:`basinmark.core.review`; decisions go into the open journal as review events
(:meth:`LabelJournal.adjudicate`), and a ``review_complete`` event is written when the last
disagreement is settled.  A disagreement counts as settled when the journal holds a review event for
that run naming the same two labels.
"""

from __future__ import annotations

import math
from pathlib import Path

import pandas as pd
from PySide6.QtCore import QAbstractTableModel, QEvent, QModelIndex, QSignalBlocker, Qt, QTimer, Signal
from PySide6.QtGui import QAction, QBrush, QColor, QFont, QKeySequence, QPalette
from PySide6.QtWidgets import (QAbstractItemView, QComboBox, QDockWidget, QFormLayout, QHBoxLayout,
                               QHeaderView, QLabel, QLineEdit, QPushButton, QTableView, QTableWidget,
                               QTableWidgetItem, QVBoxLayout, QWidget)

from basinmark.core.cells import column_values, is_missing
from basinmark.core.errors import BasinmarkError
from basinmark.core.review import SE_METHOD, Review, compare_labels, people, render_markdown
from basinmark.core.text import printable
from basinmark.gui.flow_layout import flow_row
from basinmark.gui.export_folder import ask_export_path
from basinmark.gui.label_panel import panel_labels
from basinmark.gui.review_sources import SourcePicker, source_labels
from basinmark.gui.movie import find_menu

EMPTY_HINT = {
    "auto": "no automatic labels are recorded in the journal; choose 'automatic, current rules' to compare the "
            "classification made now",
    "hand": "nobody has labeled a run by hand yet",
    "person": "this person has no label in force (all undone)",
}
QUEUE_COLUMNS = ["run", "A", "labeler A", "reason A", "B", "labeler B", "reason B"]


def settled_runs(journal, review: Review) -> set[str]:
    """Runs of the review's disagreements that the journal already holds a decision for (same two labels)."""
    if journal is None or not len(review.disagreements):
        return set()
    decided = journal.review_decisions()
    if not decided:
        return set()
    dis = review.disagreements
    keys = zip(column_values(dis["run"]), column_values(dis["label_a"]), column_values(dis["label_b"]))
    return {key[0] for key in keys if key in decided}


class QueueModel(QAbstractTableModel):
    """The disagreement queue's rows; a cell's text is made when the view asks for it, i.e. while it is on screen
    (an item for every cell, made in the comparing turn, took 100 ms for 2,048 disagreements at 10,000 runs)."""

    NOT_IN_SET = "this run is not in the open set"

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self._rows: list[list] = []
        self._elsewhere: list[bool] = []

    def set_rows(self, queue: pd.DataFrame, in_set=None) -> None:
        """The rows of ``queue`` (its columns in :data:`QUEUE_COLUMNS` order); ``in_set(run)`` says whether a run is
        in the open set (None: no set open, no run marked)."""
        self.beginResetModel()
        self._rows = queue.to_numpy(dtype=object).tolist() if len(queue) else []
        self._elsewhere = [in_set is not None and not in_set(row[0]) for row in self._rows]
        self.endResetModel()

    def rowCount(self, parent=QModelIndex()) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(self._rows)

    def columnCount(self, parent=QModelIndex()) -> int:  # noqa: N802
        return 0 if parent.isValid() else len(QUEUE_COLUMNS)

    def headerData(self, section, orientation, role=Qt.ItemDataRole.DisplayRole):  # noqa: N802
        if role == Qt.ItemDataRole.DisplayRole and orientation == Qt.Orientation.Horizontal:
            return QUEUE_COLUMNS[section]
        return None

    def data(self, index, role=Qt.ItemDataRole.DisplayRole):
        if not index.isValid():
            return None
        if role == Qt.ItemDataRole.DisplayRole:
            value = self._rows[index.row()][index.column()]
            return "" if is_missing(value) else printable(value)
        if role == Qt.ItemDataRole.ToolTipRole and index.column() == 0 and self._elsewhere[index.row()]:
            return self.NOT_IN_SET
        return None


class QueueTable(QTableView):
    """The disagreement queue; label keys 1..9 and A/B decide the selected run while it has focus."""

    decision_key = Signal(str)   # "1".."9", "A" or "B"
    selection_changed = Signal()   # (silent while the view's signals are blocked)

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.queue_model = QueueModel(self)
        self.setModel(self.queue_model)
        self.selectionModel().selectionChanged.connect(lambda *_: self.selection_changed.emit())
        # widths fitted to the first rows only (every row's text was asked for otherwise)
        self.horizontalHeader().setResizeContentsPrecision(64)

    def rowCount(self) -> int:  # noqa: N802
        return self.queue_model.rowCount()

    def text(self, row: int, column: int) -> str:
        return self.queue_model.index(row, column).data() or ""

    def _key_text(self, event) -> str:
        if event.modifiers() & ~(Qt.KeyboardModifier.KeypadModifier | Qt.KeyboardModifier.ShiftModifier):
            return ""
        k = event.key()
        if Qt.Key.Key_1 <= k <= Qt.Key.Key_9:
            return str(k - Qt.Key.Key_0)
        if k == Qt.Key.Key_A:
            return "A"
        if k == Qt.Key.Key_B:
            return "B"
        return ""

    def event(self, event) -> bool:  # noqa: D401 - Qt override
        # take these keys before the window's shortcuts (label keys, atom numbers) see them
        if event.type() == QEvent.Type.ShortcutOverride and self._key_text(event):
            event.accept()
            return True
        return super().event(event)

    def keyPressEvent(self, event) -> None:  # noqa: N802
        text = self._key_text(event)
        if text:
            self.decision_key.emit(text)
            event.accept()
            return
        super().keyPressEvent(event)


def _auto_count(classification: pd.DataFrame) -> int:
    """How many runs :func:`~basinmark.core.review.current_auto_labels` gives a label (those with an outcome),
    without building their reasons: the sources are listed again in the turn that shows a loaded set, and
    the reasons' text of 10,000 runs made that turn longer (bench/bench_window_scale.py --why)."""
    if classification is None or not len(classification) or "outcome" not in classification:
        return 0
    outcome = classification["outcome"]
    return int((outcome.notna() & (outcome.astype(str) != "")).sum())


class ReviewPanel(QWidget):
    """Choose two label sources; see the agreement; work through the disagreements."""

    review_changed = Signal()
    decided = Signal(str, str)   # run, label
    message = Signal(str)

    def __init__(self, state, parent: QWidget | None = None, reviewer: str = "") -> None:
        super().__init__(parent)
        self.state = state
        self.review: Review | None = None
        self.queue: pd.DataFrame = pd.DataFrame()
        self._completed_key: tuple | None = None
        self._why_shown = ""
        lay = QVBoxLayout(self)
        lay.setContentsMargins(6, 4, 6, 4)

        form = QFormLayout()
        self.source_a = SourcePicker("A", state, self)
        self.source_b = SourcePicker("B", state, self)
        form.addRow("Compare", self.source_a)
        form.addRow("with", self.source_b)
        lay.addLayout(form)
        row = QHBoxLayout()
        self.compare_button = QPushButton("Compare", self)
        self.compare_button.setToolTip("Compare the two sources now")
        self.export_button = QPushButton("Export Report…", self)
        self.export_button.setToolTip("Write this review as a short Markdown report")
        row.addWidget(self.compare_button)
        row.addWidget(self.export_button)
        row.addStretch(1)
        lay.addLayout(row)

        self.summary = QLabel("Choose two label sources and press Compare.", self)
        self.summary.setWordWrap(True)
        self.summary.setTextFormat(Qt.TextFormat.RichText)
        self.summary.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        lay.addWidget(self.summary)
        self.warning = QLabel(self)
        self.warning.setWordWrap(True)
        self.warning.setObjectName("reviewWarning")
        self.warning.setVisible(False)
        lay.addWidget(self.warning)
        self.matrix = QTableWidget(self)
        self.matrix.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.matrix.setToolTip("Rows: labels of A, columns: labels of B; the diagonal is where they agree")
        self.matrix.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        self.matrix.setMaximumHeight(190)
        lay.addWidget(self.matrix)

        self.queue_title = QLabel("Disagreements", self)
        lay.addWidget(self.queue_title)
        self.queue_view = QueueTable(self)
        self.queue_view.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.queue_view.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.queue_view.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
        self.queue_view.verticalHeader().setVisible(False)
        self.queue_view.horizontalHeader().setStretchLastSection(True)
        self.queue_view.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        self.queue_view.setWordWrap(False)
        self.queue_view.verticalHeader().setDefaultSectionSize(self.fontMetrics().height() + 8)
        self.queue_view.setToolTip("Runs the two sources disagree on. Select one to see it; decide with the "
                                   "label keys 1–9, or A / B to take one side's label.")
        lay.addWidget(self.queue_view, 1)

        dec = QFormLayout()
        self.reason = QLineEdit(self)
        self.reason.setPlaceholderText("why this decision (recorded with it)")
        self.reason.setClearButtonEnabled(True)
        dec.addRow("Reason", self.reason)
        self.reviewer = QLineEdit(reviewer, self)
        self.reviewer.setToolTip("Recorded as the reviewer of every decision")
        dec.addRow("Reviewer", self.reviewer)
        lay.addLayout(dec)
        self.take_a = QPushButton("Take A", self)
        self.take_a.setToolTip("Decide for A's label (A)")
        self.take_b = QPushButton("Take B", self)
        self.take_b.setToolTip("Decide for B's label (B)")
        self.choice = QComboBox(self)
        self.choice.setToolTip("Or decide for another label (label keys 1–9 in the queue)")
        self.decide_button = QPushButton("Decide", self)
        self.decide_button.setToolTip("Record the label chosen on the left")
        self.complete_button = QPushButton("Record Review Complete", self)
        self.complete_button.setToolTip("Write a 'review complete' event with this review's summary")
        # the decision buttons wrap onto a second row in a narrow dock (one row scrolled the view sideways)
        lay.addWidget(flow_row(self, (self.take_a, self.take_b, self.choice, self.decide_button,
                                      self.complete_button)))
        self.status = QLabel(self)
        self.status.setWordWrap(True)
        lay.addWidget(self.status)

        for picker in (self.source_a, self.source_b):
            picker.changed.connect(self._source_changed)
        self.compare_button.clicked.connect(self.compare)
        self.export_button.clicked.connect(lambda: self.export_report())
        self.queue_view.selection_changed.connect(self._selected)
        self.queue_view.decision_key.connect(self.decide_by_key)
        self.take_a.clicked.connect(lambda: self.decide_side("A"))
        self.take_b.clicked.connect(lambda: self.decide_side("B"))
        self.decide_button.clicked.connect(lambda: self.decide(self.choice.currentText()))
        self.complete_button.clicked.connect(lambda: self.record_complete())
        # hidden, the sources are listed when the panel is shown or used (a large journal's sources are counted by
        # a pass over its events each: at 10,000 runs with two labelers, 96 ms of the load's last turn)
        self._sources_stale = True
        state.journal_changed.connect(self._sources_changed)
        state.rules_changed.connect(self._sources_changed)
        state.rules_changed.connect(self._fill_choices)
        self.refresh_sources()
        self._fill_choices()

    # --- sources ----------------------------------------------------------------------------
    def source_entries(self) -> tuple[list[tuple[tuple, str]], tuple, tuple]:
        """The open journal's label sources with their run counts, and the default A and B.

        Defaults: two people when two have labeled; else the automatic classification against the one
        person (current rules, so nothing has to be recorded first); else automatic against hand.
        """
        j, cls = self.state.journal, self.state.classification
        entries: list[tuple[tuple, str]] = []

        def runs(n: int) -> str:
            return f"{n} run{'s' if n != 1 else ''}"

        names = people(j) if j is not None else []
        # counted in one pass over the runs (each source built whole for its count: 215 ms at 10,000 runs)
        count = j.source_counts(names + ["auto", "final", "hand"]) if j is not None else {}
        for name in names:
            entries.append((("person", name), f"{name} — {runs(count[name])}"))
        if cls is not None:
            entries.append((("auto_now", ""), f"automatic, current rules — {runs(_auto_count(cls))}"))
        if j is not None:
            entries.append((("auto", ""), f"automatic, recorded in the journal — {runs(count['auto'])}"))
            entries.append((("final", ""), f"final labels (hand, else recorded automatic) — {runs(count['final'])}"))
            entries.append((("hand", ""), f"hand labels, anyone — {runs(count['hand'])}"))
        auto = ("auto_now", "") if cls is not None else ("auto", "")
        if len(names) >= 2:
            return entries, ("person", names[0]), ("person", names[1])
        if names:
            return entries, auto, ("person", names[0])
        return entries, auto, ("hand", "")

    def _sources_changed(self) -> None:
        if self.isVisible():
            self.refresh_sources()
        else:
            self._sources_stale = True

    def _ensure_sources(self) -> None:
        if self._sources_stale:
            self.refresh_sources()

    def refresh_sources(self) -> None:
        self._sources_stale = False
        entries, da, db = self.source_entries()
        self.source_a.fill(entries, da)
        self.source_b.fill(entries, db)
        self._update_enabled()

    def set_sources(self, a: tuple, b: tuple) -> None:
        """Choose A and B: each ``(kind, name)`` or ``(kind, name, which)`` (see review_sources.KINDS)."""
        self._ensure_sources()
        had = self.review is not None
        # compared once, with both chosen: after A alone the pair may be A against itself (swapping the two sides
        # then ended in an error and no review), and each comparison costs (110 ms at 10,000 runs)
        with QSignalBlocker(self.source_a), QSignalBlocker(self.source_b):
            self.source_a.set_source(*a)
            self.source_b.set_source(*b)
        if had:
            self.compare()

    def _source_changed(self) -> None:
        if self.review is not None:  # the numbers shown belong to the sources chosen before
            self.compare()

    def _fill_choices(self) -> None:
        keep = self.choice.currentText()
        self.choice.clear()
        labels = panel_labels(self.state.rules)
        self.choice.addItems([f"{lab}" for lab in labels])
        if keep in labels:
            self.choice.setCurrentText(keep)

    # --- comparing -------------------------------------------------------------------------
    def compare(self) -> Review | None:
        """Compare the chosen sources (through core.review) and show the result."""
        self._ensure_sources()
        j = self.state.journal
        if j is None:
            self._show_error("No label journal is open for this set, so there is nothing to review.")
            return None
        if getattr(self.state, "blind_labeler", ""):
            self._show_error("Blind labeling is on, so other people's labels stay hidden and nothing is compared. "
                             "Turn it off (Analysis ▸ Blind Labeling) to review.")
            return None
        order = panel_labels(self.state.rules)
        sa, sb = self.source_a.source(), self.source_b.source()
        try:
            if sa is None or sb is None:
                raise BasinmarkError("choose a label source for both A and B")
            if sa == sb:
                raise BasinmarkError("choose two different label sources for A and B")
            labels_a, notes_a = source_labels(self.state, sa)
            labels_b, notes_b = source_labels(self.state, sb)
            for note in notes_a + notes_b:
                self.message.emit(note)
            name_a, name_b = sa.title(), sb.title()
            if name_a == name_b:
                name_a, name_b = f"{name_a} (A)", f"{name_b} (B)"
            review = compare_labels(labels_a, labels_b, name_a=name_a, name_b=name_b, order=order)
            for side, src, lab in (("A", sa, labels_a), ("B", sb, labels_b)):
                if not len(lab):
                    review.warnings.insert(0, f"{side} ({src.title()}) labels no run: {EMPTY_HINT.get(src.kind, '')}"
                                           .rstrip(": "))
        except (BasinmarkError, ValueError) as exc:
            self._show_error(str(exc))
            return None
        self.review = review
        self._show_review()
        self.review_changed.emit()
        return review

    def reset(self, text: str = "Choose two label sources and press Compare.") -> None:
        """Forget the review shown (another set or journal is open): nothing of it may be decided any more."""
        self._show_error(text)
        self.summary.setText(text)

    def _show_error(self, text: str) -> None:
        self.review = None
        self.summary.setText(f"<b>Not compared:</b> {text}")
        self.warning.setVisible(False)
        self.matrix.clear()
        self.matrix.setRowCount(0)
        self.matrix.setColumnCount(0)
        self.queue = pd.DataFrame()
        self.queue_view.queue_model.set_rows(self.queue)
        self._update_enabled()

    def kappa_text(self) -> str:
        r = self.review
        if r is None or not math.isfinite(r.kappa):
            return "undefined"
        return f"{r.kappa:.3f}"

    def _show_review(self) -> None:
        r = self.review
        assert r is not None
        agree = "n/a" if not math.isfinite(r.agreement) else f"{100 * r.agreement:.1f} %"
        ci = ("" if not math.isfinite(r.ci[0]) else
              f" ({100 * r.confidence:g} % interval {r.ci[0]:.3f} to {r.ci[1]:.3f})")
        band = f" · Landis–Koch band: <b>{r.band}</b>" if r.band else ""
        self.summary.setText(
            f"<b>A</b> = {r.name_a}, <b>B</b> = {r.name_b}: {r.n} runs labeled by both · agreement "
            f"<b>{agree}</b> · Cohen's kappa <b>{self.kappa_text()}</b>{ci}{band}"
            f"<br><small>Kappa after Cohen (1960), interval from the {SE_METHOD}, bands after "
            f"Landis &amp; Koch (1977).</small>")
        self.summary.setToolTip(f"chance agreement {100 * r.chance_agreement:.1f} %"
                                if math.isfinite(r.chance_agreement) else "")
        pal = self.palette()
        dark = pal.color(QPalette.ColorRole.Window).lightness() < 128
        warn = QColor("#ffb4a9") if dark else QColor("#b3261e")
        self.warning.setStyleSheet(f"QLabel#reviewWarning {{ color: {warn.name()}; font-weight: bold; }}")
        self.warning.setText("\n".join(f"Caution: {w}" for w in r.warnings))
        self.warning.setVisible(bool(r.warnings))
        self._fill_matrix()
        self.refresh_queue(follow=True)

    def _fill_matrix(self) -> None:
        r = self.review
        conf = r.confusion
        self.matrix.clear()
        self.matrix.setRowCount(len(conf.index))
        self.matrix.setColumnCount(len(conf.columns))
        self.matrix.setHorizontalHeaderLabels([f"B: {c}" for c in conf.columns])
        self.matrix.setVerticalHeaderLabels([f"A: {i}" for i in conf.index])
        hl = QColor(self.palette().color(QPalette.ColorRole.Highlight))
        hl.setAlpha(70)
        bold = QFont(self.font())
        bold.setBold(True)
        for i, row in enumerate(conf.index):
            for k, col in enumerate(conf.columns):
                item = QTableWidgetItem(str(int(conf.iat[i, k])))
                item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                item.setToolTip(f"A said {row}, B said {col}: {int(conf.iat[i, k])} runs")
                if row == col:
                    item.setFont(bold)
                    item.setBackground(QBrush(hl))
                self.matrix.setItem(i, k, item)

    def refresh_queue(self, select: str | None = None, follow: bool = False) -> None:
        """The disagreements not yet settled in the journal.

        The selection stays on ``select`` (else the run selected before) when it is still in the queue;
        only with ``follow`` does a new selection move the window to that run (labels changing elsewhere
        never make the window jump).
        """
        r = self.review
        if r is None:
            return
        before = self.current_row()
        select = select or (before["run"] if before is not None else None)
        done = settled_runs(self.state.journal, r)
        q = r.disagreements[~r.disagreements["run"].isin(done)].reset_index(drop=True)
        self.queue = q
        self.queue_view.blockSignals(True)
        self.queue_view.clearSelection()
        tset = self.state.tset
        self.queue_view.queue_model.set_rows(q, None if tset is None else tset.__contains__)
        self.queue_view.resizeColumnsToContents()
        total = len(r.disagreements)
        self.queue_title.setText(f"Disagreements to decide: {len(q)} of {total}" if total else
                                 "Disagreements: none")
        runs = list(q["run"])
        target = runs.index(select) if select in runs else (0 if follow and runs else None)
        if target is not None:
            self.queue_view.selectRow(target)
        self.queue_view.blockSignals(False)
        if target is not None and follow:
            # the run is drawn in the next turn (with the queue in this one: 152 ms at 10,000 runs), if still selected
            QTimer.singleShot(0, self, self._selected)
        self._update_enabled()

    # --- deciding --------------------------------------------------------------------------
    def writable_reason(self) -> str:
        """Why decisions cannot be recorded now ('' when they can)."""
        st = self.state
        if st.journal is None:
            return "No label journal is open."
        if st.readonly:
            return ("The label journal is read-only here, so decisions cannot be recorded"
                    + (f": {st.journal_message}" if st.journal_message else "."))
        return ""

    def _update_enabled(self) -> None:
        why = self.writable_reason()
        has = len(self.queue) > 0 and self.review is not None
        for w in (self.take_a, self.take_b, self.choice, self.decide_button):
            w.setEnabled(not why and has)
        self.complete_button.setEnabled(not why and self.review is not None and not has)
        self.export_button.setEnabled(self.review is not None)
        self.reason.setEnabled(not why)
        if why:
            self.status.setText(why)
        elif self.status.text() == self._why_shown:
            self.status.setText("")
        self._why_shown = why

    def current_row(self) -> dict | None:
        rows = self.queue_view.selectionModel().selectedRows() if self.queue_view.selectionModel() else []
        if not rows or not len(self.queue):
            return None
        i = rows[0].row()
        return self.queue.iloc[i].to_dict() if 0 <= i < len(self.queue) else None

    def _selected(self) -> None:
        row = self.current_row()
        if row is not None:
            self.state.set_run(row["run"])
            if self.choice.findText(row["label_a"]) >= 0:
                self.choice.setCurrentText(row["label_a"])

    def decide_by_key(self, key: str) -> bool:
        if key in ("A", "B"):
            return self.decide_side(key)
        labels = panel_labels(self.state.rules)
        i = int(key) - 1
        if not 0 <= i < len(labels):
            self.status.setText(f"No label on key {key}.")
            return False
        return self.decide(labels[i])

    def decide_side(self, side: str) -> bool:
        row = self.current_row()
        if row is None:
            self.status.setText(self.writable_reason() or "Select a disagreement first.")
            return False
        return self.decide(row["label_a"] if side == "A" else row["label_b"])

    def decide(self, label: str) -> bool:
        """Record the reviewer's decision for the selected disagreement; True when it is on disk."""
        why = self.writable_reason()
        row = self.current_row()
        if why or row is None:
            self.status.setText(why or "Select a disagreement first.")
            return False
        run = row["run"]
        tset = self.state.tset
        if tset is None or run not in tset:
            self.status.setText(f"Run {run} is not in the open set, so it cannot be decided here.")
            return False
        reviewer = self.reviewer.text().strip() or None
        try:
            self.state.journal.adjudicate(run, label, content_hash=tset[run].content_hash,
                                          label_a=row["label_a"], label_b=row["label_b"], reviewer=reviewer,
                                          reason=self.reason.text().strip())
        except BasinmarkError as exc:
            self.status.setText(f"Not recorded: {exc}")
            return False
        self.reason.clear()
        runs = list(self.queue["run"])
        index = runs.index(run) if run in runs else 0
        later = [x for x in runs[index + 1:]] + [x for x in runs[:index]]
        self.state.refresh_labels()
        self.refresh_queue(select=later[0] if later else None, follow=True)
        msg = f"Decided: {run} → {label}"
        if not len(self.queue):
            self.record_complete()
            msg += "; every disagreement is decided and the review is recorded as complete"
        self.status.setText(msg)
        self.message.emit(msg)
        self.decided.emit(run, label)
        return True

    def record_complete(self) -> dict | None:
        """Write a 'review complete' event with the review's summary (once per review)."""
        r = self.review
        if r is None or self.writable_reason():
            return None
        summary = r.summary()
        key = (summary["labeler_a"], summary["labeler_b"], self.state.journal.last_seq)
        if key == self._completed_key:
            return None
        reviewer = self.reviewer.text().strip() or None
        try:
            ev = self.state.journal.review_complete(reviewer=reviewer, summary=summary,
                                                    reason=f"review of {r.name_a} against {r.name_b}")
        except BasinmarkError as exc:
            self.status.setText(f"Not recorded: {exc}")
            return None
        self._completed_key = (summary["labeler_a"], summary["labeler_b"], self.state.journal.last_seq)
        self.status.setText("Review recorded as complete.")
        return ev

    def export_report(self, path: str | Path | None = None) -> Path | None:
        """Write the review as Markdown (core.review.render_markdown)."""
        if self.review is None:
            self.status.setText("Compare two sources first; there is no review to export.")
            return None
        if path is None:
            window = getattr(self, "main_window", None)
            if window is None:
                self.status.setText("There is no window to ask where to write the report.")
                return None
            # the last export folder, never inside the set's folder (export_folder)
            name = f"{self.state.tset.name}-review.md" if self.state.tset is not None else "review.md"
            path = ask_export_path(window, "Export review report", name, "Markdown (*.md)")
            if not path:
                return None
        try:
            Path(path).write_text(render_markdown(self.review), encoding="utf-8")
        except OSError as exc:
            self.status.setText(f"Report not written: {exc}")
            return None
        self.status.setText(f"Review report written to {path}")
        return Path(path)


def install_review_dock(window) -> QDockWidget:
    """Add the Review dock (tabbed with the traces, hidden at first) and its menu actions."""
    reviewer = getattr(getattr(window, "label_panel", None), "labeler_name", "") or ""
    panel = ReviewPanel(window.state, window, reviewer=reviewer)
    panel.main_window = window  # for its export dialog (settings, set); window() is the dock when floating
    from basinmark.gui.analysis_area import add_analysis_dock

    dock = add_analysis_dock(window, "review", "Review", panel)
    panel.message.connect(lambda text: window.statusBar().showMessage(text, 6000))
    def on_labels() -> None:
        # people who label in this session appear as sources at once (while the dock shows; else on show)
        if dock.isVisible():
            panel.refresh_sources()
            panel.refresh_queue()

    window.state.labels_changed.connect(on_labels)

    def on_new_set() -> None:
        # a review belongs to one set and journal: drop it, and compare afresh if the dock is showing
        panel.reset()
        if dock.isVisible() and window.state.journal is not None:
            panel.compare()

    window.state.set_changed.connect(on_new_set)
    window.state.journal_changed.connect(on_new_set)

    menu = find_menu(window, "menu_analysis", "&Analysis")
    show = dock.toggleViewAction()
    show.setText("&Review Two Labelers")
    show.setShortcut(QKeySequence("Ctrl+Shift+V"))
    show.setToolTip("Compare two label sources and decide their disagreements (Ctrl+Shift+V)")
    menu.addAction(show)

    def compare_if_none() -> None:
        if panel.review is None and window.state.journal is not None and dock.isVisible():
            panel.compare()

    def on_visible(visible: bool) -> None:
        if visible:
            dock.raise_()
            panel.refresh_sources()
            # compared in the next turn: with the sources listed in this one, showing the review of 10,000 runs and
            # two people's labels was one 128 ms turn
            QTimer.singleShot(0, panel, compare_if_none)
            panel.queue_view.setFocus()

    dock.visibilityChanged.connect(on_visible)
    # a tabbed dock that is shown stays behind its neighbour unless raised
    show.triggered.connect(lambda checked: dock.raise_() if checked else None)
    export = QAction("Export &Review Report…", window)
    export.setObjectName("action_export_review")
    export.setToolTip("Write the current review as a Markdown report")
    export.triggered.connect(lambda: panel.export_report() if panel.review is not None
                             else window.statusBar().showMessage("Open the Review dock and compare first.", 6000))
    find_menu(window, "menu_export", "&Export").addAction(export)
    window.addAction(show)
    window.review_panel = panel
    window.review_dock = dock
    install_blind_action(window, panel)
    return dock


def current_labeler(window) -> str:
    """Who labels now: the label panel's name, else the name the journal records by default."""
    name = getattr(getattr(window, "label_panel", None), "labeler_name", "") or ""
    if not name and window.state.journal is not None:
        name = getattr(window.state.journal, "labeler", "") or ""
    if not name:
        from basinmark.core.journal import default_labeler

        name = default_labeler()
    return name


def install_blind_action(window, panel: ReviewPanel) -> QAction:
    """Labels ▸ Blind Labeling: hide other people's hand labels (table, label panel, map, summary) while the
    current labeler labels, so that a second opinion is not anchored on the first.  Off at every start."""
    act = QAction("&Blind Labeling", window)
    act.setObjectName("action_blind")
    act.setCheckable(True)
    act.setToolTip("Hide other people's hand labels while you label, so your opinion is your own; "
                   "the review stays closed until you turn it off")
    note = QLabel(window)
    note.setObjectName("blindNote")
    note.setVisible(False)
    window.statusBar().addPermanentWidget(note)

    def apply() -> None:
        on = act.isChecked()
        name = current_labeler(window) if on else ""
        window.state.set_blind(name)
        note.setText(f"Blind: only {name}'s labels shown" if on else "")
        note.setToolTip(f"Blind labeling as {name}: other people's hand labels are hidden. Labels ▸ Blind "
                        "Labeling turns it off." if on else "")
        note.setVisible(on)
        window.statusBar().showMessage(
            f"Blind labeling as {name}: other people's hand labels are hidden." if on else
            "Blind labeling is off: every label is shown again.", 6000)
        panel.reset("Blind labeling is on: turn it off to review." if on else
                    "Choose two label sources and press Compare.")
        if not on and window.review_dock.isVisible() and window.state.journal is not None:
            panel.compare()

    act.toggled.connect(lambda _on: apply())
    changed = getattr(getattr(window, "label_panel", None), "labeler_changed", None)
    if changed is not None:  # the person changed: blind as the new name
        changed.connect(lambda _name: apply() if act.isChecked() else None)
    menu = getattr(window, "labels_menu", None) or find_menu(window, "menu_analysis", "&Analysis")
    menu.addSeparator()
    menu.addAction(act)
    window.blind_action = act
    return act
