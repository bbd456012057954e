"""Opening a set in the window works out every run's content hash in the loader's thread, never in the window's
thread, also for a folder without rules (no classification then asks for them first): at the end of a load the
label table asks for every run's."""

from __future__ import annotations

import threading

import pytest
from PySide6.QtCore import QSettings

import basinmark.core.model as model
from basinmark.gui.main_window import MainWindow

from gui_fixtures import TOY_ENDS, make_toy_set

pytestmark = pytest.mark.gui


def test_content_hashes_are_computed_off_the_window_thread(qtbot, tmp_path, monkeypatch):
    ends = sorted(TOY_ENDS)
    root = make_toy_set(tmp_path / "toyset", [ends[i % len(ends)] for i in range(12)])
    (root / "basins.toml").unlink()   # no rules: nothing classifies the runs in the loader's thread
    where: list[bool] = []
    real = model.combined_hash

    def spy(*args, **kwargs):
        where.append(threading.current_thread() is threading.main_thread())
        return real(*args, **kwargs)

    monkeypatch.setattr(model, "combined_hash", spy)
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    with qtbot.waitSignal(win.set_loaded, timeout=30000):
        win.open_set(root, use_cache=False)
    assert len(win.state.labels) == 12
    assert where, "no content hash was computed"
    assert not any(where), f"{sum(where)} of {len(where)} content hashes were computed in the window's thread"
