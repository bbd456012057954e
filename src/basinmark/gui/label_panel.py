"""The labeling panel: one button per label, number keys, a reason, the labeler's name, undo.

Every label goes through the journal (``LabelJournal.record``, fsynced)
before the table shows it.  A journal another program holds is shown
read-only with a banner naming the holder, and the buttons are disabled.
"""

from __future__ import annotations

from html import escape

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QAction, QIcon, QKeySequence, QPainter, QPalette, QPixmap
from PySide6.QtWidgets import (QFormLayout, QGridLayout, QHBoxLayout, QLabel, QLineEdit, QPushButton,
                               QSizePolicy, QToolButton, QVBoxLayout, QWidget)

from basinmark.core.errors import BasinmarkError
from basinmark.core.labels import FIXED_LABELS, REASON_REQUIRED
from basinmark.gui.colours import outcome_colour
from basinmark.gui.state import AppState


def panel_labels(rules) -> list[str]:
    """Products of the rules (if any) followed by the fixed labels, in button order."""
    products = list(getattr(rules, "products", []) or [])
    return products + [x for x in FIXED_LABELS if x not in products]


def _swatch(colour) -> QIcon:
    """A small rounded colour square as a button icon (the label's colour in the table and counts)."""
    pix = QPixmap(14, 14)
    pix.fill(Qt.GlobalColor.transparent)
    p = QPainter(pix)
    p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
    p.setBrush(colour)
    p.setPen(colour.darker(140))
    p.drawRoundedRect(1, 1, 12, 12, 3, 3)
    p.end()
    return QIcon(pix)


class Banner(QLabel):
    """A coloured bar across the top of the window for states a person must not miss."""

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.setWordWrap(True)
        self.setObjectName("banner")
        self.setVisible(False)
        self.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)

    def show_message(self, text: str) -> None:
        pal = self.palette()
        dark = pal.color(QPalette.ColorRole.Window).lightness() < 128
        bg, fg = ("#5c4a12", "#fff3c4") if dark else ("#fff0b3", "#3d3000")
        self.setStyleSheet(f"QLabel#banner {{ background: {bg}; color: {fg}; padding: 6px 10px; "
                           f"border-bottom: 1px solid {fg}; }}")
        self.setText(text)
        self.setVisible(bool(text))


