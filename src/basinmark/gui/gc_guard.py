"""Python's cyclic garbage collector runs only on the GUI thread, between events.

Left automatic, the collector runs whenever an allocation crosses its threshold: in the middle of a Qt signal
(pyqtgraph's layout callbacks allocate on every geometry change) or on a loader thread.  A cycle holding a
Qt widget is then destroyed inside Qt's own dispatch, and ``QObject::~QObject`` can wait forever on a lock that
dispatch holds (a test run was seen hung there, stack in DEVELOPERS.md).  pyqtgraph ships the standard
remedy, kept by its maintainers: switch automatic collection off and collect from a timer on the GUI thread.
"""

from __future__ import annotations

import gc

_GUARD = None


def install_gc_guard(interval_s: float = 1.0):
    """Switch automatic collection off and collect from a GUI-thread timer instead (idempotent)."""
    global _GUARD
    if _GUARD is None:
        from pyqtgraph.util.garbage_collector import GarbageCollector

        _GUARD = GarbageCollector(interval=interval_s)
    return _GUARD


def collect_now() -> int:
    """A full collection at a point the caller knows is outside any Qt dispatch (tests' teardown)."""
    return gc.collect()
