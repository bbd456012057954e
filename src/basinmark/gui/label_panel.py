"""The labeling panel: the current run in large type, one button and number key per label, the
reason flow, the labeler's name, undo.

A label always lands on the run the panel names (:attr:`LabelPanel.shown_run`).  Labeling with a
reason is one flow: a number key or a button starts a *pending* label, the Reason field takes the
focus, Enter saves label and reason together as one journal event, Escape cancels and gives the
focus back to where it was.  With *Ask for a Reason* off, a label without a required reason is
saved at once.  While the set loads, or when the panel and the window's current run disagree,
labels are refused with a message, never applied to another run.

Every label goes through the journal (``LabelJournal.record``, fsynced) before the table shows it.
A journal another program holds is shown read-only with a banner naming the holder.
"""

from __future__ import annotations

from html import escape
from typing import Callable

from PySide6.QtCore import QEvent, Qt, Signal
from PySide6.QtGui import QAction, QFont, QIcon, QKeySequence, QPainter, QPalette, QPixmap
from PySide6.QtWidgets import (QApplication, QFormLayout, QGridLayout, QHBoxLayout, QLabel, QLineEdit,
                               QPushButton, QSizePolicy, QToolButton, QVBoxLayout, QWidget)

from basinmark.core.errors import BasinmarkError
from basinmark.core.labels import FIXED_LABELS, REASON_REQUIRED
from basinmark.core.text import printable
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


class ReasonEdit(QLineEdit):
    """The Reason field: Enter saves the pending label with this reason, Escape cancels it."""

    submitted = Signal()
    cancelled = Signal()

    def event(self, event) -> bool:  # noqa: D401
        if event.type() == QEvent.Type.ShortcutOverride and event.key() in (
                Qt.Key.Key_Return, Qt.Key.Key_Enter, Qt.Key.Key_Escape) and not (
                event.modifiers() & ~Qt.KeyboardModifier.KeypadModifier):
            event.accept()  # ours, not the window's Esc (clear picks) or any other shortcut
            return True
        return super().event(event)

    def keyPressEvent(self, event) -> None:  # noqa: N802
        if event.key() in (Qt.Key.Key_Return, Qt.Key.Key_Enter):
            event.accept()
            self.submitted.emit()
            return
        if event.key() == Qt.Key.Key_Escape:
            event.accept()
            self.cancelled.emit()
            return
        super().keyPressEvent(event)


