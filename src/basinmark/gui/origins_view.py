"""The starting-condition map: why a run goes where it goes, as an analysis tab of the window.

:class:`OriginsCanvas` draws the runs as points on two starting coordinates (by default the two most informative
ones), coloured by outcome, over the regions and boundary of a classifier refitted on those two coordinates
alone; clicking a point asks for that run.  The CLI (``basinmark origins``) renders the same canvas to PNG/SVG.

:class:`OriginsPanel` adds the plain-language result, its warnings, the table of coordinates ranked by
importance (with each outcome's mean ± sd) and a chooser of the transition state's mode file.  The analysis
(reading the t = 0 frames, nested cross-validation and permutations: seconds to minutes) runs on a worker
thread; the window stays usable meanwhile, a bar shows the fits done of the total, and Cancel stops it within
one fit, leaving the previous result on screen.  The result is taken on the GUI thread.
"""

from __future__ import annotations

import concurrent.futures as cf
import threading
from pathlib import Path
from typing import Callable, Sequence

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtGui import QColor, QPalette
from PySide6.QtWidgets import (QCheckBox, QComboBox, QDockWidget, QHBoxLayout, QLabel, QMainWindow, QProgressBar,
                               QPushButton, QTableWidget, QTableWidgetItem, QVBoxLayout, QWidget)

from basinmark.gui.colours import outcome_colour
from basinmark.gui.kept_axis import kept_axes
from basinmark.gui.label_table import final_label_map
from basinmark.gui.plot_theme import theme_axes, theme_legend

#: grid of the classifier's regions (cells per side; enough for a smooth-looking boundary at figure sizes)
GRID = 160


def boundary_grid(model, x: np.ndarray, y: np.ndarray, classes: Sequence[str], n: int = GRID, pad: float = 0.06):
    """The classifier's class probabilities over a grid spanning the points: ``(xs, ys, proba (n, n, classes))``,
    classes in the order of ``classes``."""
    def span(v):
        lo, hi = float(np.min(v)), float(np.max(v))
        w = (hi - lo) or 1.0
        return np.linspace(lo - pad * w, hi + pad * w, n)

    xs, ys = span(x), span(y)
    gx, gy = np.meshgrid(xs, ys, indexing="ij")
    proba = model.predict_proba(np.column_stack([gx.ravel(), gy.ravel()]))
    order = [list(model.classes_).index(c) for c in classes]
    return xs, ys, proba[:, order].reshape(n, n, len(classes))


