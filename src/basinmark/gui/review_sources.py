"""The label sources a review can compare, and the picker for one side (A or B) of the review.

A source is one label per run from: a person named in the open journal (their latest hand label),
the automatic classification made now with the current rules (nothing needs recording first), the
automatic labels recorded in the journal, the final labels (hand if any, else automatic), anyone's
hand labels, or any of these from another journal file.  Each choice shows how many runs it labels,
so an empty source is seen before comparing.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pandas as pd
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import QComboBox, QFileDialog, QHBoxLayout, QLabel, QWidget

from basinmark.core.errors import BasinmarkError
from basinmark.core.journal import LabelJournal
from basinmark.core.review import current_auto_labels, people

KINDS = ("person", "auto_now", "auto", "final", "hand", "file")
WHICH = ("final", "auto", "hand")
CHOOSE_FILE = ("choose_file", "")


@dataclass(frozen=True)
class Source:
    """One side of a review: ``kind`` (see KINDS), ``name`` (a person, or a journal path for 'file') and,
    for a journal file, ``which`` of its labels (final, auto, hand or a person in that file)."""

    kind: str
    name: str = ""
    which: str = "final"

    def title(self) -> str:
        if self.kind == "person":
            return self.name
        if self.kind == "file":
            return f"{Path(self.name).name}: {self.which}"
        return {"auto_now": "automatic (current rules)", "auto": "automatic (recorded)", "final": "final labels",
                "hand": "hand labels (anyone)"}[self.kind]


def _file_journal(path: str | Path) -> Path:
    from basinmark.core.sets import journal_path

    p = Path(path).expanduser()
    found = journal_path(p) if p.is_dir() else p
    if not found.is_file():
        raise BasinmarkError(f"there is no label journal at {found}")
    return found


def source_labels(state, source: Source) -> tuple[pd.DataFrame, list[str]]:
    """The labels of ``source`` (a frame indexed by run with label, labeler, reason) and any notes about it."""
    j = state.journal
    if source.kind == "auto_now":
        if state.classification is None:
            raise BasinmarkError("there is no classification with the current rules (no rules file, or it has "
                                 "errors); choose the recorded automatic labels instead")
        return current_auto_labels(state.classification), []
    if source.kind == "file":
        path = _file_journal(source.name)
        with LabelJournal.open(path, readonly=True) as other:
            return other.labels(source.which), [f"{path.name}: {w}" for w in other.warnings]
    if j is None:
        raise BasinmarkError("no label journal is open for this set")
    key = source.name if source.kind == "person" else source.kind
    return j.labels(key), []


class SourcePicker(QWidget):
    """A combo of the sources of the open journal (with run counts), other journal files, and for a file
    a second combo choosing which of its labels to use."""

    changed = Signal()

    def __init__(self, side: str, state, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.side, self.state = side, state
        self.files: list[str] = []   # other journals chosen in this session
        lay = QHBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lab = QLabel(side, self)
        lab.setMinimumWidth(14)
        lay.addWidget(lab)
        self.combo = QComboBox(self)
        self.combo.setMinimumContentsLength(18)
        self.combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
        self.combo.setToolTip(f"Label source {side}: a person, the automatic classification, the final labels, or "
                              f"another journal file" + (" (rows of the matrix)" if side == "A" else " (columns)"))
        lay.addWidget(self.combo, 3)
        self.which = QComboBox(self)
        self.which.setToolTip("Which labels of that journal file: final, automatic, hand, or one person's")
        self.which.setVisible(False)
        lay.addWidget(self.which, 1)
        self._last: tuple = ()
        self.combo.activated.connect(self._activated)
        self.which.activated.connect(lambda _i: self.changed.emit())

    # --- items ------------------------------------------------------------------------------
    def fill(self, entries: list[tuple[tuple, str]], default: tuple) -> None:
        """Entries (key, text) of the open journal; the file entries and "Another journal file…" are added."""
        keep = self.combo.currentData() if self.combo.count() else None
        self.combo.blockSignals(True)
        self.combo.clear()
        for key, text in entries:
            self.combo.addItem(text, key)
        if self.files:
            self.combo.insertSeparator(self.combo.count())
        for f in self.files:
            self.combo.addItem(f"journal file: {Path(f).name}", ("file", f))
            self.combo.setItemData(self.combo.count() - 1, f, Qt.ItemDataRole.ToolTipRole)
        self.combo.insertSeparator(self.combo.count())
        self.combo.addItem("Another journal file…", CHOOSE_FILE)
        keys = [self.combo.itemData(i) for i in range(self.combo.count())]
        usable = [k for k in keys if isinstance(k, tuple) and k != CHOOSE_FILE]
        target = next((k for k in (keep, default) if k in usable), usable[0] if usable else CHOOSE_FILE)
        self.combo.setCurrentIndex(keys.index(target))
        self._last = self.combo.currentData()
        self.combo.blockSignals(False)
        self._fill_which()

    def _find(self, key) -> int:
        # QComboBox.findData does not compare Python tuples, so look the key up ourselves
        for i in range(self.combo.count()):
            if self.combo.itemData(i) == key:
                return i
        return -1

    def keys(self) -> list[tuple]:
        return [self.combo.itemData(i) for i in range(self.combo.count()) if self.combo.itemData(i) is not None]

    def _fill_which(self) -> None:
        key = self.combo.currentData()
        is_file = isinstance(key, tuple) and key[0] == "file"
        self.which.setVisible(is_file)
        if not is_file:
            return
        keep = self.which.currentText()
        names: list[str] = list(WHICH)
        try:
            with LabelJournal.open(_file_journal(key[1]), readonly=True) as other:
                names += people(other)
        except (BasinmarkError, OSError):
            pass
        self.which.blockSignals(True)
        self.which.clear()
        self.which.addItems(names)
        self.which.setCurrentText(keep if keep in names else "final")
        self.which.blockSignals(False)

    def _activated(self, _i: int) -> None:
        if self.combo.currentData() == CHOOSE_FILE:
            start = str(self.state.tset.root) if self.state.tset is not None else str(Path.home())
            path, _ = QFileDialog.getOpenFileName(self, f"Label journal for {self.side}", start,
                                                  "Label journals (*.jsonl);;All files (*)")
            if not path:
                i = self._find(self._last)
                self.combo.setCurrentIndex(max(i, 0))
                return
            self.add_file(path)
            return
        self._last = self.combo.currentData()
        self._fill_which()
        self.changed.emit()

    def add_file(self, path: str | Path, which: str = "final") -> None:
        """Offer another journal (a .jsonl file or a set folder) and choose it."""
        path = str(Path(path).expanduser())
        if path not in self.files:
            self.files.append(path)
        entries = [(self.combo.itemData(i), self.combo.itemText(i)) for i in range(self.combo.count())
                   if isinstance(self.combo.itemData(i), tuple) and self.combo.itemData(i)[0] != "file"
                   and self.combo.itemData(i) != CHOOSE_FILE]
        self.fill(entries, ("file", path))
        self.combo.setCurrentIndex(self._find(("file", path)))
        self._last = self.combo.currentData()
        self._fill_which()
        if self.which.findText(which) >= 0:
            self.which.setCurrentText(which)
        self.changed.emit()

    # --- the chosen source -------------------------------------------------------------------
    def source(self) -> Source | None:
        key = self.combo.currentData()
        if not isinstance(key, tuple) or key == CHOOSE_FILE:
            return None
        kind, name = key
        if kind == "file":
            return Source("file", name, self.which.currentText() or "final")
        return Source(kind, name)

    def set_source(self, kind: str, name: str = "", which: str = "final") -> None:
        if kind == "file":
            self.add_file(name, which)
            return
        i = self._find((kind, name))
        if i < 0:
            raise KeyError(f"no label source {kind} {name!r} for {self.side}; offered: {self.keys()}")
        self.combo.setCurrentIndex(i)
        self._last = self.combo.currentData()
        self._fill_which()
        self.changed.emit()
