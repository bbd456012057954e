"""The traces' axes keep the units they name: a run of several picoseconds is drawn on a time axis in fs (the
plotting library's automatic SI prefixes made it "time (kfs)" with ticks in thousands of femtoseconds, a unit no
chemist writes), and distances and angles stay in Å and degrees whatever their range."""

from __future__ import annotations

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
