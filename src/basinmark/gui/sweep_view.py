"""Sensitivity: the product ratio against one threshold, with its interval band.

The numbers come from :func:`basinmark.core.sweep.sweep_threshold` (run in a Python thread; a newer
request makes an older result be dropped).  The plot marks the threshold in force; values where the
core's notes say the ratio is thin or the basins overlap are listed in plain words beside it.
"""

from __future__ import annotations

import threading

import numpy as np
import pandas as pd
import pyqtgraph as pg
from PySide6.QtCore import QObject, Qt, Signal
from PySide6.QtGui import QColor, QKeySequence, QPalette
from PySide6.QtWidgets import (QComboBox, QDockWidget, QDoubleSpinBox, QFormLayout, QHBoxLayout, QLabel,
                               QPushButton, QSpinBox, QVBoxLayout, QWidget)

from basinmark.core.rules import BOUNDS, MONITOR_UNITS
from basinmark.gui.band import band_item
from basinmark.gui.colours import trace_colour
from basinmark.gui.movie import find_menu
from basinmark.gui.kept_axis import kept_axes
from basinmark.gui.plot_theme import theme_axes, warning_colour


class _SweepWorker(QObject):
    done = Signal(object)   # {"generation", "table", "error"}

    def __init__(self, parent=None) -> None:
        super().__init__(parent)
        self.generation = 0
        self.thread: threading.Thread | None = None

    def start(self, tset, rules, basin, monitor, bound, values, a, b) -> int:
        from basinmark.core.sweep import sweep_threshold

        self.generation += 1
        gen = self.generation

        def work() -> None:
            out = {"generation": gen, "table": None, "error": ""}
            try:
                out["table"] = sweep_threshold(tset, rules, basin, monitor, bound, values, a=a, b=b)
            except Exception as exc:  # RulesError and anything else: shown, never raised into Qt
                out["error"] = str(exc)
            self.done.emit(out)

        self.thread = threading.Thread(target=work, name="basinmark-sweep", daemon=True)
        self.thread.start()
        return gen

    def wait(self, timeout: float = 30.0) -> None:
        if self.thread is not None:
            self.thread.join(timeout)


