"""Plot axes are drawn once and shown from a picture until they change.

Replaying an axis's tick labels was most of every repaint of the traces: 22 of 26 ms with nothing changed (cProfile,
eight shown axes, a 2,000-run set), and the window repaints the traces several times as a load ends and on every
change of run.  Each axis is now kept as a device-pixel picture by the scene; these tests check that an unchanged axis
is not drawn again, and that a changed one (range, label, colour, size) is."""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QApplication

from basinmark.gui.plot_theme import theme_axes
from basinmark.gui.traces import TracesView

from gui_fixtures import stretched_ethylene

pytestmark = pytest.mark.gui


def _counting(view):
    """Count AxisItem.paint calls per shown axis of the traces' plots."""
    counts = {}
    for i, plot in enumerate(view.plots):
        for side in ("left", "bottom"):
            axis = plot.getAxis(side)
            if not axis.isVisible():
                continue
            real = axis.paint
            key = (i, side)
            counts[key] = 0

            def paint(*a, _real=real, _key=key, **k):
                counts[_key] += 1
                return _real(*a, **k)

            axis.paint = paint
    return counts


def _repaint(view, times: int = 3):
    """Repaint until the plots' layout has settled (the first repaints after a change may still resize axes)."""
    for _ in range(times):
        QApplication.processEvents()
        view.glw.viewport().repaint()


def _grey(image) -> np.ndarray:
    from PySide6.QtGui import QImage

    g = image.convertToFormat(QImage.Format.Format_Grayscale8)
    return np.array(g.constBits()).reshape(g.height(), g.bytesPerLine())[:, :g.width()].astype(int)


def _unexplained(kept: np.ndarray, fresh: np.ndarray, tolerance: int = 40) -> int:
    """Pixels of ``fresh`` with no pixel of ``kept`` within one pixel of them that is within ``tolerance`` grey
    levels: a line or tick cut off by the picture's edge.  (A kept picture sits on whole device pixels, so text may
    move by part of a pixel and change its antialiasing: that is not counted.)"""
    pad = np.pad(kept, 1, mode="edge")
    best = np.full(kept.shape, 999)
    for dy in range(3):
        for dx in range(3):
            best = np.minimum(best, np.abs(pad[dy:dy + kept.shape[0], dx:dx + kept.shape[1]] - fresh))
    return int((best > tolerance).sum())


def _shown_traces(qtbot) -> TracesView:
    """The traces of a small run, shown and settled."""
    view = TracesView()
    qtbot.addWidget(view)
    view.resize(700, 600)
    view.show()
    view.set_run(stretched_ethylene(), user_monitors=[(1, 2), (3, 1, 4)])
    _repaint(view)
    return view


@pytest.fixture
def traces(qtbot):
    return _shown_traces(qtbot)


def test_an_unchanged_axis_is_not_drawn_again(traces):
    counts = _counting(traces)
    assert counts, "no axis shown"
    _repaint(traces)
    assert sum(counts.values()) == 0, counts


def test_a_changed_axis_is_drawn_again(traces):
    counts = _counting(traces)
    shown = [p for i, p in enumerate(traces.plots) if (i, "left") in counts]
    k = traces.plots.index(shown[0])
    lo, hi = shown[0].getViewBox().viewRange()[1]
    shown[0].setYRange(lo - 10 * (hi - lo), hi + 10 * (hi - lo), padding=0)   # other ticks, other labels
    _repaint(traces)
    assert counts[(k, "left")] >= 1, counts
    for key in counts:
        counts[key] = 0
    shown[0].getAxis("left").setLabel("something else")
    _repaint(traces)
    assert counts[(k, "left")] >= 1, counts
    for key in counts:
        counts[key] = 0
    theme_axes(shown[0], QColor("#ff0000"))   # a palette change (light/dark)
    _repaint(traces)
    assert counts[(k, "left")] >= 1 and counts[(k, "bottom")] + counts.get((k, "left"), 0) >= 1, counts


@pytest.mark.parametrize("edge, cut", [(None, False), (0, True)])
def test_a_kept_axis_has_the_pixels_of_one_drawn_anew(qtbot, monkeypatch, edge, cut):
    """After a change of run (other ranges, other ticks), the kept pictures show what the axes drawn without any
    picture show.  With the picture on the library's own rectangle (edge 0) the axis lines on its edge are cut:
    the comparison sees it."""
    from PySide6.QtWidgets import QGraphicsItem

    from basinmark.gui import kept_axis

    if edge is not None:
        monkeypatch.setattr(kept_axis, "EDGE_PX", edge)
    view = _shown_traces(qtbot)
    view.set_run(stretched_ethylene(n_frames=61, dt=40.0), user_monitors=[(1, 2)])
    _repaint(view)
    kept = _grey(view.glw.grab().toImage())
    for plot in view.plots:
        for side in ("left", "bottom", "right", "top"):
            plot.getAxis(side).setCacheMode(QGraphicsItem.CacheMode.NoCache)
    _repaint(view)
    fresh = _grey(view.glw.grab().toImage())
    assert kept.shape == fresh.shape
    lost = _unexplained(kept, fresh)
    assert (lost > 50) if cut else (lost == 0), lost


def test_every_plot_of_the_window_keeps_its_axes(qtbot, tmp_path):
    """Traces, summary, map and the others: no plot is left with axes drawn anew at every repaint."""
    import pyqtgraph as pg
    from PySide6.QtCore import QSettings

    from basinmark.gui.kept_axis import KeptAxis
    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.summary_view import install_summary_dock

    from gui_fixtures import TOY_RULES, make_toy_set

    root = make_toy_set(tmp_path / "toyset", ["left", "right", "recrossing", "left"])
    (root / "basins.toml").write_text(TOY_RULES)
    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    install_summary_dock(win)
    win.show()
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    plots = [item for view in win.findChildren(pg.GraphicsView) for item in view.scene().items()
             if isinstance(item, pg.PlotItem)]
    assert len(plots) >= 6, len(plots)   # five traces and the map at least
    plain = [(type(p.getViewWidget()).__name__, side) for p in plots for side in ("left", "bottom", "right", "top")
             if p.getAxis(side).isVisible() and not isinstance(p.getAxis(side), KeptAxis)]
    assert not plain, plain
    win.close()
