"""Threshold labels in the traces panel: each carries its value with units, none overlaps another, a time mark's
label or the legend, and each lies whole inside its plot; the drift panel's axis title is not cut.  Checked on
the layout rectangles at the default window size and at 1366×768, on a toy set and the bundled sample set."""

from __future__ import annotations

import itertools
import re
import shutil

import pytest
from PySide6.QtCore import QRect, QRectF, QSettings
from PySide6.QtWidgets import QApplication

from basinmark.gui.app import bundled_sample_set, install_extras
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

SAMPLE = bundled_sample_set()
SIZES = {"default": QRect(0, 0, 1400, 900), "laptop": QRect(0, 0, 1366, 768)}
VALUE = re.compile(r"\d+\.\d{2} Å|\d+\.\d°")


def _settle(qtbot) -> None:
    for _ in range(4):
        QApplication.processEvents()
        qtbot.wait(60)


def _open(qtbot, tmp_path, root) -> MainWindow:
    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    install_extras(win)
    win.show()
    qtbot.waitExposed(win)
    with qtbot.waitSignal(win.set_loaded, timeout=60000):
        win.open_set(root, use_cache=False)
    return win


def _check_layout(win, where: str) -> None:
    t = win.traces
    glw = t.glw
    legend = QRectF(glw.mapFrom(t, t.legend.geometry().topLeft()), t.legend.geometry().size().toSizeF()) \
        if hasattr(glw, "mapFrom") else QRectF()
    for plot in (t.p_dist, t.p_angle):
        if not plot.isVisible():
            continue
        box = plot.getViewBox().sceneBoundingRect()
        labels = [(f"threshold {lab.toPlainText()!r}", lab) for lab in t.threshold_labels(plot)]
        labels += [(f"mark {lab.toPlainText()!r}", lab) for lab in t.mark_labels(plot)]
        rects = []
        lo, hi = plot.getViewBox().viewRange()[1]
        for name, lab in labels:
            if name.startswith("threshold") and not lo <= lab.line.value() <= hi:
                assert not lab.isVisible(), f"{where}: {name} labels a line off the plot"
                continue
            assert lab.isVisible(), (f"{where}: {name} is hidden; line {lab.line.value()} view "
                                     f"{plot.getViewBox().viewRange()} box {box}; others "
                                     f"{[(n, l.sceneBoundingRect()) for n, l in labels if l.isVisible()]}")
            r = lab.sceneBoundingRect()
            assert box.adjusted(-0.5, -0.5, 0.5, 0.5).contains(r), f"{where}: {name} {r} leaves its plot {box}"
            view_r = QRectF(glw.mapFromScene(r).boundingRect())
            assert not view_r.intersects(legend), f"{where}: {name} covers the legend"
            rects.append((name, r))
        assert any(n.startswith("threshold") for n, _r in rects), f"{where}: no threshold is labeled"
        for (a, ra), (b, rb) in itertools.combinations(rects, 2):
            assert not ra.intersects(rb), f"{where}: {a} {ra} overlaps {b} {rb}"
        for name, lab in labels:
            if name.startswith("threshold"):
                assert VALUE.search(lab.toPlainText()), f"{where}: {name} has no value with units"
    # every threshold line has its label
    n_lines = sum(1 for line in t.threshold_lines if line.angle == 0)
    assert n_lines and n_lines == len(t.threshold_labels(t.p_dist)) + len(t.threshold_labels(t.p_angle))
    # the drift panel's axis title lies whole inside its axis
    if t.p_drift.isVisible():
        axis = t.p_drift.getAxis("left")
        title = axis.label.sceneBoundingRect()
        along = axis.parentItem().mapRectToScene(axis.geometry())      # the axis' own length
        seen = glw.mapToScene(glw.viewport().rect()).boundingRect()    # what the panel shows
        assert along.top() - 0.5 <= title.top() and title.bottom() <= along.bottom() + 0.5, \
            f"{where}: the drift axis title {title} is longer than its axis {along}"
        assert seen.adjusted(-0.5, -0.5, 0.5, 0.5).contains(title), f"{where}: the drift axis title is cut"
        assert "kcal/mol" in axis.label.toPlainText() and "x0." not in axis.label.toPlainText()
        assert axis.autoSIPrefixScale == 1.0, "the drift's tick values are scaled"


def _both_sizes(win, qtbot) -> None:
    for name, rect in SIZES.items():
        win.setGeometry(rect)
        _settle(qtbot)
        _check_layout(win, name)
        # zoomed in on the thresholds: the labels are laid out again for the new view
        t = win.traces
        t.p_dist.setYRange(1.5, 3.0, padding=0)
        _settle(qtbot)
        _check_layout(win, name + " zoomed")
        t.p_dist.enableAutoRange()
        _settle(qtbot)


def test_threshold_labels_never_overlap_on_a_toy_set(qtbot, tmp_path):
    win = _open(qtbot, tmp_path, make_toy_set(tmp_path / "toyset", ["left", "right", "recrossing", "unfinished"]))
    for run in ("toy-001", "toy-003"):
        win.state.set_run(run)
        _both_sizes(win, qtbot)
    win.close()


@pytest.mark.skipif(not SAMPLE.is_dir(), reason="the bundled sample set is not in this checkout")
def test_threshold_labels_never_overlap_on_the_sample_set(qtbot, tmp_path):
    work = tmp_path / "ringfork"
    shutil.copytree(SAMPLE, work, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.*"))
    win = _open(qtbot, tmp_path, work)
    for run in win.state.run_ids[:2]:
        win.state.set_run(run)
        _both_sizes(win, qtbot)
    win.close()
