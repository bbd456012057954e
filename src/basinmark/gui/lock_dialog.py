"""A journal lock seen from the window: offer to break a stale one, say who holds a live one.

When the journal's lock is held by a program that is gone (same host, its process no longer runs) the
window asks whether to break it; breaking goes through :meth:`LabelJournal.break_lock`, which records a
``lock_broken`` event in the journal exactly as the command line's ``unlock`` does.  A lock whose program
still runs on this host is never broken from here; one taken on another host (or unreadable) can only
be broken after a second, explicit confirmation, since the window cannot tell whether that program runs.

:func:`ask` is looked up through this module at the moment a question is needed, so tests and scripts
can answer it: ``monkeypatch.setattr(basinmark.gui.lock_dialog, "ask", fake)``.
"""

from __future__ import annotations

import os
import socket
import time
from html import escape
from pathlib import Path
from typing import Callable

from PySide6.QtCore import Qt
from PySide6.QtGui import QAction
from PySide6.QtWidgets import QMessageBox, QWidget

from basinmark.core.errors import BasinmarkError
from basinmark.core.journal import JournalLockedError, LabelJournal
from basinmark.core.journal_lock import describe, is_stale, pid_alive, read_lock

#: the holder's situation: "gone" (dead process on this host), "running" (live on this host),
#: "ours" (this very program), "elsewhere" (another host), "unknown" (unreadable lock), "none" (no lock)
STATES = ("gone", "running", "ours", "elsewhere", "unknown", "none")


def holder_situation(holder: dict | None) -> str:
    if holder is None:
        return "none"
    if not holder:
        return "unknown"
    if is_stale(holder):
        return "gone"
    if holder.get("host") != socket.gethostname():
        return "elsewhere"
    try:
        pid = int(holder.get("pid", -1))
    except (TypeError, ValueError):
        return "unknown"
    if pid == os.getpid():
        return "ours"
    return "running" if pid_alive(pid) else "gone"


def ask(parent: QWidget | None, title: str, text: str, accept: str) -> bool:
    """A modal question with the action's own name on the button; True when the person chose it."""
    box = QMessageBox(QMessageBox.Icon.Warning, title, text, QMessageBox.StandardButton.NoButton, parent)
    box.setTextFormat(Qt.TextFormat.RichText)
    yes = box.addButton(accept, QMessageBox.ButtonRole.AcceptRole)
    no = box.addButton("Open Read-Only", QMessageBox.ButtonRole.RejectRole)
    box.setDefaultButton(no)
    box.exec()
    return box.clickedButton() is yes


def tell(parent: QWidget | None, title: str, text: str) -> None:
    """A modal notice (who holds a lock that cannot be broken from here)."""
    QMessageBox.information(parent, title, text)


def labeler_of(window) -> str | None:
    name = getattr(getattr(window, "label_panel", None), "labeler_name", "") or ""
    return name or None


def _holder_html(holder: dict) -> str:
    return escape(describe(holder))


