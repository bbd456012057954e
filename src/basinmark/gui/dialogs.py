"""Small dialogs: files that failed to load, and the keyboard shortcuts of every command."""

from __future__ import annotations

from typing import Sequence

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (QAbstractItemView, QDialog, QDialogButtonBox, QHeaderView, QLabel, QTableWidget,
                               QTableWidgetItem, QVBoxLayout, QWidget)

from basinmark.core.text import printable


def _table(parent: QWidget, headers: Sequence[str], rows: Sequence[Sequence[str]]) -> QTableWidget:
    t = QTableWidget(len(rows), len(headers), parent)
    t.setHorizontalHeaderLabels(list(headers))
    t.verticalHeader().setVisible(False)
    t.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
    t.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
    t.setWordWrap(True)
    for r, row in enumerate(rows):
        for c, text in enumerate(row):
            item = QTableWidgetItem(printable(text))
            item.setToolTip(printable(text))
            t.setItem(r, c, item)
    t.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
    t.horizontalHeader().setStretchLastSection(True)
    t.resizeRowsToContents()
    return t


class FailuresDialog(QDialog):
    """Lists the files of a set that could not be loaded, or were found but are not runs, with the reason."""

    def __init__(self, set_name: str, failures: Sequence, parent: QWidget | None = None,
                 left_out: Sequence = ()) -> None:
        super().__init__(parent)
        self.setWindowTitle(f"Files not used — {set_name}" if left_out else f"Files not loaded — {set_name}")
        self.resize(820, 360)
        lay = QVBoxLayout(self)
        n, m = len(failures), len(left_out)
        parts = []
        if n:
            parts.append(f"{n} file{'s' if n != 1 else ''} of this set could not be loaded and "
                         f"{'are' if n != 1 else 'is'} left out of the table and the counts. "
                         "Fix or remove these files and open the set again.")
        if m:
            parts.append(f"{m} file{'s' if m != 1 else ''} found in the folder {'are' if m != 1 else 'is'} not "
                         "counted as runs (the reason is given for each).")
        parts.append("The other runs are usable.")
        lay.addWidget(QLabel(" ".join(parts), self))
        rows = []
        for kind, items in (("not loaded", failures), ("left out", left_out)):
            for f in items:
                line = getattr(f, "line", None)
                reason = str(getattr(f, "reason", f))
                rows.append((str(getattr(f, "path", "")), "" if line is None else str(line),
                             f"{kind}: {reason}" if m else reason))
        self.table = _table(self, ("File", "Line", "Reason"), rows)
        lay.addWidget(self.table, 1)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close, self)
        buttons.rejected.connect(self.reject)
        buttons.accepted.connect(self.accept)
        lay.addWidget(buttons)


class ShortcutsDialog(QDialog):
    """Every command with its keys, grouped as in the menus."""

    def __init__(self, rows: Sequence[tuple[str, str, str]], parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Keyboard shortcuts")
        self.resize(520, 620)
        lay = QVBoxLayout(self)
        order = ["File", "Playback", "Runs", "Labels", "View", "Help"]
        rows = sorted(rows, key=lambda r: (order.index(r[0]) if r[0] in order else len(order), r[0]))
        self.table = _table(self, ("Group", "Command", "Keys"), rows)
        self.table.setSortingEnabled(False)
        lay.addWidget(self.table, 1)
        hint = QLabel("In the molecule: drag to rotate, wheel to zoom, right- or middle-drag to pan. "
                      "Click two atoms for a distance trace; Shift-click to keep picking, "
                      "then click the 3rd atom for an angle or the 4th for a dihedral.", self)
        hint.setWordWrap(True)
        hint.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        lay.addWidget(hint)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close, self)
        buttons.rejected.connect(self.reject)
        lay.addWidget(buttons)