class SweepView(QWidget):
    """Choose basin, monitor, bound, range and steps; see ratio a/b against the threshold."""

    finished = Signal()

    def __init__(self, state, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.state = state
        self.table: pd.DataFrame | None = None
        self.worker = _SweepWorker(self)
        self.worker.done.connect(self._on_done)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(6, 4, 6, 4)
        form = QFormLayout()
        self.basin, self.monitor, self.bound = QComboBox(self), QComboBox(self), QComboBox(self)
        self.bound.addItems(list(BOUNDS))
        self.basin.setToolTip("The basin whose condition is varied")
        self.monitor.setToolTip("The monitor of that condition")
        self.bound.setToolTip("below: the upper limit · above: the lower limit")
        row = QHBoxLayout()
        for w in (self.basin, self.monitor, self.bound):
            row.addWidget(w, 1)
        form.addRow("Threshold", row)
        self.start, self.stop = QDoubleSpinBox(self), QDoubleSpinBox(self)
        for s in (self.start, self.stop):
            s.setRange(-360.0, 1e4)
            s.setDecimals(3)
            s.setSingleStep(0.05)
        self.steps = QSpinBox(self)
        self.steps.setRange(2, 200)
        self.steps.setValue(21)
        self.steps.setToolTip("How many evenly spaced values, ends included")
        row = QHBoxLayout()
        row.addWidget(self.start, 1)
        row.addWidget(QLabel("to", self))
        row.addWidget(self.stop, 1)
        form.addRow("Range", row)
        form.addRow("Steps", self.steps)   # (on the range's row it scrolled a narrow view sideways)
        self.prod_a, self.prod_b = QComboBox(self), QComboBox(self)
        row = QHBoxLayout()
        row.addWidget(self.prod_a, 1)
        row.addWidget(QLabel(":", self))
        row.addWidget(self.prod_b, 1)
        form.addRow("Ratio", row)
        lay.addLayout(form)
        self.run_button = QPushButton("Run Sweep", self)
        self.run_button.setToolTip("Classify the set at every value and plot the ratio (in the background)")
        lay.addWidget(self.run_button, 0, Qt.AlignmentFlag.AlignLeft)
        self.plot = pg.PlotWidget(self, axisItems=kept_axes())
        self.plot.showGrid(x=True, y=True, alpha=0.2)
        self.plot.setMinimumHeight(220)
        lay.addWidget(self.plot, 1)
        self.note = QLabel(self)
        self.note.setWordWrap(True)
        self.note.setObjectName("sweepNote")
        lay.addWidget(self.note)
        self.status = QLabel(self)
        self.status.setWordWrap(True)
        lay.addWidget(self.status)
        self.basin.currentIndexChanged.connect(self._basin_changed)
        self.monitor.currentIndexChanged.connect(self._target_changed)
        self.bound.currentIndexChanged.connect(self._target_changed)
        self.run_button.clicked.connect(self.run)
        state.rules_changed.connect(self.refresh_choices)
        state.set_changed.connect(self.clear)
        self._apply_palette()
        self.refresh_choices()

    def _apply_palette(self) -> None:
        pal = self.palette()
        base, text = pal.color(QPalette.ColorRole.Base), pal.color(QPalette.ColorRole.Text)
        self.plot.setBackground(base)
        theme_axes(self.plot, text)
        warn = warning_colour(base)
        self.note.setStyleSheet(f"QLabel#sweepNote {{ color: {warn.name()}; }}")

    def changeEvent(self, event) -> None:  # noqa: N802
        if event.type() == event.Type.PaletteChange:
            self._apply_palette()
        super().changeEvent(event)

    # --- choices ----------------------------------------------------------------------------
    def refresh_choices(self) -> None:
        rules = self.state.rules
        for combo, items in ((self.basin, rules.basin_names if rules else []),
                             (self.prod_a, rules.products if rules else []),
                             (self.prod_b, rules.products if rules else [])):
            keep = combo.currentText()
            combo.blockSignals(True)
            combo.clear()
            combo.addItems(items)
            if keep in items:
                combo.setCurrentText(keep)
            combo.blockSignals(False)
        if rules is not None and len(rules.products) > 1 and self.prod_a.currentText() == self.prod_b.currentText():
            self.prod_a.setCurrentIndex(0)
            self.prod_b.setCurrentIndex(1)
        self.run_button.setEnabled(rules is not None and len(rules.products) >= 2)
        if rules is not None and len(rules.products) < 2:
            self.status.setText("A ratio needs two product basins; these rules have fewer.")
        self._basin_changed()

    def _basin_changed(self) -> None:
        rules = self.state.rules
        keep = self.monitor.currentText()
        self.monitor.blockSignals(True)
        self.monitor.clear()
        if rules is not None and self.basin.currentText() in rules.basins:
            basin = rules.basins[self.basin.currentText()]
            own = [c.monitor for c in basin.conditions]
            self.monitor.addItems(own + [m for m in rules.monitors if m not in own])
            if keep in rules.monitors:
                self.monitor.setCurrentText(keep)
        self.monitor.blockSignals(False)
        self._target_changed()

    def current_value(self) -> float | None:
        """The threshold in force for the chosen basin, monitor and bound (None if the condition has none)."""
        rules = self.state.rules
        try:
            cond = rules.threshold_target(self.basin.currentText(), self.monitor.currentText(),
                                          self.bound.currentText())
        except Exception:
            return None
        if cond is None:
            return None
        return cond.hi if self.bound.currentText() == "below" else cond.lo

    def unit(self) -> str:
        rules = self.state.rules
        mon = rules.monitors.get(self.monitor.currentText()) if rules is not None else None
        return {"Å": "Å", "deg": "°"}.get(MONITOR_UNITS.get(mon.kind, ""), "") if mon is not None else ""

    def _target_changed(self) -> None:
        rules = self.state.rules
        if rules is not None and self.bound.currentText() == "below":
            cond = rules.basins.get(self.basin.currentText())
            cond = cond.condition(self.monitor.currentText()) if cond is not None else None
            if cond is not None and cond.kind == "above":
                self.bound.blockSignals(True)
                self.bound.setCurrentText("above")
                self.bound.blockSignals(False)
        elif rules is not None:
            cond = rules.basins.get(self.basin.currentText())
            cond = cond.condition(self.monitor.currentText()) if cond is not None else None
            if cond is not None and cond.kind == "below":
                self.bound.blockSignals(True)
                self.bound.setCurrentText("below")
                self.bound.blockSignals(False)
        v = self.current_value()
        unit = self.unit()
        for s in (self.start, self.stop):
            s.setSuffix(f" {unit}" if unit else "")
        if v is not None:
            span = max(abs(v) * 0.2, 0.1)
            self.start.setValue(v - span)
            self.stop.setValue(v + span)

    # --- running ----------------------------------------------------------------------------
    def run(self) -> int | None:
        """Start the sweep in the background; returns its generation (None if it cannot run)."""
        from basinmark.core.sweep import sweep_values

        st = self.state
        if st.tset is None or st.rules is None:
            self.status.setText("Open a set with rules first.")
            return None
        a, b = self.prod_a.currentText(), self.prod_b.currentText()
        if a == b:
            self.status.setText("Choose two different products for the ratio.")
            return None
        values = sweep_values(self.start.value(), self.stop.value(), self.steps.value())
        self.status.setText(f"Classifying {len(st.tset)} runs at {len(values)} values…")
        return self.worker.start(st.tset, st.rules, self.basin.currentText(), self.monitor.currentText(),
                                 self.bound.currentText(), values, a, b)

    def clear(self) -> None:
        """Drop the sweep shown (it belonged to the set open before)."""
        self.worker.generation += 1  # a sweep still running for the old set is then ignored
        self.table = None
        self.plot.clear()
        self.status.setText("Choose a basin, monitor and range, then sweep.")

    def _on_done(self, out: dict) -> None:
        if out["generation"] != self.worker.generation:
            return
        if out["error"]:
            self.table = None
            self.status.setText(f"Sweep not made: {out['error']}")
            self.finished.emit()
            return
        self.table = out["table"]
        self._draw()
        self.finished.emit()

    def _draw(self) -> None:
        df = self.table
        attrs = df.attrs
        self.plot.clear()
        pal = self.palette()
        colour = trace_colour(0)
        x = df["value"].to_numpy(float)
        y, lo, hi = (df[c].to_numpy(float) for c in ("ratio", "ratio_lo", "ratio_hi"))
        ok = np.isfinite(y) & np.isfinite(lo) & np.isfinite(hi)
        if ok.sum() >= 2:
            band = QColor(colour)
            band.setAlpha(60)
            self.plot.addItem(band_item(x[ok], lo[ok], hi[ok], pg.mkBrush(band)))
            self.plot.addItem(pg.PlotDataItem(x[ok], lo[ok], pen=pg.mkPen(band)))
            self.plot.addItem(pg.PlotDataItem(x[ok], hi[ok], pen=pg.mkPen(band)))
        self.plot.plot(x[ok], y[ok], pen=pg.mkPen(colour, width=2), symbol="o", symbolSize=5,
                       symbolBrush=colour, symbolPen=pg.mkPen(colour))
        v = self.current_value()
        if v is not None:
            line = pg.InfiniteLine(v, angle=90, movable=False,
                                   pen=pg.mkPen(pal.color(QPalette.ColorRole.Text), width=1,
                                                style=Qt.PenStyle.DashLine),
                                   label=f"in force: {v:g}",
                                   labelOpts={"position": 0.92, "color": pal.color(QPalette.ColorRole.Text)})
            self.plot.addItem(line, ignoreBounds=True)
            self.current_line = line
        unit = self.unit()
        conf = attrs.get("confidence", 0.95)
        self.plot.setLabel("bottom", f"{attrs['basin']}: {attrs['monitor']} {attrs['bound']}"
                                     + (f" / {unit}" if unit else ""))
        self.plot.setLabel("left", f"ratio {attrs['a']} : {attrs['b']}")
        from basinmark.core.sweep import MIN_RUNS_FOR_RATIO

        rough = 0
        notes = []
        for val, n in zip(df["value"], df["note"]):
            parts = [p for p in str(n or "").split("; ") if p]
            rough += any("rough guide" in p for p in parts)
            notes += [f"at {val:g}: {p}" for p in parts if "rough guide" not in p]
        if rough:
            notes.insert(0, f"At {rough} of {len(df)} values fewer than {MIN_RUNS_FOR_RATIO} runs gave "
                            f"{attrs['a']} or {attrs['b']}: there the ratio is only a rough guide.")
        missing = int((~ok).sum())
        lines = []
        if missing:
            lines.append(f"{missing} of {len(df)} values give no finite ratio or interval (a product never "
                         "forms there) and are left out of the plot.")
        if notes:
            lines += notes[:6] + ([f"… and {len(notes) - 6} more notes."] if len(notes) > 6 else [])
        self.note.setText("\n".join(lines))
        self.status.setText(f"Ratio {attrs['a']} : {attrs['b']} with its {100 * conf:g} % interval (band) "
                            f"at {len(df)} values; dashed line: the threshold in force.")

    def ratio_at_current(self) -> float | None:
        """The plotted ratio at the value in force, if that value was one of the sweep's values."""
        v = self.current_value()
        if self.table is None or v is None:
            return None
        hit = self.table[np.isclose(self.table["value"], v)]
        return None if hit.empty else float(hit["ratio"].iloc[0])


def install_sweep_dock(window) -> QDockWidget:
    """Add the Sensitivity dock (tabbed with the traces, hidden at first) and Analysis ▸ Threshold Sensitivity."""
    view = SweepView(window.state, window)
    from basinmark.gui.analysis_area import add_analysis_dock

    dock = add_analysis_dock(window, "sensitivity", "Sensitivity", view)
    show = dock.toggleViewAction()
    show.setText("Threshold &Sensitivity")
    show.setShortcut(QKeySequence("Ctrl+Shift+Y"))
    show.setToolTip("How the product ratio changes with one threshold (Ctrl+Shift+Y)")
    show.triggered.connect(lambda checked: dock.raise_() if checked else None)
    find_menu(window, "menu_analysis", "&Analysis").addAction(show)
    window.addAction(show)
    window.sweep_view = view
    window.sweep_dock = dock
    return dock

