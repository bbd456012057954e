"""The map of all runs: every run as a path on the plane of two monitors, coloured by its final label.

Pieces, from data to screen:

* :func:`map_axes` lists the monitors one can put on an axis (the rules' monitors, then the ones a
  person added by picking atoms); :meth:`MapData.build` measures the two chosen monitors over every
  frame of every run with :func:`basinmark.core.geometry.measure` and stacks them end to end;
* :func:`grouped_paths` thins the paths *for drawing only* (at most ``max_points`` per run) and joins
  the runs of one label into one NaN-separated curve, so a thousand runs are a handful of items;
* :func:`nearest_on_paths` picks against the full-resolution arrays (vectorised nearest segment in
  screen pixels), so a click lands on the run that is really under the cursor;
* :class:`MapCanvas` draws it (shaded basin regions, one curve per label, a legend with counts, the
  current run on top with a marker at the current frame); :class:`MapPanel` adds the axis choosers
  and follows the window's :class:`~basinmark.gui.state.AppState`;
* with many points the paths are one picture drawn in a worker thread instead of curves
  (:class:`~basinmark.gui.map_layer.PathLayer`), and a click that comes before the pick index of a large map
  is ready waits for it (built in a thread) instead of building it on the window's thread.
"""

from __future__ import annotations

import threading
from contextlib import contextmanager
from typing import Any, Iterator, Mapping, Sequence

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QRectF, Qt, QTimer, Signal
from PySide6.QtGui import QAction, QColor, QKeySequence, QPalette
from PySide6.QtWidgets import (QComboBox, QDockWidget, QGraphicsRectItem, QHBoxLayout, QLabel, QMainWindow,
                               QVBoxLayout, QWidget)

from basinmark.gui.give_way import OWN_WORK
from basinmark.gui.colours import basin_colour, outcome_colour
from basinmark.gui.flow_layout import flow_row
from basinmark.gui.label_table import UNCLASSIFIED, final_label_counts, final_label_map
from basinmark.gui.map_layer import PathGroup, PathLayer

from basinmark.gui.map_data import (NO_LABEL, _finite, MAX_DRAW_POINTS, PICK_RADIUS_PX, MapAxis, added_monitor_name, map_axes, MapData, decimated_indices, draw_points, grouped_paths, nearest_on_paths, basin_regions, thinning_note, INDEX_FROM_POINTS)  # noqa: F401  (some re-exported)
from basinmark.gui.kept_axis import kept_axes
from basinmark.gui.plot_theme import theme_axes, theme_legend