def boundary_lines(xs: np.ndarray, ys: np.ndarray, proba: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Where the most probable class changes, as NaN-separated polylines in data coordinates.

    For each class, the zero line of (its probability − the largest other one), traced by pyqtgraph's
    marching squares with linear interpolation between grid points (smooth, not a staircase of cells)."""
    k = proba.shape[-1]
    dx, dy = xs[1] - xs[0], ys[1] - ys[0]
    out_x: list[float] = []
    out_y: list[float] = []
    for c in range(1 if k == 2 else k):  # two classes share one line
        others = np.delete(proba, c, axis=-1).max(axis=-1)
        margin = proba[..., c] - others
        for line in pg.functions.isocurve(margin, 0.0, connected=True):
            pts = np.asarray(line, dtype=float)
            # isocurve puts sample i at coordinate i + 0.5
            out_x += list(xs[0] + (pts[:, 0] - 0.5) * dx) + [np.nan]
            out_y += list(ys[0] + (pts[:, 1] - 0.5) * dy) + [np.nan]
    return np.array(out_x, float), np.array(out_y, float)


class OriginsCanvas(pg.PlotWidget):
    """Runs as points on two starting coordinates, coloured by outcome, with the classifier's regions."""

    run_picked = Signal(str)

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent, axisItems=kept_axes())
        self.setObjectName("originsCanvas")
        self.plot_item = self.getPlotItem()
        self.plot_item.setMenuEnabled(False)
        self.plot_item.showGrid(x=False, y=False)
        self.legend = self.plot_item.addLegend(offset=(-10, 10), labelTextSize="9pt")
        self.analysis = None
        self.products: list[str] = []
        self.axes: tuple[str, str] = ("", "")
        self.boundary_accuracy = float("nan")
        self.scatters: dict[str, pg.ScatterPlotItem] = {}
        self.region_item: pg.ImageItem | None = None
        self.line_item: pg.PlotCurveItem | None = None
        self.current = pg.ScatterPlotItem(size=16, symbol="o", brush=pg.mkBrush(0, 0, 0, 0))
        self.current.setZValue(30)
        self.plot_item.addItem(self.current, ignoreBounds=True)
        self.current_run = ""
        #: the caption as the plot's title (figures); the window shows it in a wrapping label instead, since a
        #: long title sets the plot's smallest width
        self.title_in_plot = True
        self.apply_palette()

    def apply_palette(self) -> None:
        pal = self.palette()
        base, text = pal.color(QPalette.ColorRole.Base), pal.color(QPalette.ColorRole.Text)
        self.setBackground(base)
        theme_axes(self.plot_item, text)
        theme_legend(self.legend, base, text, 215)
        self.current.setPen(pg.mkPen(text, width=2))
        if self.line_item is not None:
            self.line_item.setPen(pg.mkPen(text, width=1.5, style=Qt.PenStyle.DashLine))

    def changeEvent(self, event) -> None:  # noqa: N802
        if event.type() == event.Type.PaletteChange and hasattr(self, "legend"):
            self.apply_palette()
        super().changeEvent(event)

    def colour(self, label: str) -> QColor:
        return outcome_colour(label, self.products)

    def clear_plot(self) -> None:
        for item in list(self.scatters.values()) + [self.region_item, self.line_item]:
            if item is not None:
                self.plot_item.removeItem(item)
        self.scatters, self.region_item, self.line_item = {}, None, None
        self.legend.clear()
        self.current.setData([], [])

    def set_analysis(self, analysis, products: Sequence[str] = (), x: str | None = None, y: str | None = None,
                     title: str | None = None) -> None:
        """Draw ``analysis`` (a :class:`basinmark.core.origins.Analysis`) on features ``x`` and ``y``
        (default: its two most informative)."""
        self.clear_plot()
        self.analysis = analysis
        self.products = list(products) or list(getattr(analysis, "classes", []))
        if analysis is None or len(analysis.features) < 1 or not len(analysis.y):
            self.plot_item.setTitle(title or "")
            return
        top = analysis.top_two()
        x = x or top[0]
        y = y or (top[1] if len(top) > 1 else top[0])
        self.axes = (x, y)
        xv, yv = analysis.column(x), analysis.column(y)
        self.plot_item.setLabel("bottom", analysis.feature(x).name)
        self.plot_item.setLabel("left", analysis.feature(y).name)
        self._draw_regions(xv, yv)
        for z, label in enumerate(analysis.classes):
            sel = analysis.y == label
            colour = self.colour(label)
            edge = QColor(colour).darker(150)
            item = pg.ScatterPlotItem(xv[sel], yv[sel], size=8, symbol="o", pen=pg.mkPen(edge, width=1),
                                      brush=pg.mkBrush(colour), data=np.array(analysis.run_ids, dtype=object)[sel],
                                      name=f"{label} ({int(sel.sum())})")
            item.setZValue(10 + z)
            item.sigClicked.connect(self._clicked)
            self.plot_item.addItem(item)
            self.scatters[label] = item
        if title is None:
            title = self.caption() if self.title_in_plot else ""
        self.plot_item.setTitle(title or None)
        self.set_current(self.current_run)
        self.plot_item.enableAutoRange()
        self.plot_item.autoRange()

    def caption(self) -> str:
        if self.line_item is None:
            return "Starting conditions by outcome"
        a = self.analysis
        return (f"Starting conditions by outcome; shaded: a classifier on these two coordinates alone "
                f"(cross-validated accuracy {self.boundary_accuracy:.2f}; always {a.majority}: {a.baseline:.2f})")

    def _draw_regions(self, xv: np.ndarray, yv: np.ndarray) -> None:
        a = self.analysis
        if not a.classified or len(a.classes) < 2 or self.axes[0] == self.axes[1]:
            return
        model, self.boundary_accuracy = a.boundary(self.axes)  # the default pair was fitted by the worker
        xs, ys, proba = boundary_grid(model, xv, yv, a.classes)
        index = np.argmax(proba, axis=-1)
        rgba = np.zeros(index.shape + (4,), np.ubyte)
        for k, label in enumerate(a.classes):
            c = self.colour(label)
            rgba[index == k] = (c.red(), c.green(), c.blue(), 46)
        img = pg.ImageItem(rgba)
        dx, dy = xs[1] - xs[0], ys[1] - ys[0]
        img.setRect(pg.QtCore.QRectF(xs[0] - dx / 2, ys[0] - dy / 2, dx * len(xs), dy * len(ys)))
        img.setZValue(-10)
        self.plot_item.addItem(img, ignoreBounds=True)
        self.region_item = img
        lx, ly = boundary_lines(xs, ys, proba)
        text = self.palette().color(QPalette.ColorRole.Text)
        self.line_item = pg.PlotCurveItem(lx, ly, connect="finite",
                                          pen=pg.mkPen(text, width=1.5, style=Qt.PenStyle.DashLine))
        self.line_item.setZValue(-5)
        self.plot_item.addItem(self.line_item, ignoreBounds=True)

    def _clicked(self, _item, points, *_args) -> None:
        if len(points):
            self.run_picked.emit(str(points[0].data()))

    def point_of(self, run_id: str) -> tuple[float, float] | None:
        a = self.analysis
        if a is None or run_id not in a.run_ids:
            return None
        k = a.run_ids.index(run_id)
        return float(a.column(self.axes[0])[k]), float(a.column(self.axes[1])[k])

    def set_current(self, run_id: str) -> None:
        self.current_run = run_id
        p = self.point_of(run_id) if run_id else None
        self.current.setData([p[0]] if p else [], [p[1]] if p else [])


