"""Python's cyclic garbage collector runs only on the GUI thread, between events, and never walks a loaded set.

Left automatic, the collector runs whenever an allocation crosses its threshold: in the middle of a Qt signal
(pyqtgraph's layout callbacks allocate on every geometry change) or on a loader thread.  A cycle holding a
Qt widget is then destroyed inside Qt's own dispatch, and ``QObject::~QObject`` can wait forever on a lock that
dispatch holds (a test run was seen hung there, stack in DEVELOPERS.md).  pyqtgraph ships the standard
remedy, kept by its maintainers: switch automatic collection off and collect from a timer on the GUI thread.

A full collection walks every object the collector tracks: with 10,000 runs open that took 120-130 ms of the
window's thread each time (bench/bench_window_scale.py), and about half of it with none (the window and its
libraries alone).  So the objects alive once a set's runs have arrived are *frozen* (``gc.freeze``: left out of
every later collection; freed by their reference counts as usual when dropped) -- :func:`freeze_survivors`,
called as runs arrive and when a load ends -- and given back to the collector when the set is closed or another
is opened (:func:`thaw`, one full collection of what is alive then, whose survivors are frozen again), so that a
closed set's reference cycles are collected then rather than kept until the program ends.
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


def freeze_survivors(collect_young: bool = True) -> None:
    """Leave every object alive now out of later collections (freezing moves a list head), after collecting the
    two younger generations so that short-lived garbage is not frozen -- unless ``collect_young`` is false (runs
    arriving while a cold open parses: the young generations then hold everything allocated since the last
    batch, and collecting them was itself a pause; what little of it is cyclic garbage waits for :func:`thaw`).
    (Nothing is returned: ``gc.get_freeze_count`` walks every frozen object, 30 ms with 2,000 runs.)"""
    if collect_young:
        gc.collect(1)
    gc.freeze()


def thaw() -> int:
    """Give every frozen object back to the collector and collect once (a closed set's cycles go now); what
    survives is frozen again.  Costs one full collection of what is alive at that moment: call it once the
    set being left has been let go.  Returns how many unreachable objects were found."""
    gc.unfreeze()
    found = gc.collect()
    gc.freeze()
    return found
