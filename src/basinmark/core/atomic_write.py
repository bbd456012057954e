"""Writing a file whole or not at all, with a sentence (which file, what to do) when the system refuses.

The text goes to a temporary file beside the target, is flushed to disk, then renamed over the
target, so a full disk or a crash never leaves a half-written export where the old one was.
"""

from __future__ import annotations

import os
import secrets
from pathlib import Path
from typing import Callable

from basinmark.core.fs_errors import FileSystemError, file_error


def check_target(path: str | Path, cls: type[FileSystemError] = FileSystemError) -> Path:
    """The path to write, after checking that it is not a folder and that its folder exists."""
    path = Path(path).expanduser()
    if path.is_dir():
        raise cls(f"cannot write {path}: it is a folder; give a file name", path)
    if not path.parent.is_dir():
        raise cls(f"cannot write {path}: the folder {path.parent} does not exist; create it first or choose "
                  "another place", path)
    return path


def write_bytes_atomic(path: str | Path, data: bytes, *, what: str = "the file",
                       cls: type[FileSystemError] = FileSystemError) -> Path:
    """Write ``data`` to ``path`` through a temporary file renamed into place; returns the path."""
    path = check_target(path, cls)
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}-{secrets.token_hex(4)}")
    try:
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0), 0o666)
    except OSError as exc:
        raise file_error(exc, path, f"write {what}", cls=cls) from None
    try:
        try:
            view = memoryview(data)
            while view:
                view = view[os.write(fd, view):]
            os.fsync(fd)
        finally:
            os.close(fd)
        os.replace(tmp, path)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise file_error(exc, path, f"write {what}", cls=cls) from None
    return path


def write_text_atomic(path: str | Path, text: str, *, what: str = "the file",
                      cls: type[FileSystemError] = FileSystemError) -> Path:
    return write_bytes_atomic(path, text.encode("utf-8"), what=what, cls=cls)


def write_with(path: str | Path, writer: Callable[[Path], object], *, what: str = "the file",
               cls: type[FileSystemError] = FileSystemError) -> Path:
    """Let ``writer(tmp_path)`` write a temporary file (for libraries that want a path), then rename it."""
    path = check_target(path, cls)
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}-{secrets.token_hex(4)}{path.suffix}")
    try:
        writer(tmp)
        os.replace(tmp, path)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise file_error(exc, path, f"write {what}", cls=cls) from None
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return path
