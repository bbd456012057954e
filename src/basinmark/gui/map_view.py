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
  and follows the window's :class:`~basinmark.gui.state.AppState`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QRectF, Qt, Signal
from PySide6.QtGui import QColor, QPalette
from PySide6.QtWidgets import (QComboBox, QDockWidget, QGraphicsRectItem, QHBoxLayout, QLabel, QMainWindow,
                               QVBoxLayout, QWidget)

from basinmark.core.geometry import measure
from basinmark.core.rules import MONITOR_KINDS
from basinmark.gui.colours import basin_colour, outcome_colour

NO_LABEL = "no label"
MAX_DRAW_POINTS = 160  # points drawn per run (picking always uses every frame); our own choice, measured in bench
PICK_RADIUS_PX = 8.0
_UNIT = {"distance": "Å", "angle": "°", "dihedral": "°"}
_FAR = 1.0e4  # an open side of a basin region is drawn this far out (Å or degrees), never in the auto-range


# --- data ------------------------------------------------------------------------------------

@dataclass(frozen=True)
class MapAxis:
    """One monitor that can go on an axis."""

    key: str               # rules monitor name, or e.g. "d(1-2)" for an added one
    atoms: tuple[int, ...]  # 1-based
    from_rules: bool = True

    @property
    def kind(self) -> str:
        return MONITOR_KINDS[len(self.atoms)]

    @property
    def unit(self) -> str:
        return _UNIT[self.kind]

    @property
    def title(self) -> str:
        return f"{self.key} ({'-'.join(map(str, self.atoms))})" if self.from_rules else self.key


def added_monitor_name(atoms: Sequence[int]) -> str:
    """Name of a monitor a person added, e.g. ``d(1-2)``, ``∠(1-2-3)``, ``φ(1-2-3-4)``."""
    prefix = {2: "d", 3: "∠", 4: "φ"}[len(atoms)]
    return f"{prefix}({'-'.join(map(str, atoms))})"


def map_axes(rules: Any = None, user_monitors: Sequence[Sequence[int]] = ()) -> list[MapAxis]:
    """The monitors of the rules (file order), then the added ones not already among them."""
    out: list[MapAxis] = []
    seen: set[tuple[int, ...]] = set()
    if rules is not None:
        for name, mon in rules.monitors.items():
            out.append(MapAxis(name, tuple(mon.atoms), True))
            seen.update({tuple(mon.atoms), tuple(mon.atoms)[::-1]})
    for atoms in user_monitors:
        atoms = tuple(int(a) for a in atoms)
        if atoms not in seen and 2 <= len(atoms) <= 4:
            out.append(MapAxis(added_monitor_name(atoms), atoms, False))
            seen.update({atoms, atoms[::-1]})
    return out


def _measure_all(trajs: list, axes: Sequence[MapAxis], cache: dict | None) -> list[np.ndarray]:
    """Each axis' monitor over every frame of every run, stacked end to end (cached per atom tuple).

    One :func:`measure` call per run and monitor (gathering all runs' atoms first and measuring once
    was no faster on 1,000 x 1,000 frames: the copy costs what the calls save).  Runs with too few
    atoms give NaN.
    """
    out = []
    for a in axes:
        key = ("map", a.atoms)
        if cache is not None and key in cache:
            out.append(cache[key])
            continue
        idx = [i - 1 for i in a.atoms]
        parts = [measure(t.positions, idx) if max(idx) < t.n_atoms else np.full(t.n_frames, np.nan) for t in trajs]
        values = np.concatenate(parts).astype(np.float64, copy=False) if parts else np.zeros(0)
        if cache is not None:
            cache[key] = values
        out.append(values)
    return out


@dataclass
class MapData:
    """Two monitors over every frame of every run, stacked end to end (full resolution)."""

    run_ids: list[str]
    x: np.ndarray        # (T,)
    y: np.ndarray        # (T,)
    starts: np.ndarray   # (R,) first index of each run
    ends: np.ndarray     # (R,) one past the last
    x_axis: MapAxis
    y_axis: MapAxis

    @classmethod
    def build(cls, tset, x_axis: MapAxis, y_axis: MapAxis, cache: dict | None = None) -> "MapData":
        """Measure both monitors for every run of ``tset`` (values cached per atom tuple in ``cache``)."""
        trajs = list(tset)
        lengths = np.array([t.n_frames for t in trajs], dtype=np.intp)
        ends = np.cumsum(lengths)
        x, y = _measure_all(trajs, [x_axis, y_axis], cache)
        return cls([t.run_id for t in trajs], x, y, ends - lengths, ends, x_axis, y_axis)

    @property
    def n_runs(self) -> int:
        return len(self.run_ids)

    def index(self, run_id: str) -> int | None:
        try:
            return self.run_ids.index(run_id)
        except ValueError:
            return None

    def run_xy(self, run_id: str) -> tuple[np.ndarray, np.ndarray] | None:
        r = self.index(run_id)
        if r is None:
            return None
        s = slice(int(self.starts[r]), int(self.ends[r]))
        return self.x[s], self.y[s]


