"""The window shows a cached set after the quick check, hashes its files in the background, and says plainly
when a file changed in a way the quick check could not see (then reads the set again)."""

from __future__ import annotations

import threading

import numpy as np
import pytest
from PySide6.QtCore import QSettings

from basinmark.core import quick_open as quick_module
from basinmark.core.sets import open_set
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set
from test_quick_open import change_keeping_size_and_time

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished"]


def _window(qtbot, tmp_path) -> MainWindow:
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    w.show()
    return w


def _open(qtbot, win, root) -> None:
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root)


@pytest.fixture
def cached_root(qtbot, tmp_path):
    """A set opened once in the window: the snapshot is written, then the background check records the files."""
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    win = _window(qtbot, tmp_path)
    _open(qtbot, win, root)
    assert not win.state.tset.metadata.get("opened_by_quick_check")
    qtbot.waitUntil(lambda: not win.files_checking, timeout=20000)
    win.close()
    return root


def test_cached_set_is_shown_before_its_files_are_hashed(qtbot, tmp_path, cached_root, monkeypatch):
    release = threading.Event()
    real = quick_module.full_check

    def held_check(*args, **kw):
        release.wait(20)
        return real(*args, **kw)

    monkeypatch.setattr(quick_module, "full_check", held_check)
    win = _window(qtbot, tmp_path)
    try:
        _open(qtbot, win, cached_root)
        # shown and usable while every file is still to be hashed
        assert win.state.tset.metadata.get("opened_by_quick_check")
        assert win.files_checking and not win.busy
        assert win.run_table.proxy.rowCount() == len(OUTCOMES) and win.state.traj is not None
    finally:
        release.set()
    qtbot.waitUntil(lambda: not win.files_checking, timeout=20000)
    assert "changed since it was cached" not in win.banner.text()
    win.close()


def test_a_change_the_quick_check_missed_is_reported_and_read_again(qtbot, tmp_path, cached_root):
    changed = cached_root / "toy-002.fwd.xyz"
    change_keeping_size_and_time(changed)
    win = _window(qtbot, tmp_path)
    loads = []
    win.set_loaded.connect(lambda: loads.append(dict(win.state.tset.metadata)))
    win.open_set(cached_root)
    # the stale cache is shown first; the background check finds the change, says so, and reads the set again
    qtbot.waitUntil(lambda: len(loads) == 2, timeout=30000)
    assert loads[0].get("opened_by_quick_check") and not loads[1].get("opened_by_quick_check")
    assert "changed since it was cached" in win.banner.text()
    assert "toy-002.fwd.xyz" in win.banner.text()
    fresh = open_set(cached_root, use_cache=False)
    assert win.state.tset["toy-002"].content_hash == fresh["toy-002"].content_hash
    np.testing.assert_array_equal(win.state.tset["toy-002"].positions, fresh["toy-002"].positions)
    assert not win.state.tset.metadata.get("opened_by_quick_check")
    qtbot.waitUntil(lambda: not win.files_checking, timeout=20000)
    assert "changed since it was cached" in win.banner.text()  # still said after the set is read again
    win.close()


def test_leaving_a_set_while_its_files_are_checked_waits_for_the_check_on_close(qtbot, tmp_path, cached_root,
                                                                                 monkeypatch):
    release = threading.Event()
    real = quick_module.full_check
    monkeypatch.setattr(quick_module, "full_check", lambda *a, **kw: (release.wait(20), real(*a, **kw))[1])
    win = _window(qtbot, tmp_path)
    _open(qtbot, win, cached_root)
    first = win.file_check
    assert first is not None and first.thread.isRunning()
    _open(qtbot, win, cached_root)   # opened again while the first check still runs: its finding is dropped
    assert first in win._left_checks and win.file_check is not first
    release.set()
    win.close()                      # waits for both checks: no thread outlives the window
    assert not first.thread.isRunning()


def test_the_background_check_waits_for_the_end_of_the_load_to_be_painted(monkeypatch, tmp_path):
    """The check's first work is Python (a stat and a name for each of 20,000 files): started in the load's last turn
    it held Python's lock against that turn's paints (its gap 84-90 ms at 10,000 runs).  It starts START_DELAY_S
    later, or at once when cancelled meanwhile (the window is leaving the set)."""
    import time

    from basinmark.gui.loader import FileCheckWorker

    calls = []
    monkeypatch.setattr(quick_module, "full_check",
                        lambda root, quick, cancel=None: calls.append(time.monotonic()) or "ok")
    monkeypatch.setattr(FileCheckWorker, "START_DELAY_S", 0.3)
    worker = FileCheckWorker(tmp_path)
    got = []
    worker.done.connect(got.append)
    t0 = time.monotonic()
    worker.run()
    assert got == ["ok"] and calls[0] - t0 >= 0.3
    worker = FileCheckWorker(tmp_path)
    worker.cancel()
    t0 = time.monotonic()
    worker.run()
    assert calls[-1] - t0 < 0.2