class MapCanvas(pg.PlotWidget):
    """The map's plot: basin regions, one curve per label, the current run and frame."""

    run_picked = Signal(str, int)  # run id, frame index
    picked_later = Signal(object, int, object)   # MapData, click number, (run id, frame) or None: from a thread
    pick_waiting = Signal(bool)    # a click waits for the pick index (True), or no longer (False)

    #: drawn points from which the paths are one picture drawn in a worker thread (gui/map_layer.py) instead of
    #: curve items, whose stroking on the window's thread costs ~100 ms per 25,000 points of the 10,000-run
    #: benchmark set on every first paint, zoom and resize (measured); our own choice
    PICTURE_FROM_POINTS = 20_000

    def __init__(self, parent: QWidget | None = None, max_points: int = MAX_DRAW_POINTS) -> None:
        super().__init__(parent, axisItems=kept_axes())
        self.setObjectName("mapCanvas")
        self.setProperty(OWN_WORK, True)   # a click here waits for this map's own workers: they do not hold back
        self.max_points = max_points
        self.data: MapData | None = None
        self.labels: dict[str, str] = {}
        self.products: list[str] = []
        self.rules: Any = None
        self.curves: dict[str, pg.PlotCurveItem] = {}
        self.layer: PathLayer | None = None   # the paths as one picture (large maps), else None
        self._layer_version = 0
        self._clicks = 0   # clicks on a large map, answered by a thread: only the latest one counts
        self.counts: dict[str, int] = {}
        self.region_items: list[QGraphicsRectItem] = []
        self.region_texts: list[pg.TextItem] = []
        self.current_run = ""
        self.current_frame = 0
        self._current_xy: tuple[np.ndarray, np.ndarray] | None = None
        self.plot_item = self.getPlotItem()
        # no grid: the axes would redraw it on every frame (about 10 ms at 900x700, bench_map), and the
        # shaded basins already give the eye its bearings
        self.plot_item.showGrid(x=False, y=False)
        self.plot_item.setMenuEnabled(False)
        for side in ("left", "bottom"):   # the monitor's own unit (Å, °) on its axis, never an SI-prefixed one
            self.plot_item.getAxis(side).enableAutoSIPrefix(False)
        self.legend = self.plot_item.addLegend(offset=(-10, 10), labelTextSize="9pt")
        self.halo = pg.PlotCurveItem(connect="finite")
        self.highlight = pg.PlotCurveItem(connect="finite")
        self.marker = pg.ScatterPlotItem(size=12, symbol="o")
        self.halo.setZValue(20)
        self.highlight.setZValue(21)
        self.marker.setZValue(22)
        for item in (self.halo, self.highlight, self.marker):
            # inside the paths' bounds anyway; ignoring them spares a bounds pass per frame
            self.plot_item.addItem(item, ignoreBounds=True)
        for item in (self.halo, self.highlight):  # redrawn only when the run changes, not per frame
            item.setCacheMode(item.CacheMode.DeviceCoordinateCache)
        self.scene().sigMouseClicked.connect(self._clicked)
        self.plot_item.vb.sigTransformChanged.connect(self._view_changed)
        self.picked_later.connect(self._on_picked_later)
        self.apply_palette()

    # --- look -----------------------------------------------------------------------------
    def _pal(self) -> tuple[QColor, QColor, QColor, QColor]:
        pal = self.palette()
        return (pal.color(QPalette.ColorRole.Base), pal.color(QPalette.ColorRole.Text),
                pal.color(QPalette.ColorRole.Highlight), pal.color(QPalette.ColorRole.Mid))

    def apply_palette(self) -> None:
        base, text, hl, _mid = self._pal()
        self.setBackground(base)
        theme_axes(self.plot_item, text)
        theme_legend(self.legend, base, text, 215)
        self.legend.setPen(pg.mkPen(self.palette().color(QPalette.ColorRole.Mid)))
        halo = QColor(text)  # an outline in the text colour stands out on either theme, over any path
        halo.setAlpha(210)
        self.halo.setPen(pg.mkPen(halo, width=6))
        self.marker.setPen(pg.mkPen(text, width=1.5))
        self.marker.setBrush(pg.mkBrush(hl))
        if self.data is not None:
            self._draw_regions()
            self._draw_curves(keep_picture=True)
            self._draw_current()

    def changeEvent(self, event) -> None:  # noqa: N802
        if event.type() == event.Type.PaletteChange and hasattr(self, "legend"):
            self.apply_palette()
        super().changeEvent(event)

    def label_colour(self, label: str) -> QColor:
        if label == NO_LABEL:
            return self._pal()[3]
        return outcome_colour(label, self.products)

    # --- data -----------------------------------------------------------------------------
    def set_data(self, data: MapData | None, labels: Mapping[str, str], rules: Any = None,
                 products: Sequence[str] = (), groups: dict | None = None) -> None:
        """New paths (other set, rules or axes): everything is drawn again and the view fitted.

        ``groups``: the paths already grouped by :func:`grouped_paths` for ``labels`` (e.g. in a worker)."""
        self.data = data
        self.rules = rules
        self.products = list(products) if products else (list(rules.products) if rules is not None else [])
        self.labels = dict(labels)
        pi = self.plot_item
        if data is not None:
            pi.setLabel("bottom", data.x_axis.title, units=data.x_axis.unit)
            pi.setLabel("left", data.y_axis.title, units=data.y_axis.unit)
        self._draw_regions()
        self._draw_curves(groups)
        self._current_xy = None
        self._clicks += 1   # a click on the old map is not answered any more
        self._draw_current()
        pi.enableAutoRange()
        pi.autoRange()
        if self.layer is not None:
            self.layer.request()   # the view may already have had this range (no change signal)

    def set_labels(self, labels: Mapping[str, str]) -> None:
        """Other final labels: the curves are regrouped (the monitor values stay)."""
        labels = dict(labels)
        if labels == self.labels:
            return
        self.labels = labels
        self._draw_curves(keep_picture=True)
        self._draw_current()

    def _draw_regions(self) -> None:
        for item in self.region_items + self.region_texts:
            self.plot_item.removeItem(item)
        self.region_items, self.region_texts = [], []
        data = self.data
        if data is None or self.rules is None or not (data.x_axis.from_rules and data.y_axis.from_rules):
            return
        _base, text, _hl, _mid = self._pal()
        rng = data.finite_range()  # computed with the data (in the map's worker for a large set)
        for reg in basin_regions(self.rules, data.x_axis.key, data.y_axis.key):
            colour = basin_colour(reg.basin, self.rules.basin_names, self.rules.reactant)
            rect = QRectF(_finite(reg.x0), _finite(reg.y0), _finite(reg.x1) - _finite(reg.x0),
                          _finite(reg.y1) - _finite(reg.y0))
            item = QGraphicsRectItem(rect)
            fill = QColor(colour)
            fill.setAlpha(38)
            edge = QColor(colour)
            edge.setAlpha(150)
            item.setBrush(pg.mkBrush(fill))
            item.setPen(pg.mkPen(edge, width=1, style=Qt.PenStyle.DashLine, cosmetic=True))
            item.setZValue(-10)
            tip = f"basin {reg.basin}"
            if reg.elsewhere:
                tip += " — also needs " + " and ".join(reg.elsewhere) + " (not shown on this plane)"
            item.setToolTip(tip)
            self.plot_item.addItem(item, ignoreBounds=True)
            self.region_items.append(item)
            if rng is not None:  # the name at the middle of the region's part inside the data
                lx0, lx1 = max(reg.x0, rng[0]), min(reg.x1, rng[1])
                ly0, ly1 = max(reg.y0, rng[2]), min(reg.y1, rng[3])
                if lx0 <= lx1 and ly0 <= ly1:
                    back = QColor(_base)
                    back.setAlpha(170)
                    label = pg.TextItem(reg.basin, color=colour.darker(125) if _base.lightness() > 128
                                        else colour.lighter(135), anchor=(0.5, 0.5), fill=pg.mkBrush(back))
                    label.setPos((lx0 + lx1) / 2, (ly0 + ly1) / 2)
                    label.setZValue(15)  # above the paths, below the current run
                    self.plot_item.addItem(label, ignoreBounds=True)
                    self.region_texts.append(label)

    def _legend_order(self, names: Sequence[str]) -> list[str]:
        known = list(self.products) + ["recrossing", "unfinished", "ambiguous", "excluded"]
        return sorted(names, key=lambda n: (known.index(n) if n in known else len(known), n == NO_LABEL, n))

    def _drop_layer(self) -> None:
        if self.layer is not None:
            self.layer.stop()
            self.plot_item.removeItem(self.layer)
            self.layer = None

    def _draw_curves(self, groups: dict | None = None, keep_picture: bool = False) -> None:
        """One curve per label, or (many points) one picture of all; ``keep_picture``: same data, so the picture
        shown stays until the new one comes (labels or colours changed)."""
        for c in self.curves.values():
            self.plot_item.removeItem(c)
        self.legend.clear()
        self.curves, self.counts = {}, {}
        if self.data is None:
            self._drop_layer()
            return
        if groups is None:
            groups = grouped_paths(self.data, self.labels, self.max_points)
        order = self._legend_order(list(groups))
        drawn = sum(int(np.count_nonzero(np.isfinite(groups[label][0]))) for label in order)
        picture = drawn >= self.PICTURE_FROM_POINTS
        if not (picture and keep_picture):
            self._drop_layer()
        parts: list[PathGroup] = []
        # the legend counts runs as the run table does (one function); paths not drawn are said
        totals = final_label_counts(("" if v == NO_LABEL else v for v in self.labels.values()), self.products)
        for z, label in enumerate(order):
            x, y, n = groups[label]
            colour = QColor(self.label_colour(label))
            colour.setAlpha(150)
            if picture:
                parts.append(PathGroup(label, x, y, QColor(colour)))
            else:
                # thin, many and overlapping: no antialiasing (about 100 ms less to draw 1.4e5 points at 900x700,
                # bench_map)
                curve = pg.PlotCurveItem(x, y, connect="finite", pen=pg.mkPen(colour, width=1), antialias=False)
                curve.setZValue(z)
                # cached as a pixmap: moving the current-frame marker then repaints no path
                curve.setCacheMode(curve.CacheMode.DeviceCoordinateCache)
                self.plot_item.addItem(curve)
                self.curves[label] = curve
            self.counts[label] = n
            shown = QColor(colour)
            shown.setAlpha(255)
            total = totals.get(UNCLASSIFIED if label == NO_LABEL else label, n)
            self.legend.addItem(pg.PlotDataItem(pen=pg.mkPen(shown, width=3)),
                                f"{label} ({total})" if n == total else f"{label} ({n} of {total} drawn)")
        if picture:
            self._layer_version += 1
            if self.layer is not None:
                self.layer.set_groups(parts, self._layer_version)
            else:
                self.layer = PathLayer(parts, self.data.finite_range(), self._layer_version)
                self.plot_item.addItem(self.layer)
                self.layer.request()

    def label_colours(self) -> dict[str, QColor]:
        """The colour each label's paths are drawn in (with their transparency), curves or picture alike."""
        if self.layer is not None:
            return {g.label: QColor(g.colour) for g in self.layer.groups}
        return {label: QColor(c.opts["pen"].color()) for label, c in self.curves.items()}

    def drawn(self) -> bool:
        """Everything asked for is on screen: the curves, or a picture of the view as it is now."""
        return self.data is not None and (self.layer is None or self.layer.shows_current_view())

    def _view_changed(self, *_args) -> None:
        if self.layer is not None:
            self.layer.view_changed()

    def set_current(self, run_id: str, frame: int = 0) -> None:
        self.current_run = run_id or ""
        self.current_frame = int(frame)
        self._current_xy = None
        self._draw_current()

    def set_frame(self, frame: int) -> None:
        self.current_frame = int(frame)
        self._move_marker()

    def _draw_current(self) -> None:
        data = self.data
        xy = data.run_xy(self.current_run) if data is not None and self.current_run else None
        self._current_xy = xy
        if xy is None:
            for item in (self.halo, self.highlight):
                item.setData([], [])
            self.marker.setData([], [])
            return
        label = self.labels.get(self.current_run) or NO_LABEL
        self.halo.setData(xy[0], xy[1], connect="finite")
        self.highlight.setData(xy[0], xy[1], connect="finite")
        self.highlight.setPen(pg.mkPen(self.label_colour(label), width=3))
        self._move_marker()

    def _move_marker(self) -> None:
        xy = self._current_xy
        if xy is None or xy[0].size == 0:
            self.marker.setData([], [])
            return
        i = min(max(self.current_frame, 0), xy[0].size - 1)
        self.marker.setData([xy[0][i]], [xy[1][i]])

    # --- picking --------------------------------------------------------------------------
    def view_point(self, x: float, y: float):
        """Scene position of the data point (x, y) (for tests and tooltips)."""
        return self.plot_item.vb.mapViewToScene(pg.Point(x, y))

    def pick_at(self, x: float, y: float, radius_px: float = PICK_RADIUS_PX) -> tuple[str, int] | None:
        """The run (and frame) whose full path passes within ``radius_px`` of data point (x, y).

        On a large map this builds the pick index when it is not there yet (tests, benchmarks); a click never
        does: it waits for a thread to build it (:meth:`_clicked`)."""
        sx, sy = self.plot_item.vb.viewPixelSize()
        return self._pick(self.data, x, y, sx, sy, radius_px)

    def _pick(self, data: MapData | None, x: float, y: float, sx: float, sy: float,
              radius_px: float = PICK_RADIUS_PX) -> tuple[str, int] | None:
        if data is None or not (sx > 0 and sy > 0):
            return None
        if data.x.size < INDEX_FROM_POINTS:
            hit = nearest_on_paths(data, x, y, sx, sy)
        else:  # many frames: through the boxes of path pieces
            hit = data.pick_index().nearest(x, y, sx, sy, radius_px)
        if hit is None or hit[2] > radius_px:
            return None
        return data.run_ids[hit[0]], hit[1]

    def _clicked(self, ev) -> None:
        if ev.button() != Qt.MouseButton.LeftButton or ev.double():
            return
        vb = self.plot_item.vb
        if not vb.sceneBoundingRect().contains(ev.scenePos()):
            return
        p = vb.mapSceneToView(ev.scenePos())
        data = self.data
        if data is not None and data.x.size >= INDEX_FROM_POINTS:
            # a large map: a thread finds the run (building the pick index first when it is not there yet, ~0.1 s
            # at 10,000 runs) and the answer comes later
            sx, sy = vb.viewPixelSize()
            self._clicks += 1
            if data.pick_index(build=False) is None:
                self.pick_waiting.emit(True)
            threading.Thread(target=self._pick_in_thread, args=(data, self._clicks, p.x(), p.y(), sx, sy),
                             name="basinmark-map-pick", daemon=True).start()
            return
        hit = self.pick_at(p.x(), p.y())
        if hit is not None:
            self.run_picked.emit(*hit)

    def _pick_in_thread(self, data: MapData, number: int, x: float, y: float, sx: float, sy: float) -> None:
        try:
            hit = self._pick(data, x, y, sx, sy)
        except Exception:  # noqa: BLE001 -- answered as "nothing there"
            hit = None
        try:
            self.picked_later.emit(data, number, hit)
        except RuntimeError:  # the canvas was closed meanwhile
            pass

    def _on_picked_later(self, data: MapData, number: int, hit) -> None:
        if number != self._clicks:
            return   # a newer click (or other data) came meanwhile
        self.pick_waiting.emit(False)
        if data is self.data and hit is not None:
            self.run_picked.emit(*hit)