def offer_break(window, path: Path, holder: dict | None, *, from_menu: bool = False) -> bool:
    """Ask about breaking the lock of ``path`` held by ``holder``; break it (recorded) if the person agrees.

    Returns True when the lock is gone afterwards (broken here, or already released).
    """
    import basinmark.gui.lock_dialog as me  # looked up at call time, so tests can answer the questions

    situation = holder_situation(holder)
    name = Path(path).name
    if situation == "none":
        return True
    if situation == "ours":
        if from_menu:
            me.tell(window, "Label journal lock", f"This window itself writes {name}; there is nothing to unlock.")
        return False
    if situation == "running":
        me.tell(window, "Label journal in use",
                f"<p>The label journal <b>{escape(name)}</b> is being written by {_holder_html(holder)}, "
                f"and that program is still running on this computer.</p><p>This window keeps it read-only: "
                f"you can look at runs and labels but not set labels. Close that program (or label there), "
                f"then open the set again.</p>")
        return False
    if situation == "gone":
        ok = me.ask(window, "Stale label journal lock",
                    f"<p>The label journal <b>{escape(name)}</b> is locked by {_holder_html(holder)}, but that "
                    f"program is no longer running on this computer (it probably stopped without closing the "
                    f"journal).</p><p>Break the lock and label here? The journal records that the lock was "
                    f"broken, by whom and whose lock it was.</p>", "Break Lock and Label")
        force = False
        reason = "broken from the window: the program holding it is no longer running"
    else:  # another host, or a lock that cannot be read: the window cannot know whether it still writes
        who = (_holder_html(holder) if situation == "elsewhere" else "a program this window cannot identify "
               "(the lock file is unreadable)")
        ok = me.ask(window, "Label journal locked elsewhere",
                    f"<p>The label journal <b>{escape(name)}</b> is locked by {who}. This window cannot tell "
                    f"whether that program still runs. If it does and both write, labels may be lost.</p>"
                    f"<p>Break the lock only if you are sure that program is gone. The journal records it.</p>",
                    "Break Lock Anyway")
        force = True
        reason = ("broken from the window on purpose: the program on another host was said to be gone"
                  if situation == "elsewhere" else "broken from the window on purpose: the lock file was unreadable")
    if not ok:
        return False
    try:
        LabelJournal.break_lock(path, by=labeler_of(window), reason=reason, force=force)
    except BasinmarkError as exc:
        if read_lock(path) is None:  # released meanwhile: nothing to break
            return True
        me.tell(window, "Lock not broken", escape(str(exc)))
        return False
    return True


def open_or_offer_break(window, path: Path, opener: Callable[[], LabelJournal]) -> LabelJournal:
    """``opener()``; when the journal's lock is refused and its holder is gone (or elsewhere), offer to break
    it and open again.  Raises the lock error when the person declines (the window then opens read-only)."""
    try:
        return opener()
    except JournalLockedError:
        holder = _settled_holder(path)
        if holder is None:  # released meanwhile
            return opener()
        if holder_situation(holder) in ("gone", "elsewhere", "unknown") and offer_break(window, path, holder):
            return opener()
        raise


def _settled_holder(path: Path, tries: int = 3, pause_s: float = 0.1) -> dict | None:
    """The lock's contents; an unreadable lock is read again a few times, since another program may be
    writing it at this very moment (never offer to break a lock that is only being created)."""
    holder = read_lock(path)
    for _ in range(tries):
        if holder is None or holder:
            break
        time.sleep(pause_s)
        holder = read_lock(path)
    return holder


def unlock_from_menu(window) -> bool:
    """Labels ▸ Unlock Label Journal…: break a stale lock of the open set's journal and open it for labeling."""
    from basinmark.core.sets import journal_path

    st = window.state
    if st.tset is None:
        window.statusBar().showMessage("Open a set first.", 6000)
        return False
    path = journal_path(st.tset.root)
    holder = read_lock(path)
    if holder is None and not st.readonly:
        window.statusBar().showMessage(f"{path.name} is not locked by another program.", 6000)
        return False
    if holder is not None and not offer_break(window, path, holder, from_menu=True):
        return False
    window._open_journal(st.tset, st.rules)  # noqa: SLF001 - reopen for writing, as on opening the set
    ok = not st.readonly
    window.statusBar().showMessage(f"{path.name} is open for labeling." if ok else
                                   f"{path.name} is still read-only: {st.journal_message}", 8000)
    return ok


def install_unlock_action(window) -> QAction:
    """Add Labels ▸ Unlock Label Journal… (the window side of the command line's unlock)."""
    from basinmark.gui.movie import find_menu

    act = QAction("Un&lock Label Journal…", window)
    act.setObjectName("action_unlock_journal")
    act.setToolTip("Break the lock of a label journal whose program stopped without closing it (recorded in "
                   "the journal), and open it for labeling")
    act.triggered.connect(lambda: unlock_from_menu(window))
    menu = getattr(window, "labels_menu", None) or find_menu(window, "menu_labels", "&Labels")
    menu.addAction(act)
    window.unlock_action = act
    return act
