"""The writer's lock of a label journal: ``<journal>.lock``, created atomically with O_EXCL.

The lock file holds who writes the journal (owner, host, pid, time and a random token).
Only one process may write a journal; a second one is refused with
:class:`JournalLockedError`.  A lock left by a process on this host that is no longer alive is
broken by the next writer on its own, and the journal records that (a ``lock_broken`` event with
``automatic: true``); a lock from another host, or one whose process runs, is only broken on
purpose (:meth:`basinmark.core.journal.LabelJournal.break_lock`, ``force``), also recorded.
"""

from __future__ import annotations

import json
import os
import secrets
import socket
from pathlib import Path

from basinmark.core.journal_format import BINARY, JournalError, canonical, utc_now


class JournalFileError(JournalError):
    """The file system refused an operation on a journal's files (``errno``, ``path`` say which)."""

    def __init__(self, journal: str | Path, what: str, exc: OSError, path: str | Path | None = None,
                 outcome: str = "nothing was written"):
        self.journal = Path(journal)
        self.path = Path(path) if path is not None else self.journal
        self.errno = exc.errno
        self.strerror = exc.strerror or str(exc)
        from basinmark.core.fs_errors import JOURNAL_ELSEWHERE, is_unwritable, reason_and_advice

        advice = JOURNAL_ELSEWHERE if is_unwritable(exc) else reason_and_advice(exc)[1]  # what to do about it
        super().__init__(f"cannot {what} {self.path} ({self.strerror}); {outcome}; {advice}")


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


def holder_state(holder: dict | None) -> str:
    """Who the lock says writes: ``nobody`` (no lock), ``gone`` (its process is known to be dead) or
    ``active`` (running, on another host, or a lock being created right now)."""
    from basinmark.core.journal_check import ACTIVE, GONE, NOBODY

    if holder is None:
        return NOBODY
    return GONE if is_stale(holder) else ACTIVE


def _create(journal: str | Path, info: dict) -> bool:
    """Create the lock file holding ``info``; False if one exists.  A failed creation leaves no file."""
    path = lock_path(journal)
    try:
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | BINARY, 0o644)
    except FileExistsError:
        return False
    except OSError as exc:
        raise JournalFileError(journal, "create the lock file", exc, lock_path(journal)) from None
    try:
        data = (canonical(info) + "\n").encode("utf-8")
        if os.write(fd, data) != len(data):
            raise OSError(28, "No space left on device")
        os.fsync(fd)
    except OSError as exc:
        os.close(fd)
        path.unlink(missing_ok=True)  # an empty or half lock would block every writer
        raise JournalFileError(journal, "write the lock file", exc, lock_path(journal)) from None
    os.close(fd)
    return True


def _take_stale(journal: str | Path, holder: dict) -> bool:
    """Remove a lock whose process is gone, if it is still that lock; True when it was removed.

    The lock is first renamed to a name of our own (atomic: of two processes breaking it at once,
    one wins), then checked to be the very lock judged stale; a newer lock taken meanwhile by
    someone else is put back.
    """
    path = lock_path(journal)
    aside = Path(f"{path}.breaking-{os.getpid()}-{secrets.token_hex(4)}")
    try:
        os.rename(path, aside)
    except FileNotFoundError:
        return False
    except OSError as exc:
        raise JournalFileError(journal, "break the stale lock", exc, path) from None
    try:
        got = json.loads(aside.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        got = None
    if not isinstance(got, dict) or got.get("token") != holder.get("token"):
        try:
            os.link(aside, path)  # fails if yet another lock exists: then that one stands
        except OSError:
            pass
        aside.unlink(missing_ok=True)
        return False
    aside.unlink(missing_ok=True)
    return True


def acquire(journal: str | Path, owner: str) -> tuple[dict, dict | None]:
    """Take the lock: (our lock, the holder of a lock we broke because its process is gone, or None).

    A lock held by a live process, by one on another host, or unreadable raises
    :class:`JournalLockedError`.
    """
    info = {"owner": owner, "host": socket.gethostname(), "pid": os.getpid(), "time": utc_now(),
            "token": secrets.token_hex(8)}
    broken = None
    for _ in range(3):
        if _create(journal, info):
            return info, broken
        holder = read_lock(journal)
        if holder is None:
            continue  # released meanwhile
        if not is_stale(holder) or not holder.get("token"):
            raise JournalLockedError(journal, holder)
        if _take_stale(journal, holder):
            broken = holder
    raise JournalLockedError(journal, read_lock(journal))


def release(journal: str | Path, info: dict) -> None:
    """Remove the lock file if it is still ours (same token)."""
    held = read_lock(journal)
    if held and held.get("token") == info.get("token"):
        try:
            lock_path(journal).unlink()
        except FileNotFoundError:
            pass
