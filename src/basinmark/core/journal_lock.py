"""The writer's lock of a label journal: ``<journal>.lock``, created atomically with O_EXCL.

The lock file holds who writes the journal (owner, host, pid, time and a random token).
Only one process may write a journal; a second one is refused with
:class:`JournalLockedError`.  A lock left by a process that died can be broken
deliberately (:meth:`basinmark.core.journal.LabelJournal.break_lock`), which is recorded.
"""

from __future__ import annotations

import json
import os
import secrets
import socket
from pathlib import Path

from basinmark.core.journal_format import BINARY, JournalError, canonical, utc_now


class JournalLockedError(JournalError):
    """Another process holds the journal's lock."""

    def __init__(self, journal: str | Path, holder: dict | None):
        self.journal = Path(journal)
        self.holder = holder or {}
        super().__init__(f"the label journal {self.journal} is being written by {describe(holder)}; "
                         "open it read-only, or if that program is gone, break the lock with "
                         "'basinmark unlock SET'")


def lock_path(journal: str | Path) -> Path:
    return Path(str(journal) + ".lock")


def describe(holder: dict | None) -> str:
    if not holder:
        return "an unknown program (the lock file is unreadable)"
    return (f"{holder.get('owner', '?')} on host {holder.get('host', '?')} (pid {holder.get('pid', '?')}) "
            f"since {holder.get('time', '?')}")


def read_lock(journal: str | Path) -> dict | None:
    """The lock's contents, {} if the lock exists but cannot be read, None if there is no lock."""
    try:
        text = lock_path(journal).read_text(encoding="utf-8")
    except FileNotFoundError:
        return None
    except OSError:
        return {}
    try:
        obj = json.loads(text)
        return obj if isinstance(obj, dict) else {}
    except ValueError:
        return {}


def pid_alive(pid: int) -> bool:
    """Whether a process with this pid exists on this host (on Windows: assumed so, never probed)."""
    if pid <= 0:
        return False
    if os.name == "nt":  # os.kill(pid, 0) would send CTRL_C_EVENT there
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # exists, owned by someone else
        return True
    return True


def is_stale(holder: dict | None) -> bool:
    """True when the lock's process is known to be gone: same host, pid not running."""
    if not holder:
        return False
    try:
        pid = int(holder.get("pid", -1))
    except (TypeError, ValueError):
        return False
    return holder.get("host") == socket.gethostname() and not pid_alive(pid)


def acquire(journal: str | Path, owner: str) -> dict:
    """Create the lock file atomically; raise :class:`JournalLockedError` if it exists."""
    info = {"owner": owner, "host": socket.gethostname(), "pid": os.getpid(), "time": utc_now(),
            "token": secrets.token_hex(8)}
    path = lock_path(journal)
    try:
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | BINARY, 0o644)
    except FileExistsError:
        raise JournalLockedError(journal, read_lock(journal)) from None
    try:
        os.write(fd, (canonical(info) + "\n").encode("utf-8"))
        os.fsync(fd)
    finally:
        os.close(fd)
    return info


def release(journal: str | Path, info: dict) -> None:
    """Remove the lock file if it is still ours (same token)."""
    held = read_lock(journal)
    if held and held.get("token") == info.get("token"):
        try:
            lock_path(journal).unlink()
        except FileNotFoundError:
            pass
