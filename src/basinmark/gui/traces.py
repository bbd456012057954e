"""Traces of the current run over time: monitors, basin band, energies, and a draggable time cursor.

Composed from pyqtgraph items in one layout: distances (Å), angles and
dihedrals (degrees, shown only when there are any), a band coloured by the
basin each frame is in, and the energies relative to t = 0.  Basin
thresholds are dashed lines in the basin's colour; t = 0 and the commit
times are marked.  The vertical cursor follows playback and can be dragged
to scrub (``time_scrubbed``).  The views compute no chemistry: rule monitor
values come from the classification, added monitors from core.geometry.
"""

from __future__ import annotations

import html
from contextlib import contextmanager
from typing import Any, Iterator, Sequence

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtGui import QColor, QPalette
from PySide6.QtWidgets import QHBoxLayout, QLabel, QVBoxLayout, QWidget

from basinmark.core.classify import signed_commit_time
from basinmark.core.geometry import measure
from basinmark.core.model import Trajectory
from basinmark.core.units import energy_factor
from basinmark.gui.colours import basin_colour, cursor_colour, energy_colour, threshold_colour, trace_colour
from basinmark.gui.kept_axis import kept_axes
from basinmark.gui.plot_theme import theme_axes, warning_colour

_KIND = {2: "distance", 3: "angle", 4: "dihedral"}


#: the drift panel's curve: total energy minus its value at t = 0, on its own axis
DRIFT = "ΔE_total drift"


def monitor_name(atoms: Sequence[int]) -> str:
    """Display name of an added monitor from its 1-based atoms, e.g. ``d(1-2)``, ``∠(1-2-3)``."""
    prefix = {2: "d", 3: "∠", 4: "φ"}[len(atoms)]
    return f"{prefix}({'-'.join(map(str, atoms))})"


#: shorter words for a time mark's label where the full one finds no room
MARK_SHORT = {"product commit": ["prod. commit", "prod."], "reactant commit": ["reac. commit", "reac."],
              "first arrival": ["1st arrival", "1st"], "commit →": ["→"], "← commit": ["←"]}


def _hide(label) -> None:
    """Hidden by the label layout (which shows it again once there is room)."""
    label.setVisible(False)
    label.hidden_by_layout = True


def _hidden_by_caller(label) -> bool:
    """Hidden by someone else than the label layout (the layout leaves such a label alone)."""
    return not label.isVisibleTo(label.parentItem()) and not getattr(label, "hidden_by_layout", False)


#: how close (scene pixels) a predicted label rectangle may come to changing its verdict (inside the plot, clear
#: of the others) before it is measured for real; arithmetic on the same numbers is off by ~1e-12 px
_NEAR = 1e-3


def _fractions(start: float, stop: float, n: int) -> list[float]:
    return list(np.linspace(start, stop, n))


def threshold_label_texts(entries, which: int) -> list[str]:
    """A threshold label's texts, longest first, as pyqtgraph label formats (``{value}`` follows a drag).

    ``entries``: (basin, description, monitor, "above"|"below") of every condition on the line; ``which``: 0 for
    a distance (Å, 0.01), 1 for an angle or dihedral (°, 0.1) -- the precision a dragged threshold is kept at.
    """
    def esc(x: str) -> str:
        return str(x).replace("{", "{{").replace("}", "}}")

    value = "{value:.2f} Å" if which == 0 else "{value:.1f}°"
    mons = list(dict.fromkeys(m for _b, _d, m, _k in entries))
    parts = [f"{esc(b)}: {esc(m)} {'>' if k == 'above' else '<'}" for b, _d, m, k in entries]
    return [f"{value}  ({'; '.join(parts)})", f"{value} {esc(', '.join(mons))}", value]