class MapPanel(QWidget):
    """The map with its axis choosers, following the window's state.

    A set of at least ``WORKER_FROM_FRAMES`` frames in all is measured and thinned in a worker thread (the
    window stays responsive; the panel says it is measuring); the drawing then takes one short turn.  Smaller
    sets are measured at once (a thread would cost more than the work).
    """

    #: frames of all runs together from which the map is computed off the window's thread; our own choice:
    #: 100,000 frames measure in ~30 ms on one core (bench/bench_window_scale.py measures large sets)
    WORKER_FROM_FRAMES = 100_000

    computed = Signal(object)   # (generation, MapData or None, groups, error), from the worker thread

    def __init__(self, state, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.state = state
        self.cache: dict = {}
        self.busy = False        # a worker is measuring the map
        self._generation = 0     # results of older requests are dropped
        self.computed.connect(self._on_computed)
        self._axes: list[MapAxis] = []
        self.stale = True  # state changed while hidden: draw again when shown
        self._on_screen: bool | None = None   # as the dock last said (visibilityChanged); None: not told yet
        self._held = 0     # inside held(): refreshing waits for a turn of its own after it
        self._later = QTimer(self)
        self._later.setSingleShot(True)
        self._later.setInterval(0)
        self._later.timeout.connect(self.refresh)
        # new labels are drawn in a turn of their own, after the one that made them (see _on_labels)
        self._pending_labels: dict[str, str] | None = None
        self._labels_later = QTimer(self)
        self._labels_later.setSingleShot(True)
        self._labels_later.setInterval(0)
        self._labels_later.timeout.connect(self._apply_labels)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        self.x_combo = QComboBox(self)
        self.y_combo = QComboBox(self)
        pairs = []
        for combo, which, text in ((self.x_combo, "horizontal", "&x:"), (self.y_combo, "vertical", "&y:")):
            combo.setToolTip(f"Monitor on the {which} axis (the rules' monitors and the ones you added)")
            # a long monitor name is cut short in the closed box (the list shows it whole) rather than widen the
            # map, and with it the whole window, past a laptop screen
            combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
            combo.setMinimumContentsLength(14)
            pair = QWidget(self)
            pl = QHBoxLayout(pair)
            pl.setContentsMargins(0, 0, 0, 0)
            label = QLabel(text, pair)
            label.setBuddy(combo)
            pl.addWidget(label)
            pl.addWidget(combo)
            pairs.append(pair)
        self.hint = QLabel(self.HINT, self)
        self.hint.setEnabled(False)
        self.hint.setAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        # the axis choosers and the hint wrap onto further rows in a narrow dock
        lay.addWidget(flow_row(self, [*pairs, (self.hint, True)], h_spacing=8, v_spacing=2))
        self.note = QLabel(self)
        self.note.setWordWrap(True)
        self.note.setVisible(False)
        lay.addWidget(self.note)
        self.canvas = MapCanvas(self)
        self.canvas.setToolTip("Every run as a path on two monitors, coloured by its final label; "
                               "shaded boxes are the basins' thresholds. Click a path to open that run.")
        lay.addWidget(self.canvas, 1)
        self.x_combo.currentIndexChanged.connect(self._axis_chosen)
        self.y_combo.currentIndexChanged.connect(self._axis_chosen)
        self.canvas.run_picked.connect(self._picked)
        self.canvas.pick_waiting.connect(self._pick_waiting)
        st = state
        st.set_changed.connect(self._on_set)
        st.rules_changed.connect(self._on_axes)
        st.monitors_changed.connect(self._on_axes)
        st.labels_changed.connect(self._on_labels)
        st.run_changed.connect(lambda rid: self.canvas.set_current(rid, st.frame))
        st.frame_changed.connect(self.canvas.set_frame)
        self._on_axes()

    # --- state ----------------------------------------------------------------------------
    def final_labels(self) -> dict[str, str]:
        return final_label_map(self.state.labels, blank=NO_LABEL)

    def _on_set(self) -> None:
        self.cache.clear()
        self._on_axes()

    def _on_axes(self) -> None:
        axes = map_axes(self.state.rules, self.state.user_monitors)
        keep = (self.current_axis(self.x_combo), self.current_axis(self.y_combo))
        self._axes = axes
        for combo in (self.x_combo, self.y_combo):
            combo.blockSignals(True)
            combo.clear()
            for a in axes:
                combo.addItem(f"{a.title} [{a.unit}]", a.key)
        keys = [a.key for a in axes]
        defaults = [k.key if k is not None and k.key in keys else None for k in keep]
        for combo, want, fallback in zip((self.x_combo, self.y_combo), defaults, (0, 1)):
            i = keys.index(want) if want in keys else min(fallback, len(keys) - 1)
            combo.setCurrentIndex(i)
            combo.blockSignals(False)
        self.refresh()

    def current_axis(self, combo: QComboBox) -> MapAxis | None:
        key = combo.currentData()
        return next((a for a in self._axes if a.key == key), None)

    def set_axes(self, x_key: str, y_key: str) -> None:
        """Choose the two monitors by name (as in the choosers)."""
        for combo, key in ((self.x_combo, x_key), (self.y_combo, y_key)):
            i = combo.findData(key)
            if i < 0:
                raise KeyError(f"no monitor {key!r} to put on the map")
            combo.setCurrentIndex(i)

    def _axis_chosen(self, _i: int) -> None:
        self.refresh()

    @contextmanager
    def held(self) -> Iterator[None]:
        """Changes (set, rules, monitors, labels) that each refresh the map refresh it once, in a later turn of the
        event loop (the turn that ends a load measured, thinned and drew it up to three times)."""
        self._held += 1
        try:
            yield
        finally:
            self._held -= 1
            if not self._held and self.stale and self.on_screen():
                self._later.start()

    def on_screen(self) -> bool:
        """Shown to the user.  Not ``isVisible()`` alone: tabbed behind the traces, the map's dock is visible to Qt at
        a place off the screen, and the map was measured and drawn again for nobody (its dock's ``visibilityChanged``
        says when its tab comes to the front or goes behind)."""
        if not self.isVisible():
            return False
        return self._on_screen if self._on_screen is not None else not self.visibleRegion().isEmpty()

    def dock_visibility(self, visible: bool) -> None:
        """The dock's ``visibilityChanged``: brought to the front, the map is drawn if something changed meanwhile."""
        self._on_screen = visible
        if visible and self.stale and not self._held:
            self.refresh()

    def _on_labels(self) -> None:
        if self._held or not self.on_screen():
            self.stale = True
        elif self.canvas.data is not None:
            delta = getattr(self.state, "labels_delta", None)
            base = self._pending_labels if self._pending_labels is not None else self.canvas.labels
            if delta is not None and base:   # a few rows changed (a hand label): only theirs
                labels = dict(base)
                for run in delta:
                    final = (self.state.label_row(run) or {}).get("final_label")
                    labels[run] = final if isinstance(final, str) and final else NO_LABEL
            else:
                labels = self.final_labels()
            # regrouping every path is a third of a hand label's turn at 10,000 runs (26 of 67 ms under a
            # profiler): the table, panel and journal show the label in its turn, the map in the next
            self._pending_labels = labels
            self._labels_later.start()

    def _apply_labels(self) -> None:
        labels, self._pending_labels = self._pending_labels, None
        if labels is not None and self.canvas.data is not None:
            self.canvas.set_labels(labels)

    def _drop_pending_labels(self) -> None:
        """The map is drawn anew with the labels as they are now: labels waiting for their turn are older."""
        self._pending_labels = None
        self._labels_later.stop()

    def _message(self, text: str) -> None:
        self.note.setText(text)
        self.note.setVisible(bool(text))

    def showEvent(self, event) -> None:  # noqa: N802
        super().showEvent(event)
        if self.stale:
            self.refresh()

    def refresh(self, force: bool = False) -> None:
        """Measure the chosen monitors for every run (cached) and draw the map again.

        While the panel is hidden (closed, or behind another tab) the work waits until it is shown.
        """
        if not (force or self.on_screen()) or (self._held and not force):
            self.stale = True
            return
        self._later.stop()
        self.stale = False
        st = self.state
        xa, ya = self.current_axis(self.x_combo), self.current_axis(self.y_combo)
        if st.tset is None or not len(st.tset):
            self._message("Open a set to see the map of its runs.")
            self.canvas.set_data(None, {})
            return
        if xa is None or ya is None or len(self._axes) < 2:
            self._message("The map needs two monitors: load rules with at least two, or add a distance by "
                          "picking two atoms in the molecule view.")
            self.canvas.set_data(None, {})
            return
        self._generation += 1
        trajs = list(st.tset)   # taken here: runs may still be added to the set while the worker reads
        labels = self.final_labels()
        per_run = draw_points(len(trajs), self.canvas.max_points)
        if sum(t.n_frames for t in trajs) < self.WORKER_FROM_FRAMES:
            self.busy = False
            data = MapData.build(trajs, xa, ya, self.cache)
            self._show(data, labels, per_run, None)
            return
        self.busy = True
        self.canvas.set_data(None, {})
        self._message(f"Measuring the map of {len(trajs):,} runs…")
        job = (self._generation, trajs, xa, ya, dict(self.cache), labels, per_run)
        threading.Thread(target=self._compute, args=job, name="basinmark-map", daemon=True).start()

    def _compute(self, generation: int, trajs: list, xa: MapAxis, ya: MapAxis, cache: dict,
                 labels: dict, per_run: int) -> None:
        """In the worker thread: measure both monitors over every frame, thin and group the paths."""
        try:
            data = MapData.build(trajs, xa, ya, cache)
            data.prepare(per_run)
            result = (generation, data, cache, grouped_paths(data, labels, per_run), labels, per_run, "")
        except Exception as exc:  # said in the panel, never a crash of the window
            result = (generation, None, {}, None, labels, per_run, f"{type(exc).__name__}: {exc}")
        try:
            self.computed.emit(result)
        except RuntimeError:  # the panel was closed meanwhile
            return
        data = result[1]
        if data is not None and data.x.size >= INDEX_FROM_POINTS:
            try:  # after the drawing: the paths show first, the index for clicks follows (~0.1 s at 10,000 runs)
                data.pick_index()
            except Exception:  # noqa: BLE001 -- a click then builds it, or says why it cannot
                pass

    def _on_computed(self, result) -> None:
        generation, data, cache, groups, labels, per_run, error = result
        if generation != self._generation:
            return  # a newer request (other set, axes or rules) is under way
        self.busy = False
        if error:
            self._message(f"The map could not be measured: {error}")
            return
        self.cache.update(cache)
        self._show(data, labels, per_run, groups)

    def _show(self, data: MapData, labels: dict, per_run: int, groups) -> None:
        st = self.state
        xa, ya = data.x_axis, data.y_axis
        msg = "The same monitor is on both axes: choose another for one of them." if xa.key == ya.key else ""
        if st.rules is None:
            msg = (msg + " " if msg else "") + "No rules: runs are shown without basins or automatic outcomes."
        thin = thinning_note(data, per_run)
        self._message(" ".join(m for m in (msg, thin) if m))
        self._drop_pending_labels()
        self.canvas.max_points = per_run
        self.canvas.set_data(data, labels, st.rules, groups=groups)
        now = self.final_labels()
        if now != labels:  # labels changed while the worker measured
            self.canvas.set_labels(now)
        self.canvas.set_current(st.run_id, st.frame)

    HINT = "Click a path to open that run"

    def _pick_waiting(self, waiting: bool) -> None:
        self.hint.setText("Finding the run under the click (preparing every frame for picking)…" if waiting
                          else self.HINT)

    def _picked(self, run_id: str, frame: int) -> None:
        self.state.set_run(run_id)
        self.state.set_frame(frame)


def _menu(window: QMainWindow, title: str):
    """The window's top-level menu called ``title`` (ignoring '&'), created if missing."""
    bar = getattr(window, "menu_bar", None) or window.menuBar()
    plain = title.replace("&", "")
    for act in bar.actions():
        if act.menu() is not None and act.text().replace("&", "") == plain:
            return act.menu()
    help_act = next((a for a in bar.actions() if a.menu() is not None and a.text().replace("&", "") == "Help"), None)
    menu = bar.addMenu(title) if help_act is None else None
    if menu is None:
        from PySide6.QtWidgets import QMenu

        menu = QMenu(title, bar)
        bar.insertMenu(help_act, menu)
    menu.setObjectName(f"menu_{plain.lower()}")
    return menu


def install_map_dock(window: QMainWindow) -> QDockWidget:
    """Add the map as a dock (tabified with the traces), with its toggle in the View menu."""
    panel = MapPanel(window.state, window)
    dock = QDockWidget("Map of Runs", window)
    dock.setObjectName("dock_map")
    dock.setWidget(panel)
    window.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, dock)
    docks = getattr(window, "docks", {})
    if "traces" in docks:
        window.tabifyDockWidget(docks["traces"], dock)
        docks["traces"].raise_()
    docks["map"] = dock
    dock.visibilityChanged.connect(panel.dock_visibility)
    window.map_panel = panel
    act = dock.toggleViewAction()
    act.setText("&Map of Runs")
    act.setToolTip("Show or close the map: every run as a path on two monitors, coloured by outcome")
    _menu(window, "&View").addAction(act)
    # Ctrl+M always brings the map to the front (a toggle would hide a map tabbed behind the traces)
    front = QAction("Show &Map in Front", window)
    front.setObjectName("action_show_map")
    front.setShortcut(QKeySequence("Ctrl+M"))
    front.setToolTip("Show the map of runs and bring it to the front (Ctrl+M)")

    def show_map() -> None:
        dock.show()
        dock.raise_()
        panel.setFocus()

    front.triggered.connect(show_map)
    _menu(window, "&View").addAction(front)
    window.addAction(front)
    return dock
