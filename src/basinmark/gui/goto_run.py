"""Go to Run…: find a run of the open set by its id, with completion of the ids."""

from __future__ import annotations

from typing import Callable, Sequence

from PySide6.QtCore import QStringListModel, Qt
from PySide6.QtWidgets import QCompleter, QDialog, QDialogButtonBox, QLabel, QLineEdit, QVBoxLayout, QWidget


class GotoRunDialog(QDialog):
    """A run-id field completing any part of an id; Enter goes there, or says the id is unknown."""

    def __init__(self, run_ids: Sequence[str], go: Callable[[str], bool], parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Go to run")
        self._go = go
        self._ids = list(run_ids)
        self._lower = {r.lower(): r for r in self._ids}
        lay = QVBoxLayout(self)
        lay.addWidget(QLabel(f"Run id ({len(self._ids)} runs in this set):", self))
        self.field = QLineEdit(self)
        self.field.setPlaceholderText(self._ids[0] if self._ids else "")
        self.completer = QCompleter(QStringListModel(self._ids, self), self)
        self.completer.setCaseSensitivity(Qt.CaseSensitivity.CaseInsensitive)
        self.completer.setFilterMode(Qt.MatchFlag.MatchContains)
        self.field.setCompleter(self.completer)
        lay.addWidget(self.field)
        self.hint = QLabel(self)
        self.hint.setWordWrap(True)
        lay.addWidget(self.hint)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel, self)
        buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Go")
        buttons.accepted.connect(self.go)
        buttons.rejected.connect(self.reject)
        lay.addWidget(buttons)

    def resolve(self, text: str) -> str:
        """The run id meant by ``text``: exact (any case), else the only id containing it; "" otherwise."""
        text = text.strip()
        if not text:
            return ""
        if text in self._ids:
            return text
        if text.lower() in self._lower:
            return self._lower[text.lower()]
        hits = [r for r in self._ids if text.lower() in r.lower()]
        return hits[0] if len(hits) == 1 else ""

    def go(self) -> bool:
        text = self.field.text().strip()
        run = self.resolve(text)
        if not run:
            n = sum(text.lower() in r.lower() for r in self._ids) if text else 0
            self.hint.setText(f"{n} runs contain '{text}': type more of the id." if n > 1
                              else f"No run named '{text}' in this set.")
            return False
        if not self._go(run):
            self.hint.setText(f"Could not go to {run}.")
            return False
        self.accept()
        return True
