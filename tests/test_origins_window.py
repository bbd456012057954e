"""The Origins tab end to end: a set made by `make-demo --phase-decides` opened in the window, its mode file
loaded through the button, the deciding mode ranked first on screen, the map with its boundary, a click that
opens a run; a long analysis that shows its progress and stops on Cancel while the window keeps working; and
the honesty warnings on screen."""

from __future__ import annotations

import time

import numpy as np
import pytest
from origins_sets import make_phase_demo, origins_window, write_doubtful_set
from PySide6.QtCore import QPoint, QPointF, Qt, QTimer

import basinmark.gui.origins_view as view
from basinmark.core.origins import Settings, work_total

pytestmark = pytest.mark.gui

#: nested cross-validation as in production, fewer folds' repeats and shuffles: 19 permutations are the fewest
#: that can give p = 0.05
FEW = Settings(n_repeats=1, n_permutations=19, importance_repeats=2)


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return make_phase_demo(tmp_path_factory.mktemp("phase-window"))


def _window(qtbot, tmp_path, root, settings):
    return origins_window(qtbot, tmp_path, root, settings)


def _show(qtbot, dock, panel):
    with qtbot.waitSignal(panel.updated, timeout=120000):
        dock.show()
        dock.raise_()
    panel.wait(120)


def _loneliest(canvas, runs):
    """The run whose point on the map lies farthest from every other (a click there hits it alone)."""
    pts = np.array([canvas.point_of(r) for r in runs])
    span = np.ptp(pts, axis=0)
    span[span == 0] = 1.0
    d = np.linalg.norm((pts[:, None, :] - pts[None, :, :]) / span, axis=-1)
    np.fill_diagonal(d, np.inf)
    return runs[int(np.argmax(d.min(axis=1)))]


def _click(qtbot, canvas, run):
    qtbot.wait(200)  # let the tab's layout settle (new text beside the map resizes it) before mapping the point
    x, y = canvas.point_of(run)
    pos = canvas.mapFromScene(canvas.plot_item.vb.mapViewToScene(QPointF(x, y)))
    qtbot.mouseMove(canvas.viewport(), pos)
    qtbot.mouseClick(canvas.viewport(), Qt.MouseButton.LeftButton, pos=QPoint(pos.x(), pos.y()))


def test_the_mode_file_button_finds_the_deciding_mode_and_a_click_opens_its_run(demo, qtbot, tmp_path,
                                                                               monkeypatch):
    chosen = []

    def choose(parent):  # the file dialog is modal: it would block offscreen
        chosen.append(parent)
        return str(demo.root / "ts-modes.toml")

    monkeypatch.setattr(view, "choose_mode_file", choose)
    w, dock = _window(qtbot, tmp_path, demo.root, FEW)
    panel = w.origins_panel
    panel.modes_button.click()  # while the tab is hidden: the analysis waits until it is shown
    assert chosen == [panel] and panel.modes_label.text() == "ts-modes.toml"
    _show(qtbot, dock, panel)
    a = panel.analysis
    assert a is not None and a.classified
    deciding = f"mode {demo.mode}"
    top = a.importance["feature"].iloc[0]
    assert a.importance["group"].iloc[0] == deciding and a.accuracy > 0.95
    assert panel.table.item(0, 1).text() == top and f"{deciding} " in top
    assert panel.sentence.text() == a.sentence and f"{deciding} (" in a.sentence
    assert "inner 3-fold cross-validation" in panel.method_label.text()
    assert not panel.warning_label.text()  # velocities read, one transition state, enough runs
    canvas = panel.canvas
    assert canvas.axes[0] == top == panel.x_combo.currentData()
    assert canvas.region_item is not None and canvas.line_item is not None  # the classifier's regions and boundary
    lx, _ly = canvas.line_item.getData()
    assert np.isfinite(lx).sum() > 10
    assert np.isfinite(canvas.boundary_accuracy)
    target = _loneliest(canvas, [r for r in a.run_ids if r != w.state.run_id])
    _click(qtbot, canvas, target)
    assert w.state.run_id == target
    w.close()


