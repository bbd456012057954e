"""The window's loader opens sets "beside a window": the pool parses, the window's process reads only the first run
itself (tests/test_sets_batches.py checks what that means for the core)."""

from __future__ import annotations

import pytest
from PySide6.QtCore import QSettings

from basinmark.core import quick_open as quick_mod
from basinmark.core import sets as sets_mod
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui


@pytest.mark.parametrize("use_cache", [False, True])
def test_the_loader_opens_beside_a_window(qtbot, tmp_path, monkeypatch, use_cache):
    root = make_toy_set(tmp_path / "toyset", ["left", "right", "left"])
    seen = []
    real_open, real_quick = sets_mod.open_set, quick_mod.quick_open

    def open_set(*a, **k):
        seen.append(("open", sets_mod._local_runs.get()))
        return real_open(*a, **k)

    def quick_open(*a, **k):
        seen.append(("quick", sets_mod._local_runs.get()))
        return real_quick(*a, **k)

    monkeypatch.setattr(sets_mod, "open_set", open_set)
    monkeypatch.setattr(quick_mod, "quick_open", quick_open)
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=use_cache)
    assert seen and all(cap == sets_mod.WINDOW_LOCAL_RUNS for _, cap in seen), seen
    assert ("quick" in {k for k, _ in seen}) == use_cache
    assert sets_mod._local_runs.get() is None   # the window's own thread is untouched
    win.close()
