"""Who is labeling: the small dialog that confirms or changes the labeler's name.

The window calls :func:`ask_labeler` through this module at the moment it needs an answer, so tests
(and scripts) can replace it: ``monkeypatch.setattr(basinmark.gui.labeler, "ask_labeler", fake)``.
"""

from __future__ import annotations

from html import escape
from typing import Sequence

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (QCompleter, QDialog, QDialogButtonBox, QLabel, QLineEdit, QVBoxLayout, QWidget)

from basinmark.core.errors import BasinmarkError
from basinmark.core.labels import check_labeler_name
from basinmark.core.text import printable


class LabelerDialog(QDialog):
    """Name field (completing names already in the journal) with Use / Cancel."""

    def __init__(self, current: str, login: str, *, first_label: bool, known: Sequence[str] = (),
                 parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Who is labeling?" if first_label else "Change labeler")
        lay = QVBoxLayout(self)
        if first_label:
            intro = (f"Every label is recorded with the labeler's name. The name <b>{escape(current)}</b> was kept "
                     f"from an earlier session")
            intro += (f"; you are logged in as <b>{escape(login)}</b>." if login and login != current else ".")
            intro += " Label as:"
        else:
            intro = "Every label you set from now on is recorded under this name:"
        text = QLabel(intro, self)
        text.setWordWrap(True)
        text.setTextFormat(Qt.TextFormat.RichText)
        lay.addWidget(text)
        self.name = QLineEdit(current, self)
        self.name.selectAll()
        names = sorted({n for n in list(known) + [current, login] if n})
        comp = QCompleter(names, self)
        comp.setCaseSensitivity(Qt.CaseSensitivity.CaseInsensitive)
        self.name.setCompleter(comp)
        lay.addWidget(self.name)
        self.hint = QLabel(self)
        self.hint.setWordWrap(True)
        lay.addWidget(self.hint)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel, self)
        buttons.button(QDialogButtonBox.StandardButton.Ok).setText("Label as this name")
        buttons.accepted.connect(self._accept)
        buttons.rejected.connect(self.reject)
        lay.addWidget(buttons)

    def _accept(self) -> None:
        if not self.name.text().strip():
            self.hint.setText("Type a name; labels cannot be recorded without one.")
            return
        try:  # one line of plain text, and not the name of an automatic source (auto, rule:…)
            check_labeler_name(self.name.text())
        except BasinmarkError as exc:
            self.hint.setText(printable(str(exc)))
            return
        self.accept()

    def chosen(self) -> str:
        return self.name.text().strip()


def ask_labeler(parent: QWidget | None, current: str, login: str, *, first_label: bool = True,
                known: Sequence[str] = ()) -> str | None:
    """Ask (modally) under which name to label; the name, or None when the person cancelled."""
    dlg = LabelerDialog(current, login, first_label=first_label, known=known, parent=parent)
    return dlg.chosen() if dlg.exec() == QDialog.DialogCode.Accepted else None
