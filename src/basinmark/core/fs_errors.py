"""File-system failures turned into one plain sentence: which file, what went wrong, what to do.

Every place that creates, writes or moves a file for the user catches ``OSError`` and raises
:class:`FileSystemError` through :func:`file_error` (the label journal's own files raise
``journal_lock.JournalFileError``, whose message uses :func:`reason_and_advice` too), so that a
read-only folder, a full disk or a missing folder ends in a message and a non-zero exit code, never
in a traceback.  ``basinmark.cli`` also turns any
``OSError`` that slips through into such a sentence (a safety net, not a substitute).
"""

from __future__ import annotations

import errno
from pathlib import Path

from basinmark.core.errors import BasinmarkError

# what the system's error means, in words, and what a person can do about it
_ADVICE: dict[int, tuple[str, str]] = {
    errno.ENOSPC: ("the disk is full", "free some space on that disk and try again"),
    errno.EROFS: ("the file system is read-only", "choose a place that can be written"),
    errno.EACCES: ("permission denied", "ask for write access there, or choose a place you may write to"),
    errno.EPERM: ("the operation is not permitted", "ask for write access there, or choose a place you may write to"),
    errno.ENOENT: ("no such file or folder", "check the path; create the folder first if it is new"),
    errno.ENOTDIR: ("a part of the path is a file, not a folder", "check the path"),
    errno.EISDIR: ("it is a folder", "give a file name, not a folder"),
    errno.EIO: ("the disk reported an input/output error", "check the disk (it may be failing or disconnected)"),
    errno.EMFILE: ("too many files are open", "close other programs and try again"),
    errno.ENAMETOOLONG: ("the file name is too long", "choose a shorter name or path"),
}
if hasattr(errno, "EDQUOT"):
    _ADVICE[errno.EDQUOT] = ("your disk quota is used up", "free some space (or ask for a larger quota) and try again")


class FileSystemError(BasinmarkError):
    """A file could not be created, written, read or moved; the message names it and says what to do."""

    def __init__(self, message: str, path: str | Path | None = None, errno_: int | None = None):
        self.path = Path(path) if path is not None else None
        self.errno = errno_
        super().__init__(message)


def reason_and_advice(exc: BaseException) -> tuple[str, str]:
    """The system's error in words, and what to do about it (a general hint when the error is unknown)."""
    code = getattr(exc, "errno", None)
    if code in _ADVICE:
        return _ADVICE[code]
    text = getattr(exc, "strerror", None) or str(exc) or type(exc).__name__
    return text[:1].lower() + text[1:], "check the path and that the disk is working, then try again"


def file_error(exc: OSError, path: str | Path | None, doing: str, *, advice: str = "",
               cls: type[FileSystemError] = FileSystemError) -> FileSystemError:
    """An error to raise for ``exc``: "cannot <doing> <path> (<reason>); <what to do>".

    ``advice`` replaces the general hint for this errno when the caller knows better (say, where
    labels can go instead of a read-only set).  Returns the exception; the caller raises it
    (``raise file_error(...) from None``) so that no traceback of the OSError is shown.
    """
    where = path if path is not None else getattr(exc, "filename", None)
    reason, hint = reason_and_advice(exc)
    subject = f" {where}" if where not in (None, "") else ""
    return cls(f"cannot {doing}{subject} ({reason}); {advice or hint}", where, getattr(exc, "errno", None))


def is_unwritable(exc: BaseException) -> bool:
    """Whether the error means "this place cannot be written" (read-only, permission), not a full disk."""
    return getattr(exc, "errno", None) in (errno.EROFS, errno.EACCES, errno.EPERM)


#: what to do when the set's own journal cannot be written (said on the command line and in the window)
JOURNAL_ELSEWHERE = ("to label a set you cannot write to, keep the labels in a journal elsewhere: add "
                     "--journal PATH to the command (in the window: Labels ▸ Save Labels Elsewhere…); "
                     "the labels stay bound to the runs' content hashes")
