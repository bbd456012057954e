"""A loaded set is left out of full garbage collections (frozen), and given back to the collector when another
set is opened, so that repeated opens keep no closed set or its reference cycles.

Full collections of 10,000 runs took 120-130 ms of the window's thread (bench/bench_window_scale.py); here the
work is checked by what the collector tracks, never by time."""

from __future__ import annotations

import gc
import weakref
from pathlib import Path

import pytest
from PySide6.QtCore import QSettings

from basinmark.gui.gc_guard import freeze_survivors, thaw

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished"]


class _Node:
    def __init__(self) -> None:
        self.me = self   # a reference cycle: only the cyclic collector frees it


def _walked(obj) -> bool:
    """``obj`` is among the objects a full collection walks (not frozen)."""
    return any(o is obj for o in gc.get_objects())


def test_frozen_objects_are_not_walked_and_thaw_collects_their_cycles():
    gc.collect()
    node = _Node()
    ref = weakref.ref(node)
    assert _walked(node)
    freeze_survivors()
    assert not _walked(node)           # left out of every collection from now on
    del node
    gc.collect()
    assert ref() is not None           # a frozen cycle survives a full collection...
    thaw()
    assert ref() is None               # ...until it is given back
    kept = _Node()
    thaw()
    assert not _walked(kept)           # what survives the thaw is frozen again
    gc.unfreeze()


def _window(qtbot, tmp_path: Path):
    from basinmark.gui.main_window import MainWindow

    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    return win


def _open(qtbot, win, root: Path, use_cache: bool) -> None:
    with qtbot.waitSignal(win.set_loaded, timeout=60000):
        win.open_set(root, use_cache=use_cache)
    qtbot.waitUntil(lambda: not win.files_checking, timeout=60000)   # the background check of the files ends
    qtbot.wait(20)   # its job is let go (deleted later)


@pytest.mark.parametrize("use_cache", [False, True], ids=["no cache", "cache"])
def test_repeated_opens_keep_no_closed_set(qtbot, tmp_path, use_cache):
    roots = [make_toy_set(tmp_path / name, OUTCOMES * 3) for name in ("east", "west")]
    win = _window(qtbot, tmp_path)
    sets, runs, canaries, frozen = [], [], [], []
    for k in range(5):
        _open(qtbot, win, roots[k % 2], use_cache)
        tset = win.state.tset
        assert len(tset) == len(OUTCOMES) * 3
        # the runs are frozen once loaded: a full collection does not walk them
        assert not any(_walked(t) for t in tset.runs.values())
        assert not _walked(tset)
        # a cycle that only this set holds (as a view's cached state might), dropped when the set goes
        node = _Node()
        tset.metadata["canary"] = node
        canaries.append(weakref.ref(node))
        del node
        freeze_survivors()   # as if it had been made while the runs arrived: frozen with them
        assert not _walked(tset.metadata["canary"])
        sets.append(weakref.ref(tset))
        runs.append(weakref.ref(next(iter(tset.runs.values()))))
        del tset
        frozen.append(gc.get_freeze_count())
        # every set opened before is gone, with its cycles (no collection was asked for here)
        assert all(r() is None for r in sets[:-1]), [r() is not None for r in sets]
        assert all(r() is None for r in runs[:-1])
        assert all(r() is None for r in canaries[:-1])
    # what stays frozen does not grow with the number of opens
    assert frozen[-1] <= frozen[1] * 1.05 + 2000, frozen
    win.close()