class LabelPanel(QWidget):
    """Buttons and keys that write hand labels into the journal of the open set."""

    labeled = Signal(str, str)        # run id, label
    message = Signal(str)             # for the status bar
    labeler_changed = Signal(str)
    pending_changed = Signal()
    acting = Signal()                 # a label or undo is about to be tried (ends finding in the table)

    def __init__(self, state: AppState, undo_action: QAction | None = None, parent=None,
                 labeler_action: QAction | None = None) -> None:
        super().__init__(parent)
        self.state = state
        self.labeler_name = ""
        self.shown_run = ""                       # the run this panel names (and labels)
        self.pending: tuple[str, str] | None = None   # (run, label) waiting for Enter in the Reason field
        self.ask_reason = True
        #: the window's checks before a label: returns a refusal message, or "" when labeling may go on
        self.guard: Callable[[], str] = lambda: ""
        #: asks who is labeling when that is not yet settled this session; False stops the label
        self.confirm_labeler: Callable[[], bool] = lambda: True
        self.key_widgets: list[QWidget] = []     # where the number keys act (the viewer)
        self._return_focus: QWidget | None = None
        self.buttons: dict[str, QPushButton] = {}
        self.label_actions: dict[str, QAction] = {}
        #: a set is loading: its rules (which decide what each number key means) are not read yet, so the keys
        #: mean no label at all (neither the fixed labels nor the previous set's) and only say why
        self.waiting = False
        self.wait_actions: list[QAction] = []
        for k in range(1, 10):
            act = QAction(f"Key {k} (waiting for the set to load)", self)
            act.setShortcut(QKeySequence(str(k)))
            act.setShortcutContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
            act.triggered.connect(self._key_while_waiting)
            self.wait_actions.append(act)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(6, 4, 6, 4)
        self.title = QLabel("No run", self)
        f = QFont(self.title.font())
        f.setPointSizeF(max(f.pointSizeF(), 9.0) * 1.9)
        f.setBold(True)
        self.title.setFont(f)
        self.title.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.title.setToolTip("The run every label key and button acts on")
        lay.addWidget(self.title)
        self.current = QLabel("No run open", self)
        self.current.setWordWrap(True)
        self.current.setTextFormat(Qt.TextFormat.RichText)
        lay.addWidget(self.current)
        self.grid = QGridLayout()
        self.grid.setSpacing(4)
        lay.addLayout(self.grid)
        self.wait_note = QLabel("Label buttons and keys 1–9 appear when the set has loaded: its rules decide "
                                "what each key means.", self)
        self.wait_note.setWordWrap(True)
        self.wait_note.setObjectName("labelsWaiting")
        self.wait_note.setVisible(False)
        lay.addWidget(self.wait_note)
        self.pending_note = QLabel(self)
        self.pending_note.setWordWrap(True)
        self.pending_note.setTextFormat(Qt.TextFormat.RichText)
        self.pending_note.setVisible(False)
        lay.addWidget(self.pending_note)
        form = QFormLayout()
        self.reason = ReasonEdit(self)
        self.reason.setPlaceholderText("why (optional; needed for 'excluded'); Enter saves, Esc cancels")
        self.reason.setClearButtonEnabled(True)
        self.reason.submitted.connect(self.save_pending)
        self.reason.cancelled.connect(self._escape)
        form.addRow("Reason", self.reason)
        # the run's note: free text kept in the journal beside the labels, never changing one
        self.note = QLineEdit(self)
        self.note.setObjectName("runNote")
        self.note.setPlaceholderText("a note on this run (not a label); Enter saves")
        self.note.setClearButtonEnabled(True)
        self.note.setToolTip("Free text about this run, recorded in the journal (audited) and exported with the "
                             "labels; it never changes a label. Enter saves; an empty note clears it.")
        self.note.returnPressed.connect(self.save_note)
        form.addRow("Note", self.note)
        who = QHBoxLayout()
        self.labeler = QLabel(self)
        self.labeler.setToolTip("Recorded with every label you set")
        who.addWidget(self.labeler, 1)
        self.labeler_button = QToolButton(self)
        self.labeler_button.setFocusPolicy(Qt.FocusPolicy.NoFocus)  # not in the tab order of labeling
        if labeler_action is not None:
            self.labeler_button.setDefaultAction(labeler_action)
        who.addWidget(self.labeler_button)
        form.addRow("Labeler", who)
        lay.addLayout(form)
        row = QHBoxLayout()
        self.undo_button = QToolButton(self)
        self.undo_button.setFocusPolicy(Qt.FocusPolicy.NoFocus)
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
        state.set_changed.connect(self._on_set)
        state.run_changed.connect(self._on_run)
        state.labels_changed.connect(self.refresh)
        state.journal_changed.connect(self.refresh)
        self.rebuild()

    # --- labeler name -----------------------------------------------------------------------
    def set_labeler(self, name: str, *, announce: bool = True) -> None:
        """Label under ``name`` from now on (``announce``: tell the window, which remembers it)."""
        name = name.strip()
        if not name:
            return
        changed = name != self.labeler_name
        self.labeler_name = name
        self.labeler.setText(f"<b>{escape(name)}</b>")
        if announce and changed:
            self.labeler_changed.emit(name)

    # --- buttons and keys -------------------------------------------------------------------
    def set_key_widgets(self, widgets: list[QWidget]) -> None:
        """The widgets where the number keys act (molecule, traces, run table): focus elsewhere never labels."""
        for w in self.key_widgets:
            for a in list(self.label_actions.values()) + self.wait_actions:
                w.removeAction(a)
        self.key_widgets = list(widgets)
        for w in self.key_widgets:
            w.addActions(self.wait_actions if self.waiting else list(self.label_actions.values()))

    def set_loading(self, on: bool) -> None:
        """A set starts (True) or ends (False) loading: while it loads no key or button means a label."""
        if bool(on) != self.waiting:
            self.waiting = bool(on)
            self.rebuild()

    def _key_while_waiting(self) -> None:
        self.acting.emit()
        self._say(self.refusal() or "Still loading the set; the label was not saved. "
                                    "Label again once loading has finished.")

    def _on_set(self) -> None:
        """Another set: what the panel said about the previous one ("Undone …", "Saved …") no longer holds."""
        self.feedback.clear()

    def rebuild(self) -> None:
        """One button and one number key per label of the current rules."""
        self.cancel_pending("")
        for b in self.buttons.values():
            self.grid.removeWidget(b)
            b.deleteLater()
        for a in self.label_actions.values():
            for w in self.key_widgets:  # at once: a deleted-later twin would make the key ambiguous
                w.removeAction(a)
            a.deleteLater()
        self.buttons, self.label_actions = {}, {}
        for w in self.key_widgets:
            for a in self.wait_actions:
                w.removeAction(a)
        self.wait_note.setVisible(self.waiting)
        if self.waiting:
            for w in self.key_widgets:
                w.addActions(self.wait_actions)
            self.refresh()
            return
        labels = panel_labels(self.state.rules)
        products = list(getattr(self.state.rules, "products", []) or [])
        for i, label in enumerate(labels):
            key = str(i + 1) if i < 9 else ""
            b = QPushButton(f"{key}  {label}" if key else label, self)
            b.setIcon(_swatch(outcome_colour(label, products)))
            tip = f"Label the run named above '{label}'"
            if label in REASON_REQUIRED:
                tip += " (needs a reason)"
            b.setToolTip(tip + (f" ({key})" if key else ""))
            b.setFocusPolicy(Qt.FocusPolicy.NoFocus)
            b.clicked.connect(lambda _c=False, lab=label: self.request_label(lab))
            self.grid.addWidget(b, i // 2, i % 2)
            self.buttons[label] = b
            act = QAction(f"Label '{label}'", self)
            act.setProperty("group", "Labels")
            if key:
                act.setShortcut(QKeySequence(key))
            # the key acts only where the viewer has the focus (molecule, traces, run table), never in a field
            act.setShortcutContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
            act.triggered.connect(lambda _c=False, lab=label: self.request_label(lab))
            self.label_actions[label] = act
        for w in self.key_widgets:
            w.addActions(list(self.label_actions.values()))
        self.refresh()

    def _on_run(self, run_id: str) -> None:
        if self.pending is not None and self.pending[0] != run_id:
            run, label = self.pending
            self.cancel_pending(f"Not saved: the pending label '{label}' for {run} was dropped "
                                "because another run was chosen.", refocus=False)
        self.refresh()

    def refresh(self) -> None:
        st = self.state
        writable = not st.readonly and st.traj is not None
        for b in self.buttons.values():
            b.setEnabled(writable)
        # the number keys stay enabled: while nothing can be saved they say why instead of doing nothing
        self.shown_run = st.run_id if st.traj is not None else ""
        self.title.setText(self.shown_run or "No run")
        if not self.note.hasFocus():  # never overwrite what is being typed
            self.note.setText(self.shown_note(self.shown_run))
        self.note.setEnabled(bool(self.shown_run) and not st.readonly)
        row = st.label_row() if self.shown_run else None
        if st.traj is not None and row is None and st.loading:
            self.current.setText("The set is still loading: this run's outcome and labels show once it has loaded.")
            self.current.setToolTip("")
            self._show_pending()
            return
        if st.traj is None or row is None:
            self.current.setText("No run selected: choose one in the run table." if st.tset is not None and len(st.tset)
                                 else "No run open")
            self.current.setToolTip("")
            self._show_pending()
            return
        hand = row["hand_label"] or "—"
        who = f" by {escape(row['labeler'])}" if row.get("labeler") else ""
        why = f" — “{escape(row['reason'])}”" if row.get("reason") else ""
        extra = ""
        if row.get("data_changed"):
            extra = "<br><b>The run's files changed since it was labeled.</b>"
        if row.get("flags"):
            from basinmark.core.classify import flag_words

            extra += f"<br>flags: {escape(flag_words(row['flags']))}"
        self.current.setText(f"automatic: {escape(row['auto_label'] or '—')}; "
                             f"hand: <b>{escape(hand)}</b>{who}{why}{extra}")
        self.current.setToolTip(self._history_text(st.run_id))
        self._show_pending()

    def shown_note(self, run_id: str) -> str:
        """The run's note as this panel may show it (in blind labeling, only the labeler's own)."""
        j = self.state.journal
        if j is None or not hasattr(j, "notes") or not run_id:
            return ""
        notes = j.notes()
        if run_id not in notes.index:
            return ""
        if self.state.blind_labeler and notes.at[run_id, "labeler"] != self.state.blind_labeler:
            return ""
        return str(notes.at[run_id, "note"])

    def save_note(self) -> bool:
        """Record the Note field as the shown run's note (an empty field clears it)."""
        st, run = self.state, self.shown_run
        text = self.note.text().strip()
        if not run or st.journal is None or st.readonly:
            self._say("The note was not saved: " + ("the label journal is read-only here." if st.readonly
                                                    else "no run is shown."))
            return False
        if text == self.shown_note(run):
            return True
        try:
            st.journal.note(run, text, labeler=self.labeler_name or None)
        except Exception as exc:  # noqa: BLE001 - a refused note is said, never lost silently
            self._say(f"The note was not saved: {exc}")
            return False
        self._say(f"Note saved for {run}." if text else f"Note cleared for {run}.")
        st.refresh_labels()
        return True

    def _history_text(self, run_id: str) -> str:
        """The run's label events from the journal, newest last (shown as a tooltip)."""
        j = self.state.journal
        if j is None:
            return ""
        # kept per run until the journal or the blind setting changes: the panel refreshes on every run change
        # and label, and replaying a run's history each time was the panel's largest cost (cProfile)
        key = (id(j), getattr(j, "last_seq", None), self.state.blind_labeler)
        if getattr(self, "_tips_key", None) != key:
            self._tips, self._tips_key = {}, key
        if run_id not in self._tips:
            self._tips[run_id] = self._history_uncached(j, run_id)
        return self._tips[run_id]

    def _history_uncached(self, j, run_id: str) -> str:
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
            if ev.kind == "note":  # a note's text is in the reason column
                lines.append(f"{ev.time}  {printable(ev.labeler)}  note: {printable(ev.reason) or '(cleared)'}")
                continue
            what = f"undo → {ev.label or 'no label'}" if ev.kind == "undo" else f"{ev.label} ({ev.source})"
            reason = f": {printable(ev.reason)}" if ev.reason else ""
            lines.append(f"{ev.time}  {printable(ev.labeler)}  {what}{reason}")
        return "Label history (journal):\n" + "\n".join(lines)

    # --- labeling ---------------------------------------------------------------------------
    def _say(self, text: str) -> None:
        self.feedback.setText(text)
        self.message.emit(text)

    def refusal(self) -> str:
        """Why no label can be set right now ("" when one can): said instead of labeling another run."""
        st = self.state
        if st.tset is None:
            return "No set is open; nothing was labeled."
        if getattr(st, "loading", False):
            return ("Still loading or classifying the set; the label was not saved. "
                    "Label again once loading has finished.")
        if not self.shown_run or st.traj is None:
            return "No run is selected; the label was not saved. Choose a run in the run table first."
        if self.shown_run != st.run_id:
            return "The window is still switching runs; the label was not saved. Press the key again."
        if st.readonly or st.journal is None:
            return "The label journal is read-only here; the label was not saved."
        return self.guard() or ""

    def request_label(self, label: str) -> bool:
        """A number key, button or menu entry for ``label``: save at once, or start a pending label.

        Returns True when the label was saved or is now pending.
        """
        self.acting.emit()
        why = self.refusal()
        if why:
            self._say(why)
            return False
        if not self.confirm_labeler():
            self._say("Not saved: confirm who is labeling first (Labels ▸ Change Labeler…).")
            return False
        run = self.shown_run
        if self.ask_reason or label in REASON_REQUIRED or self.reason.text().strip() or self.pending:
            self._start_pending(run, label)
            return True
        return self.apply_label(label, reason="", run_id=run)

    def _start_pending(self, run: str, label: str) -> None:
        focus = QApplication.focusWidget()
        if focus is not None and focus is not self.reason and any(
                focus is w or w.isAncestorOf(focus) for w in self.key_widgets):
            self._return_focus = focus
        self.pending = (run, label)
        self._show_pending()
        self.reason.setFocus(Qt.FocusReason.OtherFocusReason)
        self.reason.end(False)
        self.pending_changed.emit()

    def _show_pending(self) -> None:
        if self.pending is None:
            if not self.pending_note.isHidden():
                self.pending_note.setVisible(False)
            return
        run, label = self.pending
        need = " (a reason is required)" if label in REASON_REQUIRED else " (optional)"
        self.pending_note.setText(f"Label <b>{escape(run)}</b> as <b>{escape(label)}</b>: type a reason{need}, "
                                  "<b>Enter</b> saves, <b>Esc</b> cancels.")
        self.pending_note.setVisible(True)

    def save_pending(self) -> bool:
        """Enter in the Reason field: save the pending label with the reason as one journal event."""
        if self.pending is None:
            if self.reason.text().strip():
                self._say("No label chosen yet: click a label button to save it with this reason.")
            else:
                self._say("No label chosen yet: press a number key in the run table, molecule or traces, "
                          "or click a label button.")
            return False
        run, label = self.pending
        why = self.refusal()
        if not why and run != self.shown_run:
            why = f"The pending label was for {run}, but {self.shown_run or 'no run'} is shown now; not saved."
        if why:
            self.cancel_pending(why)
            return False
        reason = self.reason.text().strip()
        if label in REASON_REQUIRED and not reason:
            self._say(f"'{label}' needs a reason: type why, then press Enter (Esc cancels).")
            return False
        self.pending = None
        self._show_pending()
        self.pending_changed.emit()
        ok = self.apply_label(label, reason=reason, run_id=run)
        if not ok:  # keep the person's reason and label, and let them try again or cancel
            self.pending = (run, label)
            self._show_pending()
            self.pending_changed.emit()
            return False
        self._give_back_focus()
        return True

    def cancel_pending(self, message: str = "Cancelled: nothing was saved.", *, refocus: bool = True) -> None:
        had = self.pending is not None
        self.pending = None
        self._show_pending()
        if had or message:
            self.reason.clear()
        if had:
            self.pending_changed.emit()
        if message:
            self._say(message)
        if refocus and self.reason.hasFocus():
            self._give_back_focus()

    def _escape(self) -> None:
        if self.pending is not None:
            self.cancel_pending()
        else:
            self._give_back_focus()

    def _give_back_focus(self) -> None:
        target = self._return_focus
        self._return_focus = None
        if target is None or not target.isVisible():
            target = next((w for w in self.key_widgets if w.isVisible()), None)
        if target is not None:
            target.setFocus(Qt.FocusReason.OtherFocusReason)

    def apply_label(self, label: str, reason: str | None = None, run_id: str | None = None) -> bool:
        """Record ``label`` for the run the panel names in the journal; True when it is on disk.

        ``reason`` defaults to the Reason field's text; ``run_id`` (when given) must be the run shown.
        """
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
        if run_id is not None and (run_id != traj.run_id or run_id != self.shown_run):
            self._say(f"Not saved: the label was meant for {run_id}, but {traj.run_id} is shown.")
            return False
        reason = self.reason.text().strip() if reason is None else reason.strip()
        try:
            st.journal.record(traj.run_id, label, content_hash=traj.content_hash, reason=reason,
                              labeler=self.labeler_name or None)
        except BasinmarkError as exc:
            self._say(f"Not saved: {exc}")
            return False
        self.reason.clear()
        st.refresh_labels()
        self._say(f"Saved: {traj.run_id} → {label}" + (f" ({reason})" if reason else ""))
        self.labeled.emit(traj.run_id, label)
        return True

    def undo(self) -> bool:
        """Undo the latest label of the run the panel names (a new journal event)."""
        st = self.state
        self.acting.emit()
        if self.pending is not None:
            self.cancel_pending("The pending label was cancelled.", refocus=True)
        why = self.refusal()
        if why:
            self._say(why.replace("the label was not saved", "nothing was undone")
                      .replace("label was not saved", "nothing was undone"))
            return False
        traj = st.traj
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
        if not self.confirm_labeler():
            self._say("Nothing undone: confirm who is labeling first (Labels ▸ Change Labeler…).")
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
