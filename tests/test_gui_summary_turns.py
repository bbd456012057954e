"""The summary's numbers come in the turn that asks for them, its plots in the next: at 10,000 runs with two
people's hand labels, bringing the summary to the front was one turn of 88-94 ms (up to 151 ms on a busy
machine), about half of it drawing and painting the plots.  Exports still get the plots drawn at once."""

from __future__ import annotations

import numpy as np
import pytest

from basinmark.core.summary import build_summary
from basinmark.gui.summary_view import install_summary_dock

from gui_fixtures import make_toy_set
from labeling_helpers import open_window

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "left", "left", "right", "unfinished", "left"]


@pytest.fixture
def win(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    w = open_window(qtbot, tmp_path, root, install=install_summary_dock)
    qtbot.waitUntil(lambda: not w.busy, timeout=20000)
    yield w
    w.close()


def _fractions(win) -> np.ndarray:
    labels = win.state.labels.copy()
    labels["final_label"] = [v if v else None for v in labels["final_label"]]
    return build_summary(labels, win.state.rules.products).table["fraction"].to_numpy(float)


def test_numbers_first_then_the_plots_in_the_next_turn(win, qtbot):
    panel, dock = win.summary_panel, win.docks["summary"]
    dock.show()
    dock.raise_()   # the person brings the tab to the front: no event has been processed since
    assert panel.summary is not None and panel.table.rowCount() == len(panel.summary.table)
    assert panel.plots_pending and not hasattr(panel, "bars")
    qtbot.waitUntil(lambda: not panel.plots_pending, timeout=2000)
    np.testing.assert_allclose(panel.bars.opts["height"], _fractions(win))

    st = win.state   # a hand label while the summary is shown: the same two turns
    st.journal.record("toy-003", "right", content_hash=st.tset["toy-003"].content_hash, reason="late")
    st.refresh_labels()
    assert panel.summary.k_b == 3 or panel.summary.k_a == 3
    assert panel.plots_pending
    qtbot.waitUntil(lambda: not panel.plots_pending, timeout=2000)
    np.testing.assert_allclose(panel.bars.opts["height"], _fractions(win))


def test_an_export_gets_the_plots_drawn_at_once(win):
    panel, dock = win.summary_panel, win.docks["summary"]
    dock.show()
    assert panel.plots_pending
    panel.ensure_current()   # what an export of the summary's figure asks first
    assert not panel.plots_pending
    np.testing.assert_allclose(panel.bars.opts["height"], _fractions(win))
    panel.refresh(force=True)   # asked for explicitly: everything at once
    assert not panel.plots_pending
