"""Workers give way while the person acts (the pure part: no Qt; the window marks the moments, gui/give_way.py).

Python runs one thread at a time.  A worker thread doing numpy work takes Python's lock back after each call that
lets it go, and the window's thread then waits up to the switch interval at each of its own hand-overs (every Qt call
lets go of the lock).  At 10,000 runs, bringing the summary to the front while the map's workers still measured, drew
and indexed took a turn of 95-144 ms against 37-58 ms with nothing beside it (bench/bench_window_daily.py).

So the window's thread marks the moments a person acts, or the window does work a person waits for (:func:`acting`),
and the workers, between pieces of their work, wait until the window has been quiet for :data:`QUIET_S`
(:func:`give_way`), never longer than :data:`MAX_WAIT_S` at one point, so that work a person waits for still comes.
The waiting is a sleep: no CPU, Python's lock let go.  Outside the window nobody marks, and :func:`give_way` only
offers Python's lock (the command line and scripts lose nothing).

A worker's first import of a large library has no such place of its own, so a worker may ask that its imports give
way too (:func:`imports_give_way`): before each module it imports, it waits as above.
"""

from __future__ import annotations

import sys
import threading
import time
from contextlib import contextmanager

#: how long after a person's action the workers hold back (our own choice: the turn that a click or a shown panel
#: starts was over within this at 10,000 runs, 37-68 ms; short, so that a map clicked or zoomed is not kept waiting)
QUIET_S = 0.1
#: the longest a worker waits at one point (typing or dragging goes on and on: the work must still come)
MAX_WAIT_S = 0.5

_until = 0.0   # monotonic time until which workers hold back (a float: written by the window's thread only)


def reset() -> None:
    """Nobody acts (tests)."""
    global _until
    _until = 0.0


def acting(hold_s: float = QUIET_S) -> None:
    """The person acts now (the window's thread): workers hold back until ``hold_s`` from now."""
    global _until
    _until = max(_until, time.monotonic() + hold_s)


def holding() -> bool:
    """Whether workers are holding back now."""
    return time.monotonic() < _until


def give_way(max_wait_s: float = MAX_WAIT_S) -> float:
    """Between two pieces of a worker's work: wait while the person acts (at most ``max_wait_s``); returns the time
    waited.  Otherwise only offers Python's lock (``sleep(0)``)."""
    start = time.monotonic()
    deadline = start + max_wait_s
    while True:
        now = time.monotonic()
        wait = min(_until, deadline) - now
        if wait <= 0:
            if now == start:
                time.sleep(0)
            return now - start
        time.sleep(min(wait, 0.02))


_local = threading.local()   # .imports: whether this thread's imports give way


class _ImportsGiveWay:
    """A finder first on ``sys.meta_path`` that finds nothing: Python asks it before each module is imported (never
    for one already imported), and it waits there while the person acts, on the threads that asked for it.

    It waits before the module is looked for, holding only the import locks of the modules being imported (one the
    window's thread wants would keep it waiting at most until the worker goes on: :data:`MAX_WAIT_S`)."""

    @staticmethod
    def find_spec(name, path=None, target=None):  # the finder protocol of importlib
        if getattr(_local, "imports", False) and threading.current_thread() is not threading.main_thread():
            give_way()
        return None

    @staticmethod
    def invalidate_caches() -> None:
        return None


def imports_giving_way() -> bool:
    """Whether this thread's imports give way."""
    return bool(getattr(_local, "imports", False))


@contextmanager
def imports_give_way():
    """Within this, the imports made by this thread (a worker; never the window's) wait while the person acts."""
    if not any(isinstance(f, _ImportsGiveWay) for f in sys.meta_path):
        sys.meta_path.insert(0, _ImportsGiveWay())
    before = imports_giving_way()
    _local.imports = True
    try:
        yield
    finally:
        _local.imports = before