def decimated_indices(starts: np.ndarray, ends: np.ndarray, max_points: int = MAX_DRAW_POINTS) -> np.ndarray:
    """Indices into the stacked arrays that keep at most about ``max_points`` per run, always the first
    and last frame of each run (the ends are what the classification looks at)."""
    starts, ends = np.asarray(starts, np.intp), np.asarray(ends, np.intp)
    n = int(ends[-1]) if ends.size else 0
    if n == 0:
        return np.zeros(0, dtype=np.intp)
    lengths = ends - starts
    stride = np.maximum(1, np.ceil(lengths / max(1, max_points - 1))).astype(np.intp)
    run_of = np.repeat(np.arange(starts.size), lengths)
    local = np.arange(n) - starts[run_of]
    keep = (local % stride[run_of] == 0)
    keep[ends[lengths > 0] - 1] = True
    return np.flatnonzero(keep)


def grouped_paths(data: MapData, labels: Mapping[str, str], max_points: int = MAX_DRAW_POINTS
                  ) -> dict[str, tuple[np.ndarray, np.ndarray, int]]:
    """Per label: (x, y, number of runs), the runs' thinned paths joined with a NaN between runs."""
    keep = decimated_indices(data.starts, data.ends, max_points)
    if keep.size == 0:
        return {}
    lengths = data.ends - data.starts
    run_of = np.repeat(np.arange(data.n_runs), lengths)[keep]
    run_label = np.array([labels.get(r) or NO_LABEL for r in data.run_ids], dtype=object)
    out: dict[str, tuple[np.ndarray, np.ndarray, int]] = {}
    last_of_run = np.append(run_of[1:] != run_of[:-1], True)
    for label in dict.fromkeys(run_label):
        runs = np.flatnonzero(run_label == label)
        mask = np.isin(run_of, runs)
        idx = keep[mask]
        # a NaN after each run's last point breaks the line between runs (connect="finite")
        breaks = np.flatnonzero(last_of_run[mask]) + 1
        x = np.insert(data.x[idx], breaks, np.nan)
        y = np.insert(data.y[idx], breaks, np.nan)
        out[str(label)] = (x, y, int(runs.size))
    return out


def nearest_on_paths(data: MapData, px: float, py: float, sx: float, sy: float,
                     runs: np.ndarray | None = None) -> tuple[int, int, float] | None:
    """The run nearest to the point (px, py) on its full-resolution path, measured in screen pixels.

    ``sx``/``sy`` are data units per pixel along x and y (the two axes have different units).  Returns
    (run index, frame index of the nearer segment end, distance in pixels), or None when there is no
    data.  ``runs``: a boolean mask (R,) of the runs to consider.  Vectorised over every segment.
    """
    n = data.x.size
    if n == 0:
        return None
    x = (data.x - px) / sx
    y = (data.y - py) / sy
    lengths = data.ends - data.starts
    run_of = np.repeat(np.arange(data.n_runs), lengths)
    ok_pt = np.isfinite(x) & np.isfinite(y)
    if runs is not None:
        ok_pt &= np.asarray(runs, bool)[run_of]
    if not ok_pt.any():
        return None
    # segments i -> i+1 inside one run
    ax, ay, bx, by = x[:-1], y[:-1], x[1:], y[1:]
    seg_ok = ok_pt[:-1] & ok_pt[1:] & (run_of[:-1] == run_of[1:])
    dx, dy = bx - ax, by - ay
    len2 = dx * dx + dy * dy
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.clip(-(ax * dx + ay * dy) / np.where(len2 > 0, len2, 1.0), 0.0, 1.0)
    cx, cy = ax + t * dx, ay + t * dy
    d2 = np.where(seg_ok, cx * cx + cy * cy, np.inf)
    pt_d2 = np.where(ok_pt, x * x + y * y, np.inf)  # single-frame runs have no segment
    i_seg = int(np.argmin(d2)) if d2.size else -1
    i_pt = int(np.argmin(pt_d2))
    if i_seg >= 0 and d2[i_seg] <= pt_d2[i_pt]:
        idx = i_seg + (1 if t[i_seg] > 0.5 else 0)
        dist = math.sqrt(float(d2[i_seg]))
    else:
        idx, dist = i_pt, math.sqrt(float(pt_d2[i_pt]))
    r = int(run_of[idx])
    return r, int(idx - data.starts[r]), dist