def choose_mode_file(parent: QWidget) -> str:
    """Ask for a mode file (tests replace this: a modal dialog blocks offscreen)."""
    from PySide6.QtWidgets import QFileDialog

    path, _ = QFileDialog.getOpenFileName(parent, "Normal Modes of the Transition State", "",
                                          "Mode files (*.json *.txt *.hess *.toml);;All files (*)")
    return path


def load_modes(path: str):
    """The normal modes in ``path`` (core/modes.py reads them)."""
    from basinmark.core.modes import read_modes

    return read_modes(path)


def run_analysis(tset, rules, labels: dict, modes_path: str | None, include, settings,
                 progress: Callable[[int, int, str], None] | None = None,
                 cancelled: Callable[[], bool] | None = None):
    """Everything the panel shows, computed off the GUI thread: (analysis, starting conditions).

    ``progress(done, total, stage)`` hears of every run read and every fit; when ``cancelled()`` turns true the
    work stops with :class:`basinmark.core.origins.AnalysisCancelled`."""
    from basinmark.gui.give_way import imports_give_way

    # what it imports (SciPy for a mode file: ~0.2 s of module bodies) waits while the person acts too
    with imports_give_way():
        return _analyse(tset, rules, labels, modes_path, include, settings, progress, cancelled)


def _analyse(tset, rules, labels, modes_path, include, settings, progress, cancelled):
    from basinmark.core import origins_process
    from basinmark.core.origins import AnalysisCancelled
    from basinmark.core.origins_start import starting_conditions
    from basinmark.gui.give_way import give_way

    def stop() -> bool:   # asked after every run read: a person acting in the window goes first
        give_way()
        return cancelled is not None and cancelled()

    def reading(done: int, total: int) -> None:
        if progress is not None:
            progress(done, total, "reading the starting conditions")
        if stop():
            raise AnalysisCancelled()

    start = starting_conditions(tset, rules.monitor_indices() if rules is not None else {}, progress=reading)
    if modes_path:
        start = start.with_modes(load_modes(modes_path))
    if progress is not None:   # (the process's first analysis loads scikit-learn before its first fit: ~1-2 s)
        from basinmark.core.origins import Settings, work_total

        progress(0, work_total(settings or Settings()), "starting the fits")
    # the fits in a process of their own: on this thread they held Python's lock from the window (origins_process);
    # they need not give way, so the process is asked only whether to stop
    return origins_process.shared_process().analyse(start, labels, settings, include=include, progress=progress,
                                                    cancelled=cancelled), start


