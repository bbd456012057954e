"""The traces' axes keep the units they name: a run of several picoseconds is drawn on a time axis in fs (the
plotting library's automatic SI prefixes made it "time (kfs)" with ticks in thousands of femtoseconds, a unit no
chemist writes), and distances and angles stay in Å and degrees whatever their range."""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtWidgets import QApplication

from basinmark.gui.traces import TracesView

from gui_fixtures import stretched_ethylene

pytestmark = pytest.mark.gui


@pytest.mark.parametrize("dt", [2.5, 100.0])   # 41 frames: +-50 fs, and +-2,000 fs
def test_axes_keep_their_units_at_any_time_span(qtbot, dt):
    view = TracesView()
    qtbot.addWidget(view)
    view.resize(700, 600)
    view.show()
    view.set_run(stretched_ethylene(dt=dt), user_monitors=[(1, 2), (3, 1, 4)])
    QApplication.processEvents()
    for plot, unit in ((view.p_drift, "fs"), (view.p_dist, "Å"), (view.p_angle, "°")):
        axis = plot.getAxis("bottom" if unit == "fs" else "left")
        text = axis.labelString()
        assert f"({unit})" in text, text
        assert axis.autoSIPrefixScale == 1.0, (unit, axis.autoSIPrefixScale, text)


def test_switching_runs_reuses_the_curves_and_keeps_what_they_show(qtbot):
    """A new run redraws the traces with the curves of the previous one (their data and pens set anew: making
    plot items was most of a redraw), the axis labels set once; what is shown is the new run's, hidden traces stay
    hidden, and a monitor no longer asked for leaves no curve behind."""
    view = TracesView()
    qtbot.addWidget(view)
    view.resize(700, 600)
    view.show()
    first, second = stretched_ethylene(), stretched_ethylene(n_frames=61, dt=1.5)
    view.set_run(first, user_monitors=[(1, 2), (3, 1, 4)])
    before = dict(view.curves)
    drift = view.drift_curve
    view.set_trace_visible("E_kin", False)
    calls = []
    for plot in view.plots:
        for side in ("left", "bottom"):
            axis = plot.getAxis(side)
            real = axis.setLabel
            axis.setLabel = lambda *a, _real=real, **k: (calls.append(1), _real(*a, **k))[1]
    view.set_run(second, user_monitors=[(1, 2), (3, 1, 4)])
    assert not calls, "axis labels set again for a new run"
    assert set(view.curves) == set(before)
    assert all(view.curves[name] is before[name] for name in before), "curves made anew"
    assert view.drift_curve is drift
    for name, item in view.curves.items():
        x, y = item.getData()
        np.testing.assert_array_equal(x, second.times)
        np.testing.assert_allclose(y, view.values[name])
    assert not view.curves["E_kin"].isVisible() and view.curves["E_pot"].isVisible()
    # one added measure dropped: its curve leaves the plot
    view.set_run(second, user_monitors=[(1, 2)])
    assert "C1-C2-H4" not in " ".join(view.curves) or len(view.curves) == len(before) - 1
    items = [i for p in view.plots for i in p.listDataItems()]
    assert len(items) == len(view.curves) + 1   # + the drift curve
    assert all(any(i is c for c in [*view.curves.values(), view.drift_curve]) for i in items)


def test_a_panel_shown_by_a_new_run_is_laid_out_before_the_paint(qtbot):
    """A run with energies after one without shows the drift panel: the plots are laid out again in the redraw, not
    after the first paint (which drew every plot twice, axes and all: 35 + 71 ms at the start of a 10,000-run load)."""
    from basinmark.core.model import Trajectory

    view = TracesView()
    qtbot.addWidget(view)
    view.resize(700, 600)
    view.show()
    with_energies = stretched_ethylene()
    without = Trajectory("no-energies", with_energies.numbers, with_energies.positions, with_energies.times,
                         energies={})
    view.set_run(without, user_monitors=[(1, 2)])
    for _ in range(3):
        QApplication.processEvents()
    assert not view.p_drift.isVisible()
    view.set_run(with_energies, user_monitors=[(1, 2)])
    laid_out = {id(p): p.geometry().getRect() for p in view.plots if p.isVisible()}   # before any event
    assert view.p_drift.isVisible() and view.p_drift.geometry().height() > 0
    for _ in range(3):
        QApplication.processEvents()
    assert {id(p): p.geometry().getRect() for p in view.plots if p.isVisible()} == laid_out