@dataclass(frozen=True)
class BasinRegion:
    basin: str
    x0: float
    x1: float
    y0: float
    y1: float
    elsewhere: tuple[str, ...]  # conditions on other monitors (not visible on this plane)


def basin_regions(rules: Any, x_key: str, y_key: str) -> list[BasinRegion]:
    """Rectangles of the basins on the plane of two rules monitors (open sides at ±infinity).

    A basin with no condition on either monitor covers the whole plane and is left out.
    """
    if rules is None:
        return []
    out = []
    for name, basin in rules.basins.items():
        cx, cy = basin.condition(x_key), basin.condition(y_key)
        if cx is None and cy is None:
            continue
        x0, _, x1, _ = cx.interval() if cx is not None else (-math.inf, 0, math.inf, 0)
        y0, _, y1, _ = cy.interval() if cy is not None else (-math.inf, 0, math.inf, 0)
        other = tuple(c.describe() for c in basin.conditions if c.monitor not in (x_key, y_key))
        out.append(BasinRegion(name, x0, x1, y0, y1, other))
    return out


# --- drawing ---------------------------------------------------------------------------------

def _finite(v: float) -> float:
    return max(-_FAR, min(_FAR, v))


class MapCanvas(pg.PlotWidget):
    """The map's plot: basin regions, one curve per label, the current run and frame."""

    run_picked = Signal(str, int)  # run id, frame index

    def __init__(self, parent: QWidget | None = None, max_points: int = MAX_DRAW_POINTS) -> None:
        super().__init__(parent)
        self.setObjectName("mapCanvas")
        self.max_points = max_points
        self.data: MapData | None = None
        self.labels: dict[str, str] = {}
        self.products: list[str] = []
        self.rules: Any = None
        self.curves: dict[str, pg.PlotCurveItem] = {}
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
        self.apply_palette()

    # --- look -----------------------------------------------------------------------------
    def _pal(self) -> tuple[QColor, QColor, QColor, QColor]:
        pal = self.palette()
        return (pal.color(QPalette.ColorRole.Base), pal.color(QPalette.ColorRole.Text),
                pal.color(QPalette.ColorRole.Highlight), pal.color(QPalette.ColorRole.Mid))

    def apply_palette(self) -> None:
        base, text, hl, _mid = self._pal()
        self.setBackground(base)
        for name in ("left", "bottom"):
            ax = self.plot_item.getAxis(name)
            ax.setPen(pg.mkPen(text))
            ax.setTextPen(pg.mkPen(text))
        bg = QColor(base)
        bg.setAlpha(215)
        self.legend.setBrush(pg.mkBrush(bg))
        self.legend.setPen(pg.mkPen(self.palette().color(QPalette.ColorRole.Mid)))
        self.legend.setLabelTextColor(text)
        halo = QColor(text)  # an outline in the text colour stands out on either theme, over any path
        halo.setAlpha(210)
        self.halo.setPen(pg.mkPen(halo, width=6))
        self.marker.setPen(pg.mkPen(text, width=1.5))
        self.marker.setBrush(pg.mkBrush(hl))
        if self.data is not None:
            self._draw_regions()
            self._draw_curves()
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
                 products: Sequence[str] = ()) -> None:
        """New paths (other set, rules or axes): everything is drawn again and the view fitted."""
        self.data = data
        self.rules = rules
        self.products = list(products) if products else (list(rules.products) if rules is not None else [])
        self.labels = dict(labels)
        pi = self.plot_item
        if data is not None:
            pi.setLabel("bottom", data.x_axis.title, units=data.x_axis.unit)
            pi.setLabel("left", data.y_axis.title, units=data.y_axis.unit)
        self._draw_regions()
        self._draw_curves()
        self._current_xy = None
        self._draw_current()
        pi.enableAutoRange()
        pi.autoRange()

    def set_labels(self, labels: Mapping[str, str]) -> None:
        """Other final labels: the curves are regrouped (the monitor values stay)."""
        labels = dict(labels)
        if labels == self.labels:
            return
        self.labels = labels
        self._draw_curves()
        self._draw_current()

    def _draw_regions(self) -> None:
        for item in self.region_items + self.region_texts:
            self.plot_item.removeItem(item)
        self.region_items, self.region_texts = [], []
        data = self.data
        if data is None or self.rules is None or not (data.x_axis.from_rules and data.y_axis.from_rules):
            return
        _base, text, _hl, _mid = self._pal()
        fx = data.x[np.isfinite(data.x)]
        fy = data.y[np.isfinite(data.y)]
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
            if fx.size and fy.size:  # the name at the middle of the region's part inside the data
                lx0, lx1 = max(reg.x0, fx.min()), min(reg.x1, fx.max())
                ly0, ly1 = max(reg.y0, fy.min()), min(reg.y1, fy.max())
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

    def _draw_curves(self) -> None:
        for c in self.curves.values():
            self.plot_item.removeItem(c)
        self.legend.clear()
        self.curves, self.counts = {}, {}
        if self.data is None:
            return
        groups = grouped_paths(self.data, self.labels, self.max_points)
        for z, label in enumerate(self._legend_order(list(groups))):
            x, y, n = groups[label]
            colour = QColor(self.label_colour(label))
            colour.setAlpha(150)
            # thin, many and overlapping: no antialiasing (about 100 ms less to draw 1.4e5 points at 900x700, bench_map)
            curve = pg.PlotCurveItem(x, y, connect="finite", pen=pg.mkPen(colour, width=1), antialias=False)
            curve.setZValue(z)
            # cached as a pixmap: moving the current-frame marker then repaints no path
            curve.setCacheMode(curve.CacheMode.DeviceCoordinateCache)
            self.plot_item.addItem(curve)
            self.curves[label] = curve
            self.counts[label] = n
            shown = QColor(colour)
            shown.setAlpha(255)
            self.legend.addItem(pg.PlotDataItem(pen=pg.mkPen(shown, width=3)), f"{label} ({n})")

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
        """The run (and frame) whose full path passes within ``radius_px`` of data point (x, y)."""
        if self.data is None:
            return None
        sx, sy = self.plot_item.vb.viewPixelSize()
        if not (sx > 0 and sy > 0):
            return None
        hit = nearest_on_paths(self.data, x, y, sx, sy)
        if hit is None or hit[2] > radius_px:
            return None
        return self.data.run_ids[hit[0]], hit[1]

    def _clicked(self, ev) -> None:
        if ev.button() != Qt.MouseButton.LeftButton or ev.double():
            return
        vb = self.plot_item.vb
        if not vb.sceneBoundingRect().contains(ev.scenePos()):
            return
        p = vb.mapSceneToView(ev.scenePos())
        hit = self.pick_at(p.x(), p.y())
        if hit is not None:
            self.run_picked.emit(*hit)