class OriginsPanel(QWidget):
    """The analysis tab: sentence, warnings, the map, the ranked coordinates."""

    updated = Signal()

    def __init__(self, state, parent: QWidget | None = None, compute: Callable = run_analysis) -> None:
        super().__init__(parent)
        self.setObjectName("originsPanel")
        self.state = state
        self.compute = compute
        self.settings = None  # None: production counts (core/origins.Settings)
        self.modes_path = ""
        self.analysis = None
        self.start = None
        self.error = ""
        self.stale = True
        #: "" or what the last run ended as when it gave no result ("cancelled")
        self.status = ""
        self._future: cf.Future | None = None
        self._cancel = threading.Event()  # this run's; a new one for every run
        self._closing = threading.Event()  # the panel's: set when its window closes or it is destroyed
        #: (done, total, stage) written by the worker, read by the poll on the GUI thread
        self._progress: tuple[int, int, str] = (0, 0, "")
        self._pool = cf.ThreadPoolExecutor(max_workers=1, thread_name_prefix="origins")
        self._poll = QTimer(self)
        self._poll.setInterval(50)
        self._poll.timeout.connect(self._take_result)
        pool, closing = self._pool, self._closing  # not self: the panel is gone when this runs
        # a worker left running would keep the process alive at exit (concurrent.futures joins its threads)
        self.destroyed.connect(lambda *_a: (closing.set(), pool.shutdown(wait=False, cancel_futures=True)))
        self._build()
        state.labels_changed.connect(self.mark_stale)
        state.rules_changed.connect(self.mark_stale)
        state.set_changed.connect(self.mark_stale)
        state.run_changed.connect(self.canvas.set_current)

    def _build(self) -> None:
        lay = QVBoxLayout(self)
        self.sentence = QLabel("", self)
        self.sentence.setObjectName("originsSentence")
        self.sentence.setWordWrap(True)
        self.sentence.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        f = self.sentence.font()
        f.setPointSizeF(f.pointSizeF() * 1.1)
        self.sentence.setFont(f)
        lay.addWidget(self.sentence)
        self.warning_label = QLabel("", self)
        self.warning_label.setObjectName("originsWarnings")
        self.warning_label.setWordWrap(True)
        self.warning_label.setStyleSheet("color: #b35900;")
        lay.addWidget(self.warning_label)
        row = QHBoxLayout()
        self.modes_button = QPushButton("Normal Modes…", self)
        self.modes_button.setToolTip("Read the transition state's normal modes, to add each run's displacement, "
                                     "velocity, energy and phase along every mode")
        self.modes_button.clicked.connect(self.ask_modes)
        self.modes_label = QLabel("no mode file", self)
        self.recross_box = QCheckBox("Recrossing as an Outcome", self)
        self.recross_box.toggled.connect(lambda _on: self.mark_stale())
        self.x_combo, self.y_combo = QComboBox(self), QComboBox(self)
        for combo in (self.x_combo, self.y_combo):
            # narrow: the dock shares the window with the run table and the molecule, and a wide row of controls
            # would make the whole view scroll sideways (and the sentence wrap beyond the visible edge)
            combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
            combo.setMinimumContentsLength(10)
            combo.currentIndexChanged.connect(lambda _i: self._redraw())
        self.again_button = QPushButton("Analyse Again", self)
        self.again_button.clicked.connect(lambda: self.refresh(force=True))
        for w in (self.modes_button, self.modes_label):
            row.addWidget(w)
        row.addStretch(1)
        row.addWidget(self.again_button)
        lay.addLayout(row)
        lay.addWidget(self.recross_box)
        axes = QHBoxLayout()
        axes.addWidget(QLabel("x:", self))
        axes.addWidget(self.x_combo, 1)
        axes.addWidget(QLabel("y:", self))
        axes.addWidget(self.y_combo, 1)
        lay.addLayout(axes)
        busy = QHBoxLayout()
        self.progress_bar = QProgressBar(self)
        self.progress_bar.setObjectName("originsProgress")
        self.progress_bar.setTextVisible(True)
        self.progress_label = QLabel("", self)
        self.progress_label.setObjectName("originsProgressText")
        self.progress_label.setWordWrap(True)
        self.cancel_button = QPushButton("Cancel", self)
        self.cancel_button.setObjectName("originsCancel")
        self.cancel_button.setToolTip("Stop the analysis; the previous result stays on screen")
        self.cancel_button.clicked.connect(self.cancel)
        busy.addWidget(self.progress_bar, 1)
        busy.addWidget(self.cancel_button)
        lay.addLayout(busy)
        lay.addWidget(self.progress_label)
        self._show_busy(False)
        self.canvas = OriginsCanvas(self)
        self.canvas.title_in_plot = False
        self.canvas.setMinimumHeight(260)
        self.canvas.run_picked.connect(self.open_run)
        lay.addWidget(self.canvas, 3)
        self.caption = QLabel("", self)
        self.caption.setObjectName("originsCaption")
        self.caption.setWordWrap(True)
        lay.addWidget(self.caption)
        self.table = QTableWidget(0, 3, self)
        self.table.setObjectName("originsTable")
        self.table.verticalHeader().hide()
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        lay.addWidget(self.table, 2)
        self.method_label = QLabel("", self)
        self.method_label.setObjectName("originsMethod")
        self.method_label.setWordWrap(True)
        self.method_label.setEnabled(False)  # the palette's quieter text: how, not what
        lay.addWidget(self.method_label)

    # --- computing ----------------------------------------------------------------------------
    def mark_stale(self, *_args) -> None:
        self.stale = True
        if self.isVisible() and self.status != "cancelled":  # after a Cancel, only Analyse Again starts anew
            self.refresh()

    def showEvent(self, event) -> None:  # noqa: N802
        super().showEvent(event)
        if self.stale and self.status != "cancelled":
            self.refresh()

    def window_closing(self) -> None:
        """The window closed: stop the running analysis (nothing would show its result)."""
        self._closing.set()
        self._cancel.set()

    def eventFilter(self, watched, event) -> bool:  # noqa: N802
        if event.type() == event.Type.Close and watched is self.window():
            # after the window's own handler has run: it may refuse to close (unsaved rules)
            QTimer.singleShot(0, self, lambda: None if self.window().isVisible() else self.window_closing())
        return False

    def labels(self) -> dict[str, str]:
        return final_label_map(self.state.labels)

    @property
    def busy(self) -> bool:
        return self._future is not None

    def refresh(self, force: bool = False) -> None:
        """Analyse again on the worker thread (deferred while hidden unless ``force``)."""
        if not (force or self.isVisible()):
            self.stale = True
            return
        st = self.state
        if self._future is not None:  # a newer request replaces the running one when it ends
            self.stale = True
            return
        self.stale = False
        if st.tset is None or not len(st.tset):
            self._show_text("Open a set to see what decides the outcome of its runs.")
            return
        labels = self.labels()
        if not labels:
            self._show_text("No run has a label yet: classify the runs (rules) or label them to compare outcomes.")
            return
        include = ("recrossing",) if self.recross_box.isChecked() else None
        if self.analysis is None:
            self.sentence.setText("Analysing the starting conditions…")
        self.status = ""
        self._cancel = threading.Event()
        self._progress = (0, 0, "starting")
        cancel, closing = self._cancel, self._closing

        def cancelled() -> bool:  # on the worker thread
            return cancel.is_set() or closing.is_set()

        def progress(done: int, total: int, stage: str) -> None:  # on the worker thread: only store
            self._progress = (int(done), int(total), str(stage))

        self._future = self._pool.submit(self.compute, st.tset, st.rules, labels, self.modes_path or None, include,
                                         self.settings, progress, cancelled)
        self._show_busy(True)
        self._poll.start()

    def cancel(self) -> None:
        """Stop the running analysis (it ends within one fit); the previous result stays."""
        if self._future is None:
            return
        self._cancel.set()
        self.cancel_button.setEnabled(False)
        self.progress_label.setText("Cancelling…")

    def _show_busy(self, busy: bool) -> None:
        for w in (self.progress_bar, self.cancel_button, self.progress_label):
            w.setVisible(busy)
        self.cancel_button.setEnabled(busy)
        if busy:
            self.progress_bar.setRange(0, 0)  # busy until the first count arrives
            self.progress_label.setText("Analysing the starting conditions…")

    def _show_progress(self) -> None:
        done, total, stage = self._progress
        if total <= 0 or self._cancel.is_set():
            return
        self.progress_bar.setRange(0, total)
        self.progress_bar.setValue(min(done, total))
        what = "runs read" if stage.startswith("reading") else "fits"
        self.progress_bar.setFormat(f"%v of %m {what}")
        self.progress_label.setText(stage[:1].upper() + stage[1:] + "…")

    def _take_result(self) -> None:
        fut = self._future
        if fut is None:
            return
        if not fut.done():
            self._show_progress()
            return
        from basinmark.core.errors import BasinmarkError
        from basinmark.core.origins import AnalysisCancelled

        self._poll.stop()
        self._future = None
        self._show_busy(False)
        self.error = ""
        try:
            self.analysis, self.start = fut.result()
        except AnalysisCancelled:
            # the previous result (if any) stays; the next change or Analyse Again starts afresh
            self.status = "cancelled"
            self.stale = True
            self._show()
            self.updated.emit()
            return
        except Exception as exc:  # a BasinmarkError is a sentence for people; anything else is said too
            self.analysis, self.start = None, None
            self.error = str(exc) if isinstance(exc, BasinmarkError) else f"{type(exc).__name__}: {exc}"
        if self.stale and self.isVisible():  # something changed while it ran
            self.refresh()
        self._show()
        self.updated.emit()

    def wait(self, timeout: float = 60.0) -> None:
        """Block until the running analysis ends and take its result (scripts and tests)."""
        if self._future is not None:
            cf.wait([self._future], timeout=timeout)
            self._take_result()

    # --- showing ------------------------------------------------------------------------------
    def _show_text(self, text: str) -> None:
        self.analysis = None
        self.sentence.setText(text)
        self.warning_label.setText("")
        self.method_label.setText("")
        self.canvas.set_analysis(None)
        self.caption.setText("")
        self.table.setRowCount(0)
        self.updated.emit()

    def products(self) -> list[str]:
        rules = self.state.rules
        return list(rules.products) if rules is not None else []

    def _show(self) -> None:
        a = self.analysis
        cancelled = self.status == "cancelled"
        if a is None:
            if cancelled:
                text = "The analysis was cancelled before it ended; Analyse Again starts it anew."
            else:
                text = f"The analysis failed: {self.error}" if self.error else ""
            self.sentence.setText(text)
            self.warning_label.setText("")
            self.canvas.set_analysis(None)
            self.table.setRowCount(0)
            self.method_label.setText("")
            return
        if cancelled:
            # said above the previous result, which stays as it was
            self.progress_label.setText("The analysis was cancelled before it ended; the result below is the "
                                        "previous one. Analyse Again starts it anew.")
            self.progress_label.setVisible(True)
            return
        self.sentence.setText(a.sentence)
        self.method_label.setText(a.regularisation() if a.classified else "")
        self.warning_label.setText("\n".join(f"⚠ {w}" for w in a.warnings))
        self.warning_label.setVisible(bool(a.warnings))
        names = [f.name for f in a.features]
        top = a.top_two()
        for combo, pick in ((self.x_combo, top[0] if top else ""), (self.y_combo, top[1] if len(top) > 1 else "")):
            combo.blockSignals(True)
            combo.clear()
            for n in names:
                combo.addItem(n, n)
            if pick in names:
                combo.setCurrentIndex(names.index(pick))
            combo.blockSignals(False)
        self._fill_table()
        self._redraw()

    def _redraw(self) -> None:
        a = self.analysis
        if a is None:
            return
        self.canvas.current_run = self.state.run_id
        self.canvas.set_analysis(a, self.products(), self.x_combo.currentData(), self.y_combo.currentData())
        self.caption.setText(self.canvas.caption() + ". Click a point to open its run.")

    def _fill_table(self) -> None:
        a = self.analysis
        classes = list(a.classes)
        heads = ["rank", "coordinate", "importance ± sd"] + [f"{c}: mean ± sd" for c in classes]
        self.table.setColumnCount(len(heads))
        self.table.setHorizontalHeaderLabels(heads)
        rows = a.importance if len(a.importance) else None
        feats = list(rows["feature"]) if rows is not None else [f.name for f in a.features]
        self.table.setRowCount(len(feats))
        for i, name in enumerate(feats):
            k = [f.name for f in a.features].index(name)
            cells = [str(i + 1) if rows is not None else "", name]
            if rows is not None:
                r = rows.iloc[i]
                cells.append(f"{r['mean']:.3f} ± {r['sd']:.3f}")
            else:
                cells.append("")
            for c in classes:
                v = a.X[a.y == c, k]
                cells.append(f"{np.mean(v):.4g} ± {np.std(v, ddof=1):.2g}" if v.size > 1 else "")
            for j, text in enumerate(cells):
                item = QTableWidgetItem(text)
                if j == 1:
                    item.setToolTip(a.features[k].phrase)
                self.table.setItem(i, j, item)
        self.table.resizeColumnsToContents()

    # --- actions ------------------------------------------------------------------------------
    def open_run(self, run_id: str) -> None:
        if self.state.tset is not None and run_id in self.state.tset:
            self.state.set_run(run_id)

    def ask_modes(self) -> None:
        path = choose_mode_file(self)
        if path:
            self.set_modes(path)

    def set_modes(self, path: str | None) -> None:
        self.modes_path = str(path or "")
        self.status = ""  # a new mode file is a new request, after a Cancel too
        self.modes_label.setText(Path(path).name if path else "no mode file")
        self.mark_stale()

    def closeEvent(self, event) -> None:  # noqa: N802
        self.window_closing()
        self._poll.stop()
        self._pool.shutdown(wait=False, cancel_futures=True)
        super().closeEvent(event)

    def figure_widget(self) -> QWidget:
        return self.canvas


def install_origins_dock(window: QMainWindow) -> QDockWidget:
    """Add the origins view as a tab of the analysis area, with its toggle in the View menu."""
    from basinmark.gui.analysis_area import add_analysis_dock
    from basinmark.gui.map_view import _menu

    panel = OriginsPanel(window.state, window)
    window.installEventFilter(panel)  # its Close stops a running analysis
    dock = add_analysis_dock(window, "origins", "Origins", panel)
    window.origins_panel = panel
    act = dock.toggleViewAction()
    act.triggered.connect(lambda checked: dock.raise_() if checked else None)
    act.setText("&Origins of Outcomes")
    act.setToolTip("What decides each run's outcome: its starting conditions at the transition state, a "
                   "classifier and the coordinates ranked by importance")
    _menu(window, "&View").addAction(act)
    return dock
