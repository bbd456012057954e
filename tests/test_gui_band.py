"""The interval band under a convergence or sweep curve: one polygon built from the arrays.

pyqtgraph's FillBetweenItem rebuilds the area from the two curves' painter paths in Python: 11-13 ms for a
2,000-point band, a fifth of the turn that draws the summary's plots at 10,000 runs."""

from __future__ import annotations

import numpy as np
import pyqtgraph as pg
import pytest
from PySide6.QtCore import QPointF, Qt
from test_linear_labels import count_calls

from basinmark.gui.band import band_item

pytestmark = pytest.mark.gui


def test_the_band_covers_exactly_the_area_between_the_curves(qapp):
    x = np.linspace(0.0, 100.0, 501)
    lo = 1.0 + 0.5 * np.sin(x / 9.0)
    hi = lo + 0.2 + 0.1 * np.cos(x / 5.0)
    item = band_item(x, lo, hi, pg.mkBrush(200, 0, 0, 60))
    path = item.path()
    for i in range(3, 500, 37):
        mid = (lo[i] + hi[i]) / 2
        assert path.contains(QPointF(x[i], mid))
        assert not path.contains(QPointF(x[i], hi[i] + 0.05))
        assert not path.contains(QPointF(x[i], lo[i] - 0.05))
    assert item.brush().color().alpha() == 60 and item.pen().style() == Qt.PenStyle.NoPen   # filled, no outline
    # its bounds are the curves' own
    r = path.boundingRect()
    assert r.left() == pytest.approx(0.0) and r.right() == pytest.approx(100.0)
    assert r.top() == pytest.approx(lo.min()) and r.bottom() == pytest.approx(hi.max())


def test_building_a_band_makes_no_python_call_per_point(qapp):
    def calls(n: int) -> int:
        x = np.arange(n, dtype=float)
        return count_calls(lambda: band_item(x, np.sin(x), np.sin(x) + 1, pg.mkBrush("r")))

    assert calls(20_000) - calls(200) < 200   # (pyqtgraph converts long arrays in a few chunks)