class MapPanel(QWidget):
    """The map with its axis choosers, following the window's state."""

    def __init__(self, state, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.state = state
        self.cache: dict = {}
        self._axes: list[MapAxis] = []
        self.stale = True  # state changed while hidden: draw again when shown
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        row = QHBoxLayout()
        self.x_combo = QComboBox(self)
        self.y_combo = QComboBox(self)
        for combo, which in ((self.x_combo, "horizontal"), (self.y_combo, "vertical")):
            combo.setToolTip(f"Monitor on the {which} axis (the rules' monitors and the ones you added)")
            combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
        lx = QLabel("&x:", self)
        lx.setBuddy(self.x_combo)
        ly = QLabel("&y:", self)
        ly.setBuddy(self.y_combo)
        for w in (lx, self.x_combo, ly, self.y_combo):
            row.addWidget(w)
        row.addStretch(1)
        self.hint = QLabel("Click a path to open that run", self)
        self.hint.setEnabled(False)
        row.addWidget(self.hint)
        lay.addLayout(row)
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
        lab = self.state.labels
        if lab is None or lab.empty:
            return {}
        return {str(r): (str(f) if isinstance(f, str) and f else NO_LABEL) for r, f in zip(lab["run"], lab["final_label"])}

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

    def _on_labels(self) -> None:
        if not self.isVisible():
            self.stale = True
        elif self.canvas.data is not None:
            self.canvas.set_labels(self.final_labels())

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
        if not (force or self.isVisible()):
            self.stale = True
            return
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
        data = MapData.build(st.tset, xa, ya, self.cache)
        msg = "The same monitor is on both axes: choose another for one of them." if xa.key == ya.key else ""
        if st.rules is None:
            msg = (msg + " " if msg else "") + "No rules: runs are shown without basins or automatic outcomes."
        self._message(msg)
        self.canvas.set_data(data, self.final_labels(), st.rules)
        self.canvas.set_current(st.run_id, st.frame)

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
    window.map_panel = panel
    act = dock.toggleViewAction()
    act.setText("&Map of Runs")
    act.setShortcut("Ctrl+M")
    act.setToolTip("Show every run as a path on two monitors, coloured by outcome (Ctrl+M)")
    _menu(window, "&View").addAction(act)
    return dock