def test_a_long_analysis_shows_progress_and_cancel_stops_it_leaving_the_previous_result(demo, qtbot, tmp_path):
    w, dock = _window(qtbot, tmp_path, demo.root, Settings(n_repeats=1, n_permutations=19, importance_repeats=1,
                                                            C=1.0))
    panel = w.origins_panel
    _show(qtbot, dock, panel)  # a quick first result (fixed C, monitors only)
    before = panel.analysis
    assert before is not None and before.classified and not panel.busy
    sentence = panel.sentence.text()
    assert not panel.progress_bar.isVisible() and not panel.cancel_button.isVisible()

    long = Settings(n_repeats=1, n_permutations=5000, importance_repeats=2)  # minutes of work: never ends here
    panel.settings = long
    ticks: list[float] = []
    timer = QTimer(panel)
    timer.setInterval(20)
    timer.timeout.connect(lambda: ticks.append(time.perf_counter()))
    timer.start()
    started = time.perf_counter()
    panel.again_button.click()
    assert panel.busy and panel.progress_bar.isVisible() and panel.cancel_button.isEnabled()
    # the bar counts the fits of the whole analysis, and reaches the permutation test
    qtbot.waitUntil(lambda: panel.progress_bar.maximum() == work_total(long)
                    and panel.progress_bar.value() > long.n_splits + 3, timeout=120000)
    assert "permutation test" in panel.progress_label.text().lower()
    assert panel.progress_bar.text().endswith(f"of {work_total(long)} fits")
    assert panel.sentence.text() == sentence  # the previous result stays on screen meanwhile
    running = time.perf_counter() - started
    # the GUI thread kept turning: its 20 ms timer fired at least a quarter as often as asked, never stalling 2 s
    seen = [t for t in ticks if t >= started]
    assert len(seen) >= 0.25 * running / 0.020, (len(seen), running)
    assert max(np.diff([started] + seen)) < 2.0
    asked = time.perf_counter()
    with qtbot.waitSignal(panel.updated, timeout=30000):
        panel.cancel_button.click()
    stopped = time.perf_counter() - asked
    timer.stop()
    assert stopped < 5.0, stopped  # within a fit or two (~0.1 s each), with room for a busy machine
    assert not panel.busy and not panel.cancel_button.isVisible()
    assert panel.status == "cancelled"
    assert panel.analysis is before and panel.sentence.text() == sentence
    assert panel.progress_label.isVisible() and "cancelled" in panel.progress_label.text()
    assert "previous" in panel.progress_label.text()
    w.close()


def test_a_cancel_with_no_previous_result_says_so(demo, qtbot, tmp_path):
    w, dock = _window(qtbot, tmp_path, demo.root, Settings(n_repeats=1, n_permutations=5000))
    panel = w.origins_panel
    dock.show()
    dock.raise_()
    qtbot.waitUntil(lambda: panel.busy and panel.progress_bar.value() > 2, timeout=120000)
    with qtbot.waitSignal(panel.updated, timeout=30000):
        panel.cancel_button.click()
    assert panel.analysis is None and panel.canvas.analysis is None
    assert panel.sentence.text().startswith("The analysis was cancelled before it ended")
    # a later change does not start it again behind the person's back; Analyse Again does
    w.state.labels_changed.emit()
    assert not panel.busy
    panel.again_button.click()
    assert panel.busy
    # closing the window stops it too (a worker left running would hold the process open at exit)
    w.close()
    qtbot.waitUntil(lambda: not panel.busy, timeout=30000)
    assert panel.status == "cancelled"


def test_every_honesty_warning_is_shown(qtbot, tmp_path):
    root = tmp_path / "doubtful"
    write_doubtful_set(root)
    w, dock = _window(qtbot, tmp_path, root, Settings(n_repeats=1, n_permutations=19, importance_repeats=1, C=1.0))
    panel = w.origins_panel
    _show(qtbot, dock, panel)
    shown = panel.warning_label.text()
    assert panel.warning_label.isVisible()
    assert "Too few runs for the classifier to mean much: the rarest outcome has" in shown
    assert "Starting velocities were estimated, not read: 18 of 18 runs" in shown
    assert "not all started at one transition state" in shown and "run-002" in shown
    w.close()
