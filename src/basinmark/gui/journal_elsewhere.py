"""Labels ▸ Save Labels Elsewhere…: keep a set's labels in a journal outside its folder.

For a set whose folder cannot be written (shared, archived, on a read-only disk) the labels go to a
journal file the person chooses.  Its events carry the runs' content hashes like any other, so they
stay bound to the same data.  The choice is remembered per set folder, and the banner says where
labels are saved whenever it is in force; choosing the set's own journal file again goes back to it.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtGui import QAction
from PySide6.QtWidgets import QFileDialog, QMessageBox

from basinmark.core.errors import BasinmarkError
from basinmark.core.journal import LabelJournal
from basinmark.core.labels import all_labels
from basinmark.core.sets import journal_path

_GROUP = "journal_elsewhere"


def _key(root: Path) -> str:
    # QSettings keys cannot hold slashes as plain text; hex keeps any path intact
    return f"{_GROUP}/{str(Path(root).resolve()).encode('utf-8').hex()}"


def remembered(settings, root: str | Path) -> Path | None:
    """The journal chosen for this set folder, if any."""
    value = settings.value(_key(Path(root)), "")
    return Path(str(value)) if value else None


def notice(path: Path) -> str:
    return (f"Labels are saved to {path}, a journal outside the set's folder (Labels ▸ Save Labels Elsewhere…); "
            "the labels shown are that journal's.")


def action(window) -> QAction:
    """The window's Save Labels Elsewhere… action (made once)."""
    act = getattr(window, "_save_elsewhere_action", None)
    if act is None:
        act = QAction("Save Labels &Elsewhere…", window)
        act.setToolTip("Keep this set's labels in a journal file outside its folder (for a folder you cannot "
                       "write to); choose the set's own journal file to go back to it")
        act.setStatusTip(act.toolTip())
        act.triggered.connect(lambda checked=False: save_labels_elsewhere(window))
        window._save_elsewhere_action = act
    return act


def save_labels_elsewhere(window, path: str | Path | None = None) -> bool:
    """Open (creating if needed) the journal at ``path`` (asked for when None) for the set in the window."""
    state = window.state
    tset = state.tset
    if tset is None:
        window.statusBar().showMessage("Open a set first.", 5000)
        return False
    own = journal_path(tset.root)
    if path is None:
        start = remembered(window.settings, tset.root) or Path.home() / f"{tset.name}-labels.jsonl"
        path, _ = QFileDialog.getSaveFileName(window, "Save labels elsewhere", str(start),
                                              "Label journal (*.jsonl);;All files (*)",
                                              options=QFileDialog.Option.DontConfirmOverwrite)
        if not path:
            return False
    path = Path(path).expanduser()
    rules = state.rules
    try:
        journal = LabelJournal.open(path, set_id=tset.name, labeler=window.label_panel.labeler_name or None,
                                    allowed=all_labels(rules) if rules is not None else None)
    except BasinmarkError as exc:
        QMessageBox.warning(window, "Labels cannot be saved there", str(exc))
        return False
    if path.resolve() == own.resolve():
        window.settings.remove(_key(tset.root))
        window.set_notice("journal", None)
    else:
        window.settings.setValue(_key(tset.root), str(path))
        window.set_notice("journal", notice(path))
    for w in journal.warnings:
        window.set_notice("journal_warn", w)
    state.set_journal(journal, "")
    window.statusBar().showMessage(f"Labels are saved to {path}", 8000)
    return True
