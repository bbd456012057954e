"""Random sequences of what a person does (bring panels to the front, hand-label runs by key, move through runs) with
the summary's numbers-then-plots turns and the workers giving way: whenever the summary is in front and its turns
are over, its table and bars are the core's summary of the window's labels (the model), and nothing is said about
labels outside the set (every label here is the set's own)."""

from __future__ import annotations

import random

import numpy as np
import pytest
from PySide6.QtCore import Qt
from PySide6.QtTest import QTest

from basinmark.core.summary import build_summary
from basinmark.gui.app import install_extras

from gui_fixtures import make_toy_set
from labeling_helpers import open_window

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "left", "unfinished", "right", "left", "left", "right", "left"]


def _model(win):
    labels = win.state.labels.copy()
    labels["final_label"] = [v if v else None for v in labels["final_label"]]
    return build_summary(labels, win.state.rules.products)


@pytest.mark.parametrize("seed", [3, 11])
def test_random_actions_keep_the_summary_equal_to_the_core(qtbot, tmp_path, seed):
    rng = random.Random(seed)
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    win = open_window(qtbot, tmp_path, root, install=install_extras)
    qtbot.waitUntil(lambda: not win.busy, timeout=20000)
    win.label_panel.set_labeler("kim")
    panel, view = win.summary_panel, win.run_table.view
    checked = 0
    keys = {"1": Qt.Key.Key_1, "2": Qt.Key.Key_2, "3": Qt.Key.Key_3}
    for _ in range(30):
        act = rng.choice(["summary", "traces", "map", "label", "down", "label"])
        if act in ("summary", "traces", "map"):
            win.docks[act].show()
            win.docks[act].raise_()
        elif act == "down":
            view.setFocus()
            QTest.keyClick(view, Qt.Key.Key_Down)
        else:   # a label key, then Enter in the reason box saves it
            view.setFocus()
            QTest.keyClick(view, keys[rng.choice("123")])
            if win.label_panel.pending is not None:
                QTest.keyClick(win.label_panel.reason, Qt.Key.Key_Return)
        if rng.random() < 0.5:
            qtbot.wait(rng.choice([0, 1, 20]))
        if panel.isVisible() and rng.random() < 0.5:
            qtbot.waitUntil(lambda: not panel.plots_pending and not panel.stale, timeout=5000)
            core = _model(win)
            shown = {panel.table.item(i, 0).text(): int(panel.table.item(i, 1).text())
                     for i in range(panel.table.rowCount())}
            assert shown == {r.label: int(r.count) for r in core.table.itertuples()}
            np.testing.assert_allclose(panel.bars.opts["height"], core.table["fraction"])
            checked += 1
        assert "not in this set" not in win.banner.text()
    assert checked >= 3 and any(ev.get("source") == "hand" for ev in win.state.journal.events)
    win.close()
