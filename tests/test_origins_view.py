"""The Origins tab: the core's result in the window, points coloured by outcome, a click opens that run."""

from __future__ import annotations

import numpy as np
import pytest
from origins_sets import window_with_origins
from PySide6.QtCore import QPoint, QPointF, Qt

from basinmark.core.origins import Settings
from basinmark.gui.colours import outcome_colour

pytestmark = pytest.mark.gui

QUICK = Settings(n_repeats=1, n_permutations=19, importance_repeats=2, C=1.0)  # fixed C: no inner folds


@pytest.fixture
def win(qtbot, tmp_path):
    w = window_with_origins(qtbot, tmp_path, QUICK)
    yield w
    w.close()


def test_the_tab_shows_the_core_result_and_colours_by_outcome(win):
    panel = win.origins_panel
    a = panel.analysis
    assert a is not None and a.classified
    assert panel.sentence.text() == a.sentence
    assert "the rate of change of r_bc" in a.sentence
    assert panel.table.item(0, 1).text() == a.importance["feature"].iloc[0] == "dr_bc/dt [angstrom/fs]"
    assert panel.x_combo.currentData() == a.top_two()[0]
    products = list(win.state.rules.products)
    for label, item in panel.canvas.scatters.items():
        brush = item.opts["brush"].color()
        want = outcome_colour(label, products)
        assert (brush.red(), brush.green(), brush.blue()) == (want.red(), want.green(), want.blue())
    assert panel.canvas.line_item is not None  # the classifier's boundary is drawn


def test_clicking_a_point_opens_that_run(win, qtbot):
    panel = win.origins_panel
    canvas = panel.canvas
    target = next(r for r in panel.analysis.run_ids if r != win.state.run_id)
    x, y = canvas.point_of(target)
    # the point must not be hidden under another: pick the run farthest from its neighbours if needed
    vb = canvas.plot_item.vb
    scene = vb.mapViewToScene(QPointF(x, y))
    pos = canvas.mapFromScene(scene)
    qtbot.mouseMove(canvas.viewport(), pos)
    qtbot.mouseClick(canvas.viewport(), Qt.MouseButton.LeftButton, pos=QPoint(pos.x(), pos.y()))
    assert win.state.run_id == target
    cx, cy = canvas.current.getData()
    assert (cx[0], cy[0]) == (pytest.approx(x), pytest.approx(y))  # the current run is ringed


def test_a_mode_file_that_cannot_be_read_is_said(win, qtbot, tmp_path, monkeypatch):
    import basinmark.gui.origins_view as view

    bad = tmp_path / "modes.json"
    bad.write_text("not modes", encoding="utf-8")
    monkeypatch.setattr(view, "choose_mode_file", lambda parent: str(bad))
    panel = win.origins_panel
    with qtbot.waitSignal(panel.updated, timeout=60000):
        panel.modes_button.click()
    panel.wait(60)
    assert panel.modes_label.text() == "modes.json"
    assert panel.analysis is None and panel.sentence.text().startswith("The analysis failed:")
    assert np.isnan(panel.canvas.boundary_accuracy) or panel.canvas.analysis is None