class TracesView(QWidget):
    """Monitor, basin and energy plots of one run with a shared, draggable time cursor."""

    time_scrubbed = Signal(float)
    threshold_moved = Signal(list, float)   # [(basin, monitor, "below" | "above")], new value

    def __init__(self, parent: QWidget | None = None, *, readout: bool = False) -> None:
        """``readout``: show every trace's value at the cursor beside the plots (the window's traces do)."""
        super().__init__(parent)
        self.energy_unit = "kcal/mol"
        self.curves: dict[str, pg.PlotDataItem] = {}
        self.values: dict[str, np.ndarray] = {}
        self.threshold_lines: list[pg.InfiniteLine] = []
        self.marks: dict[str, pg.InfiniteLine] = {}
        self.band_items: list[pg.BarGraphItem] = []
        self._traj: Trajectory | None = None
        self._result: Any = None
        self._rules: Any = None
        self._user: list[tuple[int, ...]] = []
        self._updating = False
        self._time = 0.0
        self.thresholds_editable = True
        self.hidden: set[str] = set()   # traces switched off from the legend (kept across runs)
        self.units: dict[str, str] = {}  # unit of each trace, for the readout
        self.drift_curve: pg.PlotDataItem | None = None  # E_total - E_total(t=0) on the drift panel
        self._threshold_items: list[tuple[Any, pg.InfiniteLine]] = []   # (plot, line) of each threshold
        self._mark_items: list[tuple[Any, Any, int]] = []               # (plot, label, side) of each time mark
        self._label_texts: dict[int, list[str]] = {}                    # label id -> its texts, longest first
        self.redraws = 0          # how many times every item was rebuilt (a load draws once: tests count it)
        # data curves by (plot, name), kept from one redraw to the next and given the new run's data (making a plot
        # item and adding it to a plot was most of a redraw: 7 curves ~12 ms of ~26, cProfile); see _curve
        self._live: dict[tuple[int, str], tuple[Any, pg.PlotDataItem]] = {}
        self._spare: dict[tuple[int, str], tuple[Any, pg.PlotDataItem]] = {}
        self._energy_axes_unit = ""   # the energy unit the axis labels were written for
        self._held = 0            # inside held(): redraw() waits for the end
        self._frozen = 0          # inside held(frozen=True): the plots are not painted either
        self._pending: bool | None = None   # keep_view of the redraw waiting (None: none waits)
        self._layout_timer = QTimer(self)
        self._layout_timer.setSingleShot(True)
        self._layout_timer.setInterval(25)
        self._layout_timer.timeout.connect(self.layout_labels)

        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(0)
        self.note = QLabel(self)
        self.note.setWordWrap(True)
        self.note.setVisible(False)
        self.note.setObjectName("traceNote")
        lay.addWidget(self.note)
        # our own legend above the plots: pyqtgraph's in-plot legends cover data and, offscreen,
        # raise errors when the view is deleted
        self.legend = QLabel(self)
        self.legend.setTextFormat(Qt.TextFormat.RichText)
        self.legend.setWordWrap(True)
        self.legend.setContentsMargins(8, 2, 8, 2)
        self.legend.setToolTip("Click a name to hide or show its trace")
        self.legend.linkActivated.connect(self._legend_clicked)
        lay.addWidget(self.legend)
        row = QHBoxLayout()
        row.setContentsMargins(0, 0, 0, 0)
        row.setSpacing(0)
        lay.addLayout(row, 1)
        self.glw = pg.GraphicsLayoutWidget(self)
        row.addWidget(self.glw, 1)
        # every trace's value at the cursor, with units, beside the plots
        self.readout = QLabel(self)
        self.readout.setObjectName("traceReadout")
        self.readout.setTextFormat(Qt.TextFormat.RichText)
        self.readout.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        self.readout.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.readout.setContentsMargins(6, 6, 6, 6)
        self.readout.setWordWrap(True)
        self.readout.setFixedWidth(150)  # narrow: the plots keep the width on a laptop screen
        row.addWidget(self.readout)
        self.readout.setVisible(readout)
        self.p_dist = self.glw.addPlot(row=0, col=0, axisItems=kept_axes())
        self.p_angle = self.glw.addPlot(row=1, col=0, axisItems=kept_axes())
        self.p_band = self.glw.addPlot(row=2, col=0, axisItems=kept_axes())
        self.p_energy = self.glw.addPlot(row=3, col=0, axisItems=kept_axes())
        # the total energy's deviation from t = 0 on its own axis: a drift of a few kcal/mol stays visible
        # beside kinetic and potential swings of hundreds
        self.p_drift = self.glw.addPlot(row=4, col=0, axisItems=kept_axes())
        self.plots = (self.p_dist, self.p_angle, self.p_band, self.p_energy, self.p_drift)
        self.p_dist.setLabel("left", "distance", units="Å")
        self.p_angle.setLabel("left", "angle", units="°")
        self.p_drift.setLabel("bottom", "time", units="fs")
        self.p_drift.setMaximumHeight(110)
        self.p_band.setMaximumHeight(38)
        self.p_band.hideAxis("left")
        self.p_band.setMouseEnabled(x=True, y=False)
        self.p_band.setYRange(0, 1, padding=0)
        self.p_band.getAxis("left").setWidth(0)
        for p in self.plots:
            p.showGrid(x=p is not self.p_band, y=p is not self.p_band, alpha=0.18)
            # the units named are the units shown: no automatic SI prefix ("time (kfs)" for a run of a few ps), and
            # no label text laid out again at every change of range (a QTextDocument per axis; seen at the end of a
            # load of 10,000 runs, tests/test_gui_trace_axes.py)
            for side in ("left", "bottom"):
                p.getAxis(side).enableAutoSIPrefix(False)
            p.getAxis("left").setWidth(58)
            if p is not self.p_dist:
                p.setXLink(self.p_dist)
            if p is not self.p_drift:
                p.getAxis("bottom").setStyle(showValues=False)
        self.p_band.getAxis("left").setWidth(58)
        self.p_band.showAxis("left")
        self.p_band.getAxis("left").setStyle(showValues=False)
        self.p_band.getAxis("left").setTicks([[]])
        self.cursors: list[pg.InfiniteLine] = []
        for p in self.plots:
            line = pg.InfiniteLine(0.0, angle=90, movable=True)
            line.setZValue(50)
            line.sigPositionChanged.connect(self._cursor_moved)
            p.addItem(line, ignoreBounds=True)
            self.cursors.append(line)
        self.apply_palette()
        self.p_angle.setVisible(False)
        for p in (self.p_dist, self.p_angle):  # zoom, pan and resize move labels: lay them out again
            p.getViewBox().sigRangeChanged.connect(self._schedule_layout)
            p.getViewBox().sigResized.connect(self._schedule_layout)

    # --- look -----------------------------------------------------------------------------
    def apply_palette(self) -> None:
        """Background, axes and cursor from the Qt palette (light or dark)."""
        pal = self.palette()
        base, text = pal.color(QPalette.ColorRole.Base), pal.color(QPalette.ColorRole.Text)
        self.glw.setBackground(base)
        for p in self.plots:
            theme_axes(p, text)
        for c in self.cursors:
            c.setPen(pg.mkPen(cursor_colour(), width=2))
            c.setHoverPen(pg.mkPen(cursor_colour(), width=4))
        warn = warning_colour(base)
        self.note.setStyleSheet(f"QLabel#traceNote {{ color: {warn.name()}; font-weight: bold; padding: 3px 6px; }}")

    def changeEvent(self, event) -> None:  # noqa: N802
        if event.type() == event.Type.PaletteChange:
            self.apply_palette()
        super().changeEvent(event)

    # --- data -----------------------------------------------------------------------------
    def set_energy_unit(self, unit: str) -> None:
        energy_factor(unit)  # raises on an unknown unit
        self.energy_unit = unit
        self._draw_energies()

    def set_run(self, traj: Trajectory | None, result: Any = None, rules: Any = None,
                user_monitors: Sequence[tuple[int, ...]] = (), keep_view: bool = False) -> None:
        same = traj is not None and traj is self._traj
        self._traj, self._result, self._rules = traj, result, rules
        self._user = [tuple(m) for m in user_monitors]
        self.redraw(keep_view=keep_view and same)

    def set_user_monitors(self, user_monitors: Sequence[tuple[int, ...]]) -> None:
        self._user = [tuple(m) for m in user_monitors]
        self.redraw(keep_view=True)

    @contextmanager
    def held(self, frozen: bool = False) -> Iterator[None]:
        """Several changes (run, rules, monitors) that each redraw the traces draw them once, at the end (the turn
        that ends a load changed all three and rebuilt every plot item three times).  ``frozen``: nor are the plots
        painted meanwhile (what they show is about to be drawn anew: a layout change, the banner's, painted the old
        plots again, 52 ms at 10,000 runs); painted once the last frozen hold ends."""
        self._held += 1
        if frozen:
            self._frozen += 1
            if self._frozen == 1:
                self.glw.setUpdatesEnabled(False)
        try:
            yield
        finally:
            self._held -= 1
            if frozen:
                self._frozen -= 1
            if not self._held and self._pending is not None:
                keep, self._pending = self._pending, None
                self.redraw(keep_view=keep)
            if frozen and not self._frozen:
                self.glw.setUpdatesEnabled(True)   # (Qt paints the whole view again)

    def redraw(self, keep_view: bool = False) -> None:
        """Rebuild every item; ``keep_view`` keeps the zoom (else the whole run is shown)."""
        if self._held:  # the view is kept only when every change held back would have kept it
            self._pending = keep_view if self._pending is None else (self._pending and keep_view)
            return
        self.redraws += 1
        self._recycle()
        kept = {id(item) for _p, item in self._spare.values()}
        for p in self.plots:
            for item in list(p.listDataItems()):
                if id(item) not in kept:
                    p.removeItem(item)
        for line in self.threshold_lines + list(self.marks.values()):
            for p in self.plots:
                if line in p.items:
                    p.removeItem(line)
        for bar in self.band_items:
            self.p_band.removeItem(bar)
        self.curves.clear()
        self.values.clear()
        self.drift_curve = None
        self.threshold_lines = []
        self.marks = {}
        self._threshold_items, self._mark_items, self._label_texts = [], [], {}
        self.band_items = []
        traj = self._traj
        if traj is None:
            self._prune()
            self.note.setVisible(False)
            self.legend.setText("")
            self.units.clear()
            self.readout.setText("")
            return
        self._draw_monitors()
        self._draw_thresholds()
        self._draw_band()
        self._draw_marks()
        self._draw_energies()
        # the plots laid out now, for what this run shows or hides (the drift panel, the note): left to Qt's next turn,
        # the layout came after the first paint, and every plot was drawn twice, axes and all (35 + 71 ms at the
        # start of a 10,000-run load; one 65-69 ms paint with this)
        if self.layout() is not None:
            self.layout().activate()   # the note above the plots shown or hidden: the plots' widget resized now
        self.glw.ci.layout.activate()
        t0, t1 = traj.time_span
        if not keep_view:
            self.p_dist.setXRange(t0, t1, padding=0.02)
        for c in self.cursors:
            c.setBounds((t0, t1))
        self.set_time(float(np.clip(self._time, t0, t1)))
        self._update_legend()
        self.layout_labels()
        self._schedule_layout()  # again once the plots have their final geometry

    def _curve(self, plot, name: str, x: np.ndarray, y: np.ndarray, pen) -> pg.PlotDataItem:
        """The curve ``name`` of ``plot`` showing (x, y) with ``pen``: the previous redraw's, given these, when there
        is one, else a new one."""
        key = (id(plot), name)
        got = self._spare.pop(key, None)
        if got is None:
            item = plot.plot(x, y, pen=pen, name=name)
        else:
            item = got[1]
            item.setData(x, y)
            item.setPen(pen)
        self._live[key] = (plot, item)
        return item

    def _recycle(self, names: Sequence[str] | None = None) -> None:
        """The curves drawn so far (or those named) become spares: the next draws take them up again."""
        for key in [k for k in self._live if names is None or k[1] in names]:
            self._spare[key] = self._live.pop(key)

    def _prune(self) -> None:
        """Spares not taken up leave their plots."""
        for plot, item in self._spare.values():
            plot.removeItem(item)
        self._spare.clear()

    def _update_legend(self) -> None:
        """One entry per trace; clicking an entry hides or shows its trace (a hidden one is struck through)."""
        text = self.palette().color(QPalette.ColorRole.Text).name()
        parts = []
        for name, item in self.curves.items():
            pen = item.opts["pen"]
            colour = pen.color().name() if hasattr(pen, "color") else "#888888"
            dash = hasattr(pen, "style") and pen.style() != Qt.PenStyle.SolidLine
            mark = "╌╌" if dash else "━━"
            off = name in self.hidden
            label = f"<s>{html.escape(name)}</s>" if off else html.escape(name)
            parts.append(f'<a href="toggle:{html.escape(name)}" style="color:{text}; text-decoration:none">'
                         f'<span style="color:{colour}"><b>{mark}</b></span>&nbsp;{label}</a>')
        self.legend.setText("&nbsp;&nbsp; ".join(parts))

    def _legend_clicked(self, link: str) -> None:
        if link.startswith("toggle:"):
            name = html.unescape(link[len("toggle:"):])
            self.set_trace_visible(name, name in self.hidden)

    def set_trace_visible(self, name: str, on: bool) -> None:
        """Show or hide one trace (by its legend name); the choice holds for the next runs too."""
        (self.hidden.discard if on else self.hidden.add)(name)
        item = self.curves.get(name)
        if item is not None:
            item.setVisible(on)
        if name == "E_total" and self.drift_curve is not None:  # the drift panel follows the total energy
            self.drift_curve.setVisible(on)
        self._update_legend()
        self._update_readout()

    # --- readout ------------------------------------------------------------------------------
    def frame_index(self) -> int | None:
        """The frame under the cursor (nearest time), or None without a run."""
        traj = self._traj
        if traj is None or not traj.n_frames:
            return None
        return int(np.argmin(np.abs(np.asarray(traj.times) - self._time)))

    def readout_values(self) -> dict[str, tuple[float, str]]:
        """``{trace name: (value at the cursor's frame, unit)}`` of every trace shown."""
        i = self.frame_index()
        if i is None:
            return {}
        return {name: (float(vals[i]), self.units.get(name, "")) for name, vals in self.values.items()
                if i < len(vals) and name not in self.hidden}

    def _update_readout(self) -> None:
        i = self.frame_index()
        if i is None:
            self.readout.setText("")
            return
        t = float(self._traj.times[i])
        rows = [f"<b>t = {t:+.1f} fs</b><br>frame {i + 1}"]
        energies = False
        for name, (v, unit) in self.readout_values().items():
            digits = 3 if unit == "Å" else 1 if unit == "°" else 2
            value = "—" if not np.isfinite(v) else f"{v:+.{digits}f}" if unit not in ("Å", "°") else f"{v:.{digits}f}"
            energies |= name.startswith("E_")
            shown = "Δ" + name if name.startswith("E_") else name  # energies are relative to t = 0, as plotted
            # (a word joiner after the slash: "kcal/mol" was broken over two lines in the narrow readout)
            rows.append(f"{html.escape(shown)} = {value}&nbsp;{html.escape(unit).replace('/', '/&#8288;')}")
        if energies:
            rows.append("<small>ΔE: E − E(t=0)</small>")
        self.readout.setText("<br>".join(rows))

    def _draw_monitors(self) -> None:
        traj, rules, result = self._traj, self._rules, self._result
        series: list[tuple[str, int, np.ndarray, bool]] = []
        if rules is not None:
            for name, mon in rules.monitors.items():
                vals = None
                if result is not None and name in result.monitors:
                    vals = np.asarray(result.monitors[name], float)
                elif max(mon.indices) < traj.n_atoms:
                    vals = measure(traj.positions, mon.indices)
                if vals is not None:
                    series.append((name, len(mon.atoms), vals, False))
        for atoms in self._user:
            if max(atoms) <= traj.n_atoms:
                series.append((monitor_name(atoms), len(atoms), measure(traj.positions, [a - 1 for a in atoms]),
                               True))
        has_angles = False
        for i, (name, n, vals, user) in enumerate(series):
            plot = self.p_dist if n == 2 else self.p_angle
            has_angles |= n > 2
            pen = pg.mkPen(trace_colour(i), width=2, style=Qt.PenStyle.DashDotLine if user else Qt.PenStyle.SolidLine)
            self.curves[name] = self._curve(plot, name, traj.times, vals, pen)
            self.curves[name].setVisible(name not in self.hidden)
            self.values[name] = vals
            self.units[name] = "Å" if n == 2 else "°"
        self.p_angle.setVisible(has_angles)

    def _draw_thresholds(self) -> None:
        rules = self._rules
        if rules is None:
            return
        # one line per (plot, value): several basins often share a threshold
        groups: dict[tuple[int, float], list[tuple[str, str, str, str]]] = {}
        for bname, basin in rules.basins.items():
            for cond in basin.conditions:
                mon = rules.monitors.get(cond.monitor)
                if mon is None or cond.monitor not in self.curves:
                    continue
                for value, bound in ((cond.lo, "above"), (cond.hi, "below")):
                    if value is not None and np.isfinite(value):
                        key = (0 if len(mon.atoms) == 2 else 1, round(float(value), 9))
                        groups.setdefault(key, []).append((bname, cond.describe(), cond.monitor, bound))
        text_colour = self.palette().color(QPalette.ColorRole.Text)
        label_fill = QColor(self.palette().color(QPalette.ColorRole.Base))
        label_fill.setAlpha(190)
        for (which, value), entries in groups.items():
            plot = self.p_dist if which == 0 else self.p_angle
            # tied to its trace: the trace's own colour when one monitor owns the line, else neutral grey
            # (never a basin's colour: outcome colours are for outcomes)
            mons = list(dict.fromkeys(m for _b, _d, m, _k in entries))
            colour = (self.curves[mons[0]].opts["pen"].color() if len(mons) == 1 else threshold_colour())
            by_basin: dict[str, list[str]] = {}
            for b, d, _m, _k in entries:
                by_basin.setdefault(b, []).append(d)
            text = "; ".join(f"{b}: {', '.join(ds)}" for b, ds in by_basin.items())
            line = pg.InfiniteLine(value, angle=0, movable=self.thresholds_editable,
                                   pen=pg.mkPen(colour, width=1.3, style=Qt.PenStyle.DashLine))
            # the label shows the value with its unit (following a drag); laid out by layout_labels
            label = pg.InfLineLabel(line, text="", position=0.02, color=text_colour, fill=pg.mkBrush(label_fill),
                                    anchors=[(0, 1), (0, 1)])
            line.label = label
            self._label_texts[id(label)] = threshold_label_texts(entries, which)
            label.setFormat(self._label_texts[id(label)][0])
            line.setToolTip(text + ("\nDrag to move this threshold; the set is classified again."
                                    if self.thresholds_editable else ""))
            line.setHoverPen(pg.mkPen(colour, width=3, style=Qt.PenStyle.DashLine))
            targets = [(b, m, k) for b, _d, m, k in entries]
            line.sigPositionChangeFinished.connect(
                lambda ln, tg=targets: self.threshold_moved.emit(list(tg), float(ln.value())))
            line.sigPositionChanged.connect(self._schedule_layout)
            plot.addItem(line, ignoreBounds=True)
            self.threshold_lines.append(line)
            self._threshold_items.append((plot, line))

    # --- label layout --------------------------------------------------------------------------
    def threshold_labels(self, plot) -> list:
        """The labels of the threshold lines drawn in ``plot``."""
        return [line.label for p, line in self._threshold_items if p is plot]

    def mark_labels(self, plot) -> list:
        """The labels of the time marks (TS, commits) drawn in ``plot``."""
        return [label for p, label, _side in self._mark_items if p is plot]

    def _schedule_layout(self, *_args) -> None:
        self._layout_timer.start()

    def layout_labels(self) -> None:
        """Place every label so that none overlaps another and each lies inside its plot.

        Thresholds first, from the top: each tries its full text, then shorter ones (value, unit and monitor;
        value and unit), above then below its line, sliding along it; then the time marks (TS, commits), stepping
        down their line on either side.  A label that fits nowhere is hidden (the line's tooltip still says
        everything), as is the label of a line outside the plot's range.  Our own
        placement: pyqtgraph places each label alone, so labels of close thresholds printed over each other.
        """
        for plot in (self.p_dist, self.p_angle):
            if not plot.isVisible():
                continue
            box = plot.getViewBox().sceneBoundingRect().adjusted(0.5, 0.5, -0.5, -0.5)
            if box.width() < 4 or box.height() < 4:
                continue
            placed: list = []
            lo, hi = plot.getViewBox().viewRange()[1]
            items = sorted((line for p, line in self._threshold_items if p is plot), key=lambda ln: -ln.value())
            for line in items:
                if _hidden_by_caller(line.label):  # e.g. a movie panel drops threshold text: left as it is
                    continue
                if not lo <= line.value() <= hi:  # off the plot: nothing to label
                    _hide(line.label)
                    continue
                texts = self._label_texts.get(id(line.label), [line.label.format])
                self._place(line.label, texts, [(0, 1), (0, 0)], _fractions(0.01, 0.97, 25), box, placed)
            for p, label, side in self._mark_items:
                if p is plot and not _hidden_by_caller(label):  # written on its side of the line (left of a negative time), else the other side
                    sides = [(1, 0), (0, 0)] if side < 0 else [(0, 0), (1, 0)]
                    texts = self._label_texts.get(id(label), [label.format])
                    self._place(label, texts, sides, _fractions(0.98, 0.02, 40), box, placed)

    @staticmethod
    def _place(label, texts, anchors, fractions, box, placed) -> bool:
        """The first (text, anchor, fraction) whose rectangle lies inside ``box`` and clear of ``placed``, in the
        order tried; else the label is hidden.  ``placed`` gets the rectangle (with a margin).

        A label's scene rectangle moves linearly with its fraction along the line (pyqtgraph puts it at
        ``p1 + f (p2 - p1)`` and only translates the text), so one measurement per text and anchor plus the step
        per unit of fraction (measured once) give every candidate's rectangle by arithmetic.  Trying each
        candidate through Qt (a move and a measurement each, up to 150 per label) was most of the time it took to
        show a run.  A candidate whose verdict lies within :data:`_NEAR` pixels of changing is measured for real,
        and the one kept always is, so the placements are those of trying every candidate through Qt
        (tests/test_gui_trace_label_speed.py compares them)."""
        label.setVisible(True)
        label.hidden_by_layout = False
        f = np.asarray(fractions, dtype=float)
        bx0, by0, bx1, by1 = box.left(), box.top(), box.right(), box.bottom()
        if placed:
            q = np.array([(r.left(), r.top(), r.right(), r.bottom()) for r in placed], dtype=float)
        else:
            q = np.zeros((0, 4))
        step = None   # the rectangle's movement (x, y) per unit of fraction: the same for every text and anchor

        def fits(r) -> bool:
            return box.contains(r) and not any(r.intersects(p) for p in placed)

        for text in texts:
            if label.format != text:
                label.setFormat(text)
            for anchor in anchors:
                label.anchors = [anchor, anchor]
                label.setPosition(f[0])
                r0 = label.sceneBoundingRect()
                if fits(r0):
                    placed.append(r0.adjusted(-2, -1, 2, 1))
                    return True
                if f.size < 2:
                    continue
                if step is None:
                    label.setPosition(f[-1])
                    r1 = label.sceneBoundingRect()
                    span = f[-1] - f[0]
                    step = ((r1.left() - r0.left()) / span, (r1.top() - r0.top()) / span)
                sx, sy = step
                w, h = r0.width(), r0.height()
                left = r0.left() + (f - f[0]) * sx
                top = r0.top() + (f - f[0]) * sy
                right, bottom = left + w, top + h
                # QRectF.contains: every edge inside or on the box's; QRectF.intersects: an overlap of positive
                # width and height (rectangles that only touch do not intersect)
                inside = np.minimum.reduce([left - bx0, bx1 - right, top - by0, by1 - bottom])
                if q.size:
                    overlap = np.minimum.reduce([q[:, 2][None] - left[:, None], right[:, None] - q[:, 0][None],
                                                 q[:, 3][None] - top[:, None], bottom[:, None] - q[:, 1][None]])
                    clash = overlap.max(axis=1)   # the deepest overlap with any placed label
                    near_clash = (np.abs(overlap) <= _NEAR).any(axis=1)
                else:
                    clash = np.full(f.size, -np.inf)
                    near_clash = np.zeros(f.size, dtype=bool)
                near = (np.abs(inside) <= _NEAR) | near_clash | (w <= 0) | (h <= 0)
                surely_not = ~near & ((inside < 0) | (clash > 0))
                surely_not[0] = True   # measured above
                for i in np.flatnonzero(~surely_not):
                    label.setPosition(f[i])
                    r = label.sceneBoundingRect()
                    if fits(r):
                        placed.append(r.adjusted(-2, -1, 2, 1))
                        return True
        label.anchors = [anchors[-1], anchors[-1]]
        label.setPosition(f[-1])
        label.setFormat(texts[0])
        _hide(label)
        return False

    def _draw_band(self) -> None:
        traj, result, rules = self._traj, self._result, self._rules
        if result is None or rules is None:
            return
        track = np.asarray(result.basin_track)
        times = traj.times
        if track.size != times.size or not track.size:
            return
        edges = np.concatenate([[times[0]], 0.5 * (times[1:] + times[:-1]), [times[-1]]])
        change = np.nonzero(np.diff(track))[0] + 1
        starts = np.concatenate([[0], change])
        stops = np.concatenate([change, [track.size]])
        names = rules.basin_names
        for b in np.unique(track):
            if b < 0:
                continue
            sel = track[starts] == b
            x0 = edges[starts[sel]]
            w = edges[stops[sel]] - x0
            colour = basin_colour(names[b], names, rules.reactant)
            bar = pg.BarGraphItem(x0=x0, width=w, y0=np.zeros(x0.size), height=np.ones(x0.size),
                                  brush=colour, pen=pg.mkPen(None))
            bar.setToolTip(f"frames in basin {names[b]}")
            self.p_band.addItem(bar)
            self.band_items.append(bar)
        self.p_band.setYRange(0, 1, padding=0)
        self.p_band.setLabel("left", "basin")

    def _mark(self, key: str, t: float, text: str, style: Qt.PenStyle, position: float = 0.95,
              anchor: tuple[float, float] = (0, 0)) -> None:
        colour = self.palette().color(QPalette.ColorRole.Text)
        for p in self.plots:
            line = pg.InfiniteLine(t, angle=90, movable=False, pen=pg.mkPen(colour, width=1, style=style))
            p.addItem(line, ignoreBounds=True)
            self.threshold_lines.append(line)
        top = self.threshold_lines[-len(self.plots)]
        label = pg.InfLineLabel(top, text=text, position=position, color=colour, anchors=[anchor, anchor])
        self.marks[key] = top
        top.label = label
        self._mark_items.append((self.plots[0], label, -1 if anchor[0] == 1 else 1))
        self._label_texts[id(label)] = [text] + MARK_SHORT.get(text, [])
        label.setToolTip(text)

    def _draw_marks(self) -> None:
        self._mark("ts", 0.0, "TS", Qt.PenStyle.SolidLine)
        result = self._result
        if result is None:
            return
        # commit marks named by the basin they lead into (docs/commit-times.md); a mark at a negative time is
        # written to the left of its line, so marks on the two sides never print over each other
        ends = {}
        for side in ("product", "reactant"):
            end = getattr(result, f"{side}_end", None)
            t = signed_commit_time(end, getattr(result, f"{side}_final_entry_fs", None))
            if t is not None:
                ends[end] = side
                self._mark("commit" if side == "product" else "reactant_commit", t, f"{side} commit",
                           Qt.PenStyle.DotLine, 0.8, anchor=(1, 0) if t < 0 else (0, 0))
                first = signed_commit_time(end, getattr(result, f"{side}_first_arrival_fs", None))
                if first is not None and abs(first - t) > 1e-6:
                    self._mark(f"{side}_first_arrival", first, "first arrival", Qt.PenStyle.DashDotLine, 0.65,
                               anchor=(1, 0) if first < 0 else (0, 0))
        # an end that leads into neither a single product nor a single reactant (a recrossing) keeps its own mark
        for end, key, text, anchor in (("forward", "forward_commit", "commit →", (0, 0)),
                                       ("backward", "backward_commit", "← commit", (1, 0))):
            t = getattr(result, f"{end}_commit_time_fs", None)
            if end not in ends and t is not None and np.isfinite(t):
                self._mark(key, float(t), text, Qt.PenStyle.DotLine, 0.8, anchor=anchor)

    def _draw_energies(self) -> None:
        traj = self._traj
        names = ("E_pot", "E_kin", "E_total")
        for name in names:
            self.curves.pop(name, None)
            self.values.pop(name, None)
        self._recycle([*names, DRIFT])
        self.drift_curve = None
        if self._energy_axes_unit != self.energy_unit:   # a label is a text document laid out: set when it changes
            self._energy_axes_unit = self.energy_unit
            self.p_energy.setLabel("left", "ΔE", units=None)
            self.p_energy.getAxis("left").setLabel(f"ΔE / {self.energy_unit}")
            # short, on two lines and without an SI prefix: the drift panel is low (its title was cut at 1366×768)
            drift_axis = self.p_drift.getAxis("left")
            # (pyqtgraph still scales a unit-less axis spanning less than 1 when its prefix is switched off: no range
            # may take a prefix at all)
            drift_axis.setLabel(f"drift<br>{self.energy_unit}", siPrefixEnableRanges=(), **{"font-size": "8pt"})
            drift_axis.enableAutoSIPrefix(False)
            drift_axis.setToolTip(f"E_total − E_total(t=0), in {self.energy_unit}: the total energy's drift on its "
                                  "own scale")
        if traj is None:
            self._prune()
            self.p_drift.setVisible(False)
            return
        scale = 1.0 / energy_factor(self.energy_unit)
        i0 = traj.ts_index
        for key, name in (("potential", "E_pot"), ("kinetic", "E_kin"), ("total", "E_total")):
            e = traj.energies.get(key)
            if e is None:
                continue
            rel = (e - e[i0]) * scale
            width = 2.4 if key == "total" else 1.4
            self.curves[name] = self._curve(self.p_energy, name, traj.times, rel,
                                            pg.mkPen(energy_colour(key), width=width))
            self.curves[name].setVisible(name not in self.hidden)
            self.values[name] = rel
            self.units[name] = self.energy_unit
            if key == "total":  # the same numbers on their own scale (the drift panel)
                self.drift_curve = self._curve(self.p_drift, DRIFT, traj.times, rel,
                                               pg.mkPen(energy_colour(key), width=1.6))
                self.drift_curve.setVisible(name not in self.hidden)
        self._prune()
        self.p_drift.setVisible(self.drift_curve is not None)
        self._update_note()
        self._update_legend()
        self._update_readout()

    def _update_note(self) -> None:
        traj, result, rules = self._traj, self._result, self._rules
        msgs = []
        if traj is not None and not traj.energies:
            msgs.append("This run has no energies: its energy conservation cannot be checked.")
        flags = [] if result is None else list(result.flags)
        if "energy_drift" in flags:
            drift = traj.energy_drift() if traj is not None else None
            limit = getattr(getattr(rules, "flags", None), "max_energy_drift_ev", None)
            scale = 1.0 / energy_factor(self.energy_unit)
            text = "Energy check failed: the total energy drifts"
            if drift is not None:
                text += f" by {drift * scale:.2f} {self.energy_unit}"
            if limit is not None:
                text += f" (limit {limit * scale:.2f} {self.energy_unit})"
            msgs.append(text + "; treat this run's outcome with caution.")
        self.note.setText("\n".join(msgs))
        self.note.setVisible(bool(msgs))

    # --- time cursor ------------------------------------------------------------------------
    @property
    def time(self) -> float:
        return self._time

    def set_time(self, t: float) -> None:
        """Move the cursor (playback); does not emit ``time_scrubbed``."""
        self._updating = True
        try:
            self._time = float(t)
            for c in self.cursors:
                c.setValue(self._time)
        finally:
            self._updating = False
        self._update_readout()

    def _cursor_moved(self, line: pg.InfiniteLine) -> None:
        if self._updating:
            return
        t = float(line.value())
        self._updating = True
        try:
            for c in self.cursors:
                if c is not line:
                    c.setValue(t)
        finally:
            self._updating = False
        self._time = t
        self._update_readout()
        self.time_scrubbed.emit(t)