class LabelPanel(QWidget):
    """Buttons and keys that write hand labels into the journal of the open set."""

    labeled = Signal(str, str)        # run id, label
    message = Signal(str)             # for the status bar
    labeler_changed = Signal(str)

    def __init__(self, state: AppState, undo_action: QAction | None = None, parent=None) -> None:
        super().__init__(parent)
        self.state = state
        self.labeler_name = ""
        self.buttons: dict[str, QPushButton] = {}
        self.label_actions: dict[str, QAction] = {}
        lay = QVBoxLayout(self)
        lay.setContentsMargins(6, 4, 6, 4)
        self.current = QLabel("No run open", self)
        self.current.setWordWrap(True)
        self.current.setTextFormat(Qt.TextFormat.RichText)
        lay.addWidget(self.current)
        self.grid = QGridLayout()
        self.grid.setSpacing(4)
        lay.addLayout(self.grid)
        form = QFormLayout()
        self.reason = QLineEdit(self)
        self.reason.setPlaceholderText("why (optional; needed for 'excluded')")
        self.reason.setClearButtonEnabled(True)
        form.addRow("Reason", self.reason)
        self.labeler = QLineEdit(self)
        self.labeler.setToolTip("Recorded with every label you set")
        self.labeler.editingFinished.connect(self._labeler_edited)
        form.addRow("Labeler", self.labeler)
        lay.addLayout(form)
        row = QHBoxLayout()
        self.undo_button = QToolButton(self)
        if undo_action is not None:
            self.undo_button.setDefaultAction(undo_action)
            self.undo_button.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
        row.addWidget(self.undo_button)
        self.feedback = QLabel(self)
        self.feedback.setWordWrap(True)
        self.feedback.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Preferred)
        row.addWidget(self.feedback, 1)
        lay.addLayout(row)
        lay.addStretch(1)
        state.rules_changed.connect(self.rebuild)
        state.run_changed.connect(lambda _r: self.refresh())
        state.labels_changed.connect(self.refresh)
        state.journal_changed.connect(self.refresh)
        self.rebuild()

    # --- labeler name -----------------------------------------------------------------------
    def set_labeler(self, name: str) -> None:
        self.labeler_name = name.strip()
        self.labeler.setText(self.labeler_name)

    def _labeler_edited(self) -> None:
        name = self.labeler.text().strip()
        if name:
            if name != self.labeler_name:
                self.labeler_name = name
                self.labeler_changed.emit(name)
        else:
            self.labeler.setText(self.labeler_name)

    # --- buttons ----------------------------------------------------------------------------
    def rebuild(self) -> None:
        """One button and one number key per label of the current rules."""
        for b in self.buttons.values():
            self.grid.removeWidget(b)
            b.deleteLater()
        for a in self.label_actions.values():
            self.removeAction(a)
            a.deleteLater()
        self.buttons, self.label_actions = {}, {}
        labels = panel_labels(self.state.rules)
        products = list(getattr(self.state.rules, "products", []) or [])
        for i, label in enumerate(labels):
            key = str(i + 1) if i < 9 else ""
            b = QPushButton(f"{key}  {label}" if key else label, self)
            b.setIcon(_swatch(outcome_colour(label, products)))
            tip = f"Label this run '{label}'"
            if label in REASON_REQUIRED:
                tip += " (needs a reason)"
            b.setToolTip(tip + (f" ({key})" if key else ""))
            b.setFocusPolicy(Qt.FocusPolicy.NoFocus)
            b.clicked.connect(lambda _c=False, lab=label: self.apply_label(lab))
            self.grid.addWidget(b, i // 2, i % 2)
            self.buttons[label] = b
            act = QAction(f"Label '{label}'", self)
            act.setProperty("group", "Labels")
            if key:
                act.setShortcut(QKeySequence(key))
            act.setShortcutContext(Qt.ShortcutContext.WindowShortcut)
            act.triggered.connect(lambda _c=False, lab=label: self.apply_label(lab))
            self.addAction(act)
            self.label_actions[label] = act
        self.refresh()

    def refresh(self) -> None:
        st = self.state
        writable = not st.readonly and st.traj is not None
        for b in self.buttons.values():
            b.setEnabled(writable)
        for a in self.label_actions.values():
            a.setEnabled(writable)
        row = st.label_row()
        if st.traj is None or row is None:
            self.current.setText("No run open" if st.traj is None else f"<b>{st.run_id}</b>")
            return
        hand = row["hand_label"] or "—"
        who = f" by {escape(row['labeler'])}" if row.get("labeler") else ""
        why = f" — “{escape(row['reason'])}”" if row.get("reason") else ""
        extra = ""
        if row.get("data_changed"):
            extra = "<br><b>The run's files changed since it was labeled.</b>"
        if row.get("flags"):
            extra += f"<br>flags: {escape(row['flags'].replace(';', ', '))}"
        self.current.setText(f"<b>{escape(st.run_id)}</b> — automatic: {escape(row['auto_label'] or '—')}; "
                             f"hand: <b>{escape(hand)}</b>{who}{why}{extra}")
        self.current.setToolTip(self._history_text(st.run_id))

    def _history_text(self, run_id: str) -> str:
        """The run's label events from the journal, newest last (shown as a tooltip)."""
        j = self.state.journal
        if j is None:
            return ""
        try:
            hist = j.history(run_id)
        except Exception:  # a tooltip must never break the panel
            return ""
        if self.state.blind_labeler:  # blind labeling: only this person's own events
            hist = hist[hist["labeler"] == self.state.blind_labeler]
        if hist.empty:
            return "No label events for this run in the journal."
        lines = []
        for ev in hist.tail(12).itertuples():
            what = f"undo → {ev.label or 'no label'}" if ev.kind == "undo" else f"{ev.label} ({ev.source})"
            reason = f": {ev.reason}" if ev.reason else ""
            lines.append(f"{ev.time}  {ev.labeler}  {what}{reason}")
        return "Label history (journal):\n" + "\n".join(lines)

    # --- labeling ---------------------------------------------------------------------------
    def _say(self, text: str) -> None:
        self.feedback.setText(text)
        self.message.emit(text)

    def apply_label(self, label: str) -> bool:
        """Record ``label`` for the current run in the journal; True when it is on disk."""
        st = self.state
        traj = st.traj
        if traj is None:
            return False
        if st.journal is None and getattr(st, "loading", False):
            self._say("The set is still loading; the label was not saved. Label again once it has loaded.")
            return False
        if st.readonly or st.journal is None:
            self._say("The label journal is read-only here; the label was not saved.")
            return False
        reason = self.reason.text().strip()
        try:
            st.journal.record(traj.run_id, label, content_hash=traj.content_hash, reason=reason,
                              labeler=self.labeler_name or None)
        except BasinmarkError as exc:
            self._say(f"Not saved: {exc}")
            return False
        self.reason.clear()
        st.refresh_labels()
        self._say(f"Saved: {traj.run_id} → {label}")
        self.labeled.emit(traj.run_id, label)
        return True

    def undo(self) -> bool:
        """Undo the current run's latest label (a new journal event)."""
        st = self.state
        traj = st.traj
        if traj is None or st.readonly or st.journal is None:
            if traj is not None:
                self._say("The label journal is read-only here; nothing was undone.")
            return False
        row = st.label_row()
        if row is None or not row.get("hand_label"):
            self._say(f"Nothing to undo: {traj.run_id} has no hand label.")
            return False
        if st.blind_labeler:
            from basinmark.core.review import blind_undo_refusal

            refused = blind_undo_refusal(st.journal, traj.run_id, st.blind_labeler)
            if refused:
                self._say(refused)
                return False
        try:
            ev = st.journal.undo(traj.run_id, labeler=self.labeler_name or None)
        except BasinmarkError as exc:
            self._say(f"Nothing undone: {exc}")
            return False
        st.refresh_labels()
        row = st.label_row(traj.run_id) or {}
        final = row.get("final_label") or "no label"
        how = "by hand" if row.get("hand_label") else "automatic"
        self._say(f"Undone: {ev.get('replaces')} taken back; {traj.run_id} is now {final} ({how})")
        return True
