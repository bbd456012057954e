"""Background threads of the window give way while the person acts.

Python runs one thread at a time.  A worker thread doing numpy work takes Python's lock back after each call that
lets it go, and the window's thread then waits up to the switch interval at each of its own hand-overs (every Qt call
lets go of the lock).  At 10,000 runs, bringing the summary to the front while the map's workers still measured, drew
and indexed took a turn of 95-144 ms against 37-58 ms with nothing beside it (bench/bench_window_daily.py).

So the window's thread marks the moments a person acts (:func:`acting`: a key, a click, a panel shown; an
application-wide event filter, :func:`install`) and the workers, between pieces of their work, wait until the window
has been quiet for :data:`QUIET_S` (:func:`give_way`), never longer than :data:`MAX_WAIT_S` at one point, so that
work a person waits for still comes.  The waiting is a sleep: no CPU, Python's lock let go.

A worker's first import of a large library (the starting-conditions analysis imports scikit-learn and SciPy: about a
thousand modules, ~1 s) has no such place of its own, so a worker may ask that its imports give way too
(:func:`imports_give_way`): before each module it imports, it waits as above.
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


#: a widget property: clicks and keys on a view whose own workers' pictures the person waits for (the map) do not
#: hold back the workers
OWN_WORK = "basinmark_own_work"


def _on_own_view(obj) -> bool:
    """Whether ``obj`` is, or lies inside, a widget marked :data:`OWN_WORK`."""
    while obj is not None:
        if obj.property(OWN_WORK):
            return True
        obj = obj.parent()
    return False


def install(app) -> None:
    """Mark the person's actions on ``app`` (a QApplication): keys, mouse buttons, a panel shown."""
    from PySide6.QtCore import QEvent, QObject
    from PySide6.QtWidgets import QDockWidget, QWidget

    # (not the wheel: it zooms the map and scrolls plots, and the map's new picture is what the person waits for)
    kinds = {QEvent.Type.KeyPress, QEvent.Type.MouseButtonPress, QEvent.Type.MouseButtonDblClick}
    show = QEvent.Type.Show

    class _Watcher(QObject):
        last: tuple | None = None   # (type, time) of the input event last looked at

        def eventFilter(self, obj, event) -> bool:  # noqa: N802 (Qt's name)
            kind = event.type()
            if kind == show:   # a panel brought to the front (not every small widget: a map's labels as it draws)
                # the panel's own widget: Qt shows a dock's children before the dock itself, so the dock's Show event
                # came after the panel's showEvent had done its work (the summary's, at 10,000 runs)
                if isinstance(obj, QDockWidget) or (isinstance(obj, QWidget) and isinstance(obj.parent(), QDockWidget)):
                    acting()
                return False
            if kind not in kinds or not isinstance(obj, QWidget):
                return False   # (Qt shows keys and clicks to the window's QWindow first: it says nothing of where)
            key = (kind, event.timestamp())
            if key != self.last:   # the widget it is for; the same event passed on to the parents is not looked at
                self.last = key
                if not _on_own_view(obj):
                    acting()
            return False

    if getattr(app, "_give_way_watcher", None) is None:
        app._give_way_watcher = _Watcher(app)
        app.installEventFilter(app._give_way_watcher)
