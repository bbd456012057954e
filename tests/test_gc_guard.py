"""The application's garbage collection runs on the GUI thread's timer, never on its own mid-signal."""

from __future__ import annotations

import gc
import weakref

import pytest

pytestmark = pytest.mark.gui


class _Node:
    def __init__(self):
        self.me = self  # a reference cycle: only the cyclic collector frees it


def test_make_app_moves_collection_onto_a_gui_timer(qtbot):
    from basinmark.gui.app import make_app
    from basinmark.gui.gc_guard import install_gc_guard

    make_app()
    guard = install_gc_guard()
    assert guard is install_gc_guard()  # one timer, however often the app is made
    assert not gc.isenabled()
    assert guard.timer.isActive() and guard.timer.interval() == 1000
    gc.collect()
    probe = _Node()
    ref = weakref.ref(probe)
    del probe
    junk = [_Node() for _ in range(3 * gc.get_threshold()[0])]  # past the youngest generation's threshold
    del junk
    assert ref() is not None  # nothing collects on allocation any more
    qtbot.waitUntil(lambda: ref() is None, timeout=5000)  # the timer did
