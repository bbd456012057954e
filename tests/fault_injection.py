"""Injected file-system faults for tests: a full disk, a read-only place, a refused permission.

Tests run as root, where ``chmod`` does not stop a write, so faults are injected at the Python level:
``os.open`` is wrapped to remember which path each descriptor belongs to, and ``os.open``, ``os.write``,
``os.fsync``, ``os.replace`` and ``os.ftruncate`` raise the chosen ``OSError`` for paths that match.
A full disk stays full once hit (every later write to a matching path fails too) until a file is cut
shorter (``ftruncate``), which frees space as on a real file system; the write that hits it may first
write part of its bytes, as a real file system does.
"""

from __future__ import annotations

import errno as _errno
import fnmatch
import os
from contextlib import contextmanager
from pathlib import Path

_WRITE_FLAGS = os.O_WRONLY | os.O_RDWR | os.O_CREAT | os.O_APPEND | os.O_TRUNC


class Faults:
    """Counts writes to matching paths and fails from the ``at``-th on (1-based), sticky."""

    def __init__(self, pattern: str = "*", *, code: int = _errno.ENOSPC, at: int = 1, ops=("write",),
                 partial: bool = True):
        self.pattern, self.code, self.at, self.ops, self.partial = pattern, code, at, set(ops), partial
        self.count = 0
        self.hit = False
        self.freed = False
        self.paths: dict[int, str] = {}

    def matches(self, path) -> bool:
        p = str(path)
        return fnmatch.fnmatch(p, self.pattern) or fnmatch.fnmatch(Path(p).name, self.pattern)

    def _tick(self, path) -> bool:
        """True when this operation on ``path`` must fail."""
        if self.freed or not self.matches(path):
            return False
        self.count += 1
        if self.hit or self.count >= self.at:
            self.hit = True
            return True
        return False

    def error(self, path) -> OSError:
        return OSError(self.code, os.strerror(self.code), str(path))


@contextmanager
def inject(monkeypatch, faults: Faults):
    real_open, real_write, real_fsync = os.open, os.write, os.fsync
    real_replace, real_ftruncate, real_close = os.replace, os.ftruncate, os.close

    def fake_open(path, flags, mode=0o777, *, dir_fd=None):
        if "open" in faults.ops and flags & _WRITE_FLAGS and faults._tick(path):
            raise faults.error(path)
        fd = real_open(path, flags, mode, dir_fd=dir_fd)
        faults.paths[fd] = str(path)
        return fd

    def fake_write(fd, data):
        path = faults.paths.get(fd)
        if path is not None and "write" in faults.ops:
            already = faults.hit
            if faults._tick(path):
                if faults.partial and not already and len(data) > 1:
                    return real_write(fd, bytes(data)[: len(data) // 2])  # part reaches the disk, then it is full
                raise faults.error(path)
        return real_write(fd, data)

    def fake_fsync(fd):
        path = faults.paths.get(fd)
        if path is not None and "fsync" in faults.ops and faults._tick(path):
            raise faults.error(path)
        return real_fsync(fd)

    def fake_replace(src, dst, **kw):
        if "replace" in faults.ops and faults._tick(dst):
            raise faults.error(dst)
        return real_replace(src, dst, **kw)

    def fake_ftruncate(fd, length):
        real_ftruncate(fd, length)
        if faults.hit and faults.code == _errno.ENOSPC:
            faults.freed = True  # cutting a file back frees space: the disk is no longer full

    def fake_close(fd):
        faults.paths.pop(fd, None)
        return real_close(fd)

    monkeypatch.setattr(os, "open", fake_open)
    monkeypatch.setattr(os, "write", fake_write)
    monkeypatch.setattr(os, "fsync", fake_fsync)
    monkeypatch.setattr(os, "replace", fake_replace)
    monkeypatch.setattr(os, "close", fake_close)
    monkeypatch.setattr(os, "ftruncate", fake_ftruncate)
    try:
        yield faults
    finally:
        monkeypatch.setattr(os, "open", real_open)
        monkeypatch.setattr(os, "write", real_write)
        monkeypatch.setattr(os, "fsync", real_fsync)
        monkeypatch.setattr(os, "replace", real_replace)
        monkeypatch.setattr(os, "close", real_close)
        monkeypatch.setattr(os, "ftruncate", real_ftruncate)
