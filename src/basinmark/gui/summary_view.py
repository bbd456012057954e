"""The summary view: outcome counts with intervals, the product ratio next to TST, convergence, timings.

Every number comes from the core: :func:`basinmark.core.summary.build_summary` (table, ratio, TST
ratio, effective ΔΔG, runs needed, convergence, warnings), :mod:`basinmark.core.timing` (commit-time
and time-gap histograms, the concerted fraction).  The view only lays them out and redraws when
labels, rules or its own settings change.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pandas as pd
import pyqtgraph as pg
from PySide6.QtCore import QEvent, Qt, QTimer, Signal
from PySide6.QtGui import QColor, QPalette
from PySide6.QtWidgets import (QAbstractItemView, QAbstractScrollArea, QApplication, QBoxLayout, QCheckBox, QComboBox,
                               QDockWidget, QDoubleSpinBox, QFrame, QGridLayout, QHBoxLayout, QHeaderView, QLabel,
                               QMainWindow, QPushButton, QSplitter, QTableWidget, QTableWidgetItem, QVBoxLayout,
                               QWidget)

from basinmark.core.cells import label_texts
from basinmark.core.errors import BasinmarkError
from basinmark.core.summary import Summary, build_summary, outside_set_warning, run_ids_of
from basinmark.core.timing import (COMMIT_DEFINITIONS, DEFAULT_COMMIT_COLUMN, commit_time_histogram,
                                   concerted_fraction, gap_mode)
from basinmark.core.tst import MAX_DDG_KCAL
from basinmark.core.units import convert_energy
from basinmark.gui.band import band_item
from basinmark.gui.colours import outcome_colour
from basinmark.gui.flow_layout import flow_row
from basinmark.gui.label_table import final_label_counts, final_label_map
from basinmark.gui.kept_axis import kept_axes
from basinmark.gui.plot_theme import theme_axes, theme_legend, warning_colour

UNITS = ("kcal/mol", "kJ/mol")
HIST_BINS = 20


def _fmt(x: float, digits: int = 3) -> str:
    if x is None or (isinstance(x, float) and math.isnan(x)):
        return "—"
    if math.isinf(x):
        return "∞" if x > 0 else "−∞"
    return f"{x:.{digits}f}"


def short_caption(warning: str, limit: int = 80) -> str:
    """The warning's first clause, cut to ``limit`` characters (a caption above the run table)."""
    first = re.split(r"\. |; | \(|, none of|(?<=\S): ", str(warning).strip(), maxsplit=1)[0].rstrip(".")
    return first if len(first) <= limit else first[:limit - 1].rstrip() + "…"


def wrap_title(text: str, limit: int = 36) -> str:
    """``text`` on lines of at most about ``limit`` characters joined by ``<br>`` (a plot title is rich text):
    broken first before a parenthesis and after a semicolon, then between words."""
    text = str(text).replace("<br>", " ")
    if len(text) <= limit:
        return text
    parts = re.split(r" (?=\()|(?<=;) ", text)
    lines: list[str] = []
    for part in parts:
        if lines and len(lines[-1]) + 1 + len(part) <= limit:
            lines[-1] += " " + part
            continue
        line = ""
        for word in part.split(" "):
            if line and len(line) + 1 + len(word) > limit:
                lines.append(line)
                line = word
            else:
                line = f"{line} {word}" if line else word
        lines.append(line)
    return "<br>".join(lines)


class WarningBox(QFrame):
    """The summary's warnings, one line each, with a button that lists the runs a warning names."""

    show_runs = Signal(tuple, str)   # run ids, caption

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setObjectName("summaryWarnings")
        self.grid = QGridLayout(self)
        self.grid.setContentsMargins(6, 4, 6, 4)
        self.grid.setVerticalSpacing(2)
        self.grid.setColumnStretch(0, 1)
        self.labels: list[QLabel] = []
        self.buttons: list[QPushButton] = []
        self.warnings: list[str] = []
        self._colour = "#b3261e"

    def set_colour(self, colour: str) -> None:
        self._colour = colour
        self.setStyleSheet(f"QFrame#summaryWarnings {{ border: 1px solid {colour}; border-radius: 3px; }} "
                           f"QLabel#summaryWarningText {{ color: {colour}; font-weight: bold; }}")

    def set_warnings(self, warnings) -> None:
        for w in self.labels + self.buttons:
            self.grid.removeWidget(w)
            w.deleteLater()
        self.labels, self.buttons, self.warnings = [], [], list(warnings)
        for i, w in enumerate(self.warnings):
            ids = run_ids_of(w)
            label = QLabel(f"⚠ {w}", self)
            label.setObjectName("summaryWarningText")
            label.setTextFormat(Qt.TextFormat.PlainText)
            label.setWordWrap(True)
            label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
            if ids:
                shown = ", ".join(ids[:12]) + (f" and {len(ids) - 12} more" if len(ids) > 12 else "")
                label.setToolTip(f"Runs: {shown}")
            button = QPushButton(f"Show {len(ids)} run{'s' if len(ids) != 1 else ''}" if ids else "No runs", self)
            button.setEnabled(bool(ids))
            button.setToolTip("List exactly these runs in the run table" if ids else
                              "This warning is about the set as a whole, not about particular runs")
            button.clicked.connect(lambda _c=False, k=i: self.activate(k))
            self.grid.addWidget(label, i, 0)
            self.grid.addWidget(button, i, 1, Qt.AlignmentFlag.AlignTop)
            label.show()   # a layout shows new children only later (queued) when the parent is visible
            button.show()
            self.labels.append(label)
            self.buttons.append(button)
        self.setVisible(bool(self.warnings))

    def activate(self, i: int) -> None:
        """Filter the run table to the runs of warning ``i``."""
        w = self.warnings[i]
        if run_ids_of(w):
            self.show_runs.emit(run_ids_of(w), short_caption(w))

    def text(self) -> str:
        return "\n".join(lab.text() for lab in self.labels)


#: at most this many points of a convergence curve are drawn (a plot a few hundred pixels wide shows no more)
DRAW_POINTS = 2000
#: ... every run of the noisy start among them
DRAW_START = 200


def _drawn_rows(conv: pd.DataFrame | None) -> pd.DataFrame | None:
    """The rows of a convergence table that are drawn: all of a short one; of a long one every row of the start,
    then evenly spaced rows, and always the last (at 10,000 runs the band through every run took 37 ms to fill)."""
    if conv is None or len(conv) <= DRAW_POINTS:
        return conv
    n = len(conv)
    rest = np.linspace(DRAW_START, n - 1, DRAW_POINTS - DRAW_START).round().astype(int)
    rows = np.unique(np.concatenate([np.arange(DRAW_START), rest, [n - 1]]))
    return conv.iloc[rows]


class SummaryPanel(QWidget):
    """Counts, ratio, TST comparison, convergence and timings of the open set's final labels."""

    updated = Signal()
    show_runs = Signal(tuple, str)   # a warning was clicked: list these runs (ids, caption)

    def __init__(self, state, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.state = state
        self.summary: Summary | None = None
        self.commit_hist: pd.DataFrame = pd.DataFrame()
        self.gap_hist: pd.DataFrame = pd.DataFrame()
        self.gap_stats: dict | None = None
        self.error = ""
        self._unit = UNITS[0]
        self.stale = True  # labels changed while hidden: summarise again when shown
        #: the plots wait for the turn after the numbers (together one turn took 88-94 ms at 10,000 runs)
        self.plots_pending = False
        self._plot_timer = QTimer(self)
        self._plot_timer.setSingleShot(True)
        self._plot_timer.setInterval(0)
        self._plot_timer.timeout.connect(self.draw_plots)
        self._build()
        st = state
        st.labels_changed.connect(self.refresh)
        st.rules_changed.connect(self.refresh)
        st.set_changed.connect(self._take_set_tst)
        st.set_changed.connect(self.refresh)
        self.apply_palette()
        self.refresh()

    # --- construction ---------------------------------------------------------------------
    def _build(self) -> None:
        outer = QVBoxLayout(self)
        outer.setContentsMargins(4, 4, 4, 4)
        self.tst_box = QCheckBox("Compare with &TST:", self)
        self.tst_box.setToolTip("Show the product ratio transition state theory predicts from a ΔΔG‡")
        self.ddg = QDoubleSpinBox(self)
        self.ddg.setRange(-MAX_DDG_KCAL, MAX_DDG_KCAL)
        self.ddg.setDecimals(3)
        self.ddg.setSingleStep(0.1)
        self.ddg.setPrefix("ΔΔG‡ = ")
        self.ddg.setToolTip("ΔΔG‡ = G‡(second) − G‡(first): positive when the first product has the lower barrier")
        self.ddg.setEnabled(False)
        # the pair the ΔΔG‡ is about, named on its own: the ratio asked may be in either order
        self.major_combo = QComboBox(self)
        self.minor_combo = QComboBox(self)
        self.major_combo.setToolTip("The product the ΔΔG‡ favours when positive")
        self.minor_combo.setToolTip("The other product: ΔΔG‡ = G‡(this one) − G‡(the first)")
        self.tst_for = QLabel("favouring", self)
        self.tst_over = QLabel("over", self)
        self.tst_barriers = QLabel(self)  # shown instead of the pair when the set states one barrier per product
        self.tst_barriers.setObjectName("tstBarriers")
        self.tst_barriers.setVisible(False)
        self._set_barriers = None  # TSTEstimate from the set's per-product barriers
        self._measured = None  # measured ratio stated by the set
        self._tst_warning = ""  # why the set's estimate cannot be used
        self.unit = QComboBox(self)
        self.unit.addItems(UNITS)
        self.unit.setToolTip("Energy unit of ΔΔG‡ and of the effective ΔΔG")
        self.temperature = QDoubleSpinBox(self)
        self.temperature.setRange(1.0, 5000.0)
        self.temperature.setDecimals(2)
        self.temperature.setValue(298.15)
        self.temperature.setSuffix(" K")
        self.temperature.setToolTip("Temperature for TST and the effective ΔΔG")
        self.half_width = QDoubleSpinBox(self)
        self.half_width.setRange(0.005, 0.45)
        self.half_width.setDecimals(3)
        self.half_width.setSingleStep(0.005)
        self.half_width.setValue(0.05)
        self.half_width.setPrefix("± ")
        self.half_width.setToolTip("Wanted half-width of the interval on the share of A among A + B; the view "
                                   "estimates how many runs that needs")
        self.a_combo = QComboBox(self)
        self.b_combo = QComboBox(self)
        for combo in (self.a_combo, self.b_combo):
            combo.setToolTip("The two products of the ratio A : B (automatic: the two with most runs)")
            combo.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
        ratio = QLabel("R&atio:", self)
        ratio.setBuddy(self.a_combo)
        colon = QLabel(":", self)
        at = QLabel("at", self)
        need = QLabel("&Runs needed for:", self)
        need.setBuddy(self.half_width)
        # the settings wrap onto further rows in a narrow view (on one row they needed 1150 px and the view
        # scrolled sideways at 1366×768); words stay beside the box they are about
        def group(*widgets) -> QWidget:
            holder = QWidget(self)
            hl = QHBoxLayout(holder)
            hl.setContentsMargins(0, 0, 0, 0)
            hl.setSpacing(4)
            for w in widgets:
                w.setParent(holder)
                hl.addWidget(w)
            return holder

        self._pair_groups = (group(self.tst_for, self.major_combo), group(self.tst_over, self.minor_combo))
        self.controls = flow_row(self, (group(ratio, self.a_combo, colon, self.b_combo), self.tst_box, self.ddg,
                                        *self._pair_groups, self.tst_barriers,
                                        group(self.unit, at, self.temperature), group(need, self.half_width)),
                                 h_spacing=10, v_spacing=2)
        outer.addWidget(self.controls)

        self.warning_box = WarningBox(self)
        self.warning_box.show_runs.connect(self.show_runs)
        self.warnings = self.warning_box  # text() and visibility as before
        self.warning_box.setVisible(False)
        outer.addWidget(self.warning_box)

        split = QSplitter(Qt.Orientation.Vertical, self)
        top = QWidget(split)
        tl = QBoxLayout(QBoxLayout.Direction.LeftToRight, top)
        tl.setContentsMargins(0, 0, 0, 0)
        self._top_layout = tl
        self.table = QTableWidget(0, 5, top)
        self.table.setHorizontalHeaderLabels(["outcome", "runs", "fraction", "95 % interval", "all at once"])
        self.table.verticalHeader().setVisible(False)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        self.table.setToolTip("Counts and fractions of the final labels; 'all at once' are simultaneous "
                              "intervals that hold for every outcome together")
        # each product's share among the reactive runs (three or more products, or TST barriers)
        self.shares_table = QTableWidget(0, 5, top)
        self.shares_table.setObjectName("summaryShares")
        self.shares_table.setHorizontalHeaderLabels(["product", "runs", "share of reactive", "all products at once",
                                                     "TST share"])
        self.shares_table.verticalHeader().setVisible(False)
        self.shares_table.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.shares_table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        self.shares_table.setToolTip("Each product's share among the runs that reached a product, with Goodman "
                                     "simultaneous intervals that hold for every product together")
        self.shares_table.setVisible(False)
        left = QVBoxLayout()
        left.setContentsMargins(0, 0, 0, 0)
        left.addWidget(self.table, 3)
        left.addWidget(self.shares_table, 2)
        tl.addLayout(left, 2)
        self.lines = QLabel(top)
        self.lines.setWordWrap(True)
        self.lines.setAlignment(Qt.AlignmentFlag.AlignTop | Qt.AlignmentFlag.AlignLeft)
        self.lines.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        tl.addWidget(self.lines, 3)
        self.plots = pg.GraphicsLayoutWidget(split)
        self.plots.setObjectName("summaryPlots")
        self.p_out = self.plots.addPlot(row=0, col=0, title="Outcomes", axisItems=kept_axes())
        self.p_conv = self.plots.addPlot(row=0, col=1, title="Convergence", axisItems=kept_axes())
        self.p_commit = self.plots.addPlot(row=1, col=0, axisItems=kept_axes(),
                                           title=f"Commit times ({COMMIT_DEFINITIONS[DEFAULT_COMMIT_COLUMN]})")
        self.p_gap = self.plots.addPlot(row=1, col=1, title="Bond-formation time gap", axisItems=kept_axes())
        self.p_out.setLabel("left", "fraction of counted runs")
        self.p_conv.setLabel("bottom", "runs so far")
        self.p_commit.setLabel("bottom", "|t| from the TS", units="fs")
        self.p_commit.setLabel("left", "runs")
        self.p_gap.setLabel("bottom", "time gap", units="fs")
        self.p_gap.setLabel("left", "runs")
        self.titles = {id(p): p.titleLabel.text for p in self.all_plots}
        for p in self.all_plots:
            p.showGrid(x=True, y=True, alpha=0.15)
            p.setMenuEnabled(False)
            for name in ("left", "bottom"):
                p.getAxis(name).enableAutoSIPrefix(False)  # fractions and counts read as they are
        for p in (self.p_commit, self.p_conv, self.p_gap):
            p.addLegend(offset=(-8, 8), labelTextSize="8pt")
        # the wheel scrolls the view (the plots stand in one column when narrow); Ctrl+wheel zooms a plot
        self.plots.viewport().installEventFilter(self)
        split.addWidget(top)
        split.addWidget(self.plots)
        split.setStretchFactor(0, 0)
        split.setStretchFactor(1, 1)
        split.setSizes([190, 600])
        top.setMinimumHeight(120)
        self.plots.setMinimumHeight(260)
        self.split = split
        self._top = top
        self._narrow: bool | None = None
        self._narrow_plots: bool | None = None
        outer.addWidget(split, 1)
        self._arrange(False)
        self._arrange_plots(False)

        self.tst_box.toggled.connect(lambda _on: self._tst_enabled())
        self.major_combo.currentIndexChanged.connect(lambda _i: self.refresh())
        self.minor_combo.currentIndexChanged.connect(lambda _i: self.refresh())
        self.tst_box.toggled.connect(lambda _on: self.refresh())
        self.ddg.valueChanged.connect(lambda _v: self.refresh())
        self.unit.currentTextChanged.connect(self._unit_changed)
        self.temperature.valueChanged.connect(lambda _v: self.refresh())
        self.half_width.valueChanged.connect(lambda _v: self.refresh())
        self.a_combo.currentIndexChanged.connect(lambda _i: self.refresh())
        self.b_combo.currentIndexChanged.connect(lambda _i: self.refresh())

    def eventFilter(self, watched, event) -> bool:  # noqa: N802
        """A plain wheel over the plots scrolls the view around them instead of zooming a plot."""
        if (event.type() == QEvent.Type.Wheel and watched is self.plots.viewport()
                and not event.modifiers() & Qt.KeyboardModifier.ControlModifier):
            area = self.parentWidget()
            while area is not None and not isinstance(area, QAbstractScrollArea):
                area = area.parentWidget()
            if area is not None:
                QApplication.sendEvent(area.verticalScrollBar(), event)
                return True
        return super().eventFilter(watched, event)

    # --- narrow and wide ------------------------------------------------------------------------
    #: below this width (px) the tables stack above the text and the four plots stack in one column: side by
    #: side they were cut off at the right in the analysis area of a 1366×768 window
    NARROW_PX = 700
    #: below this width (px) the plots stack in one column (two plots side by side need about 650 px)
    NARROW_PLOTS_PX = 700
    #: each plot's height when the plots stack (the view then scrolls down, never sideways)
    STACKED_PLOT_PX = 210

    def resizeEvent(self, event) -> None:  # noqa: N802
        super().resizeEvent(event)
        self._arrange(event.size().width() < self.NARROW_PX)
        self._arrange_plots(event.size().width() < self.NARROW_PLOTS_PX)
        self._fit_top()

    @staticmethod
    def _table_height(table: QTableWidget) -> int:
        """Height showing every row of ``table`` (header, frame and a sideways bar included)."""
        h = table.horizontalHeader().height() + 2 * table.frameWidth()
        h += sum(table.rowHeight(r) for r in range(table.rowCount()))
        if table.horizontalHeader().length() > table.viewport().width():
            h += table.horizontalScrollBar().sizeHint().height()
        return h

    def _fit_top(self) -> None:
        """Narrow: the tables show all their rows and the text all its lines, the plots below them (the view
        scrolls down instead of sideways)."""
        tables = (self.table, self.shares_table)
        if not self._narrow:
            for t in tables:
                t.setMinimumHeight(0)
                t.setMaximumHeight(16777215)
            return
        shown = [t for t in tables if not t.isHidden()]
        for t in shown:
            t.setFixedHeight(self._table_height(t))
        spacing = self._top_layout.spacing()
        width = self._top.width() if self._top.width() > 50 else self.width() - 8
        need = sum(t.height() + spacing for t in shown) + self.lines.heightForWidth(max(1, width))
        need = max(120, need)
        self._top.setMinimumHeight(need)
        sizes = self.split.sizes()
        if len(sizes) == 2 and sizes[0] != need:
            self.split.setSizes([need, max(self.plots.minimumHeight(), sum(sizes) - need)])

    def _arrange(self, narrow: bool) -> None:
        """Tables beside the text and plots two by two (wide), or everything in one column (narrow)."""
        if narrow == self._narrow:
            return
        self._narrow = narrow
        self._top_layout.setDirection(QBoxLayout.Direction.TopToBottom if narrow
                                      else QBoxLayout.Direction.LeftToRight)
        if not narrow:
            self._top.setMinimumHeight(120)
        self._fit_top()

    def _arrange_plots(self, narrow: bool) -> None:
        """The four plots two by two, or (narrow) one above the other."""
        if narrow == self._narrow_plots:
            return
        self._narrow_plots = narrow
        ci = self.plots.ci
        for p in self.all_plots:
            if p in ci.items:
                ci.removeItem(p)
        cells = ((0, 0), (1, 0), (2, 0), (3, 0)) if narrow else ((0, 0), (0, 1), (1, 0), (1, 1))
        for p, (row, col) in zip(self.all_plots, cells):
            ci.addItem(p, row=row, col=col)
        self.plots.setMinimumHeight(4 * self.STACKED_PLOT_PX if narrow else 260)
        self.split.setSizes([330, 4 * self.STACKED_PLOT_PX] if narrow else [190, 600])

    @property
    def narrow(self) -> bool:
        """The plots stand in one column (the view is narrow)."""
        return bool(self._narrow_plots)

    @property
    def all_plots(self) -> tuple:
        return (self.p_out, self.p_conv, self.p_commit, self.p_gap)

    def apply_palette(self) -> None:
        pal = self.palette()
        base, text = pal.color(QPalette.ColorRole.Base), pal.color(QPalette.ColorRole.Text)
        self.plots.setBackground(base)
        for p in self.all_plots:
            self._title(p, p.titleLabel.text)
            theme_axes(p, text)
            if p.legend is not None:
                theme_legend(p.legend, base, text, 210)
        warn = warning_colour(base)
        self.warning_box.set_colour(warn.name())

    def _title(self, plot, text: str) -> None:
        # wrapped: a plot is never narrower than its title, and a long one-line title cut the plots off at the
        # right in a narrow analysis area
        plot.setTitle(wrap_title(text), color=self.palette().color(QPalette.ColorRole.Text), size="10pt")

    def changeEvent(self, event) -> None:  # noqa: N802
        if event.type() == event.Type.PaletteChange and hasattr(self, "plots"):
            self.apply_palette()
            self._draw()
            self.plots_pending = True
            self.draw_plots()   # their colours come from the palette
        super().changeEvent(event)

    # --- settings -------------------------------------------------------------------------
    def _unit_changed(self, unit: str) -> None:
        old, self._unit = self._unit, unit
        self.ddg.blockSignals(True)  # keep the same energy in the new unit
        value = float(convert_energy(self.ddg.value(), old, unit))
        bound = float(convert_energy(MAX_DDG_KCAL, "kcal/mol", unit))
        self.ddg.setRange(-bound, bound)
        self.ddg.setValue(value)
        self.ddg.blockSignals(False)
        self.refresh()

    def _tst_enabled(self) -> None:
        on, barriers = self.tst_box.isChecked(), self._set_barriers is not None
        for w in (self.ddg, self.major_combo, self.minor_combo, self.tst_for, self.tst_over):
            w.setVisible(not barriers)
            w.setEnabled(on)
        for g in self._pair_groups:
            g.setVisible(not barriers)
        self.tst_barriers.setVisible(barriers)
        self.tst_barriers.setEnabled(on)

    def _take_set_tst(self) -> None:
        """A set whose basinmark-set.toml states a TST estimate ([tst]) starts with that comparison shown."""
        tset = self.state.tset
        stated = None if tset is None else tset.metadata.get("tst")
        if tset is None:
            return
        self._measured = stated.get("experiment") if stated else None
        self._tst_warning = ""
        est = stated.get("estimate") if stated else None
        if stated and stated.get("kind") == "unnamed":
            from basinmark.core.tst import unnamed_ddg_message

            self._tst_warning = unnamed_ddg_message(stated["ddg"], stated["unit"], "basinmark-set.toml [tst]",
                                                    self.products()) + " The TST comparison is left out until then."
        if est is not None and not est.is_pair:
            self.set_barriers(est)
        elif est is not None:
            unit = est.unit if est.unit in UNITS else UNITS[0]
            self.set_tst(float(convert_energy(est.ddg, est.unit, unit)), unit, est.temperature, est.major, est.minor)
        else:
            self.set_tst(None)  # another set's barrier must not be shown beside this set's ratio

    def set_barriers(self, estimate) -> None:
        """Compare with one barrier per product (a :class:`~basinmark.core.tst.TSTEstimate`); None = no TST."""
        self._set_barriers = estimate
        for w in (self.tst_box, self.temperature):
            w.blockSignals(True)
        if estimate is not None:
            self.temperature.setValue(estimate.temperature)
            self.tst_barriers.setText(f"per-product barriers ({len(estimate.barriers)} products, "
                                      f"basinmark-set.toml)")
            self.tst_barriers.setToolTip(estimate.text())
        self.tst_box.setChecked(estimate is not None)
        for w in (self.tst_box, self.temperature):
            w.blockSignals(False)
        self._tst_enabled()
        self.refresh()

    def set_tst(self, ddg: float | None, unit: str = "kcal/mol", temperature: float = 298.15,
                major: str | None = None, minor: str | None = None) -> None:
        """Set ΔΔG‡ = G‡(minor) − G‡(major) (None = no TST comparison), its unit and the temperature.

        Without names, the pair is the ratio shown now (ΔΔG‡ = G‡(B) − G‡(A) for A : B).
        """
        self._set_barriers = None
        widgets = (self.tst_box, self.ddg, self.unit, self.temperature, self.major_combo, self.minor_combo)
        for w in widgets:
            w.blockSignals(True)
        self.unit.setCurrentText(unit)
        self._unit = unit
        bound = float(convert_energy(MAX_DDG_KCAL, "kcal/mol", unit))
        self.ddg.setRange(-bound, bound)
        self.temperature.setValue(temperature)
        self.tst_box.setChecked(ddg is not None)
        if ddg is not None:
            self.ddg.setValue(ddg)
            self._fill_pair()
            if major is None or minor is None:
                shown = self.summary
                products = self.products()
                major = major or (shown.a if shown is not None and shown.a else (products[0] if products else None))
                minor = minor or (shown.b if shown is not None and shown.b else
                                  next((p for p in products if p != major), None))
            for combo, name in ((self.major_combo, major), (self.minor_combo, minor)):
                i = combo.findData(name)
                if i < 0 and name is not None:  # a name the rules do not have: shown, and refused by the core
                    combo.addItem(name, name)
                    i = combo.count() - 1
                combo.setCurrentIndex(max(i, 0))
        for w in widgets:
            w.blockSignals(False)
        self._tst_enabled()
        self.refresh()

    def set_pair(self, a: str | None, b: str | None) -> None:
        """Choose the products of the ratio A : B (None = automatic)."""
        for combo, name in ((self.a_combo, a), (self.b_combo, b)):
            i = combo.findData(name) if name is not None else 0
            if i < 0:
                raise KeyError(f"{name!r} is not a product of the rules")
            combo.setCurrentIndex(i)

    def _fill_pair(self) -> None:
        products = self.products()
        for combo in (self.a_combo, self.b_combo):
            keep = combo.currentData()
            if [combo.itemData(i) for i in range(1, combo.count())] == products:
                continue
            combo.blockSignals(True)
            combo.clear()
            combo.addItem("automatic", None)
            for p in products:
                combo.addItem(p, p)
            i = combo.findData(keep) if keep is not None else 0
            combo.setCurrentIndex(max(i, 0))
            combo.blockSignals(False)
        for combo in (self.major_combo, self.minor_combo):
            keep = combo.currentData()
            if [combo.itemData(i) for i in range(combo.count())] == products:
                continue
            combo.blockSignals(True)
            combo.clear()
            for p in products:
                combo.addItem(p, p)
            if keep is not None and combo.findData(keep) < 0:
                combo.addItem(keep, keep)
            first = 1 if combo is self.minor_combo and combo.count() > 1 else 0  # two different products at first
            combo.setCurrentIndex(max(combo.findData(keep) if keep is not None else first, 0))
            combo.blockSignals(False)

    def settings(self) -> dict:
        """The keyword arguments of build_summary; a TST estimate the controls cannot make is left out
        (``self.tst_problem`` says why, and the summary shows it as a warning)."""
        from basinmark.core.tst import TSTError

        self.tst_problem = ""
        try:
            tst = self.tst_estimate()
        except TSTError as exc:
            self.tst_problem, tst = str(exc), None
        return {"a": self.a_combo.currentData(), "b": self.b_combo.currentData(), "tst": tst,
                "unit": self.unit.currentText(), "temperature": self.temperature.value(),
                "half_width": self.half_width.value(), "experiment": self._measured}

    def tst_estimate(self):
        """The TST estimate the controls state (None when unchecked)."""
        from basinmark.core.tst import TSTEstimate

        if not self.tst_box.isChecked():
            return None
        if self._set_barriers is not None:
            b = self._set_barriers
            return TSTEstimate.from_barriers(b.barriers, b.unit, self.temperature.value(), source=b.source,
                                             origin=b.origin)
        return TSTEstimate.pair(self.major_combo.currentData(), self.minor_combo.currentData(), self.ddg.value(),
                                self.unit.currentText(), self.temperature.value(), origin="the TST controls")

    # --- computing (all in the core) ------------------------------------------------------
    def products(self) -> list[str]:
        rules = self.state.rules
        if rules is not None:
            return list(rules.products)
        from basinmark.core.labels import FIXED_LABELS

        labs = self.state.labels["final_label"] if len(self.state.labels) else []
        return sorted({str(v) for v in labs if isinstance(v, str) and v} - set(FIXED_LABELS))

    def label_table(self) -> pd.DataFrame:
        """The state's label table in set order, empty labels as missing (for build_summary)."""
        lab = self.state.labels.copy(deep=False)   # (copy on write: the state's table is never changed here)
        # the window's table writes "" for "none"; the core reads a missing value (NaN/None) as "none"
        for col in ("final_label", "hand_label", "labeler", "reason"):
            if col in lab:
                lab[col] = label_texts(lab[col])   # each distinct text tested once (15 ms a cell at a time)
        return lab

    def showEvent(self, event) -> None:  # noqa: N802
        super().showEvent(event)
        if self.stale:
            self.refresh()

    def ensure_current(self) -> None:
        """Bring the numbers and plots up to date now even if the panel is hidden (for exports)."""
        if self.stale:
            self.refresh(force=True)
        self.draw_plots()

    def refresh(self, force: bool = False) -> None:
        """Summarise the state's labels again (deferred while the panel is hidden).  The numbers, table and
        sentences are shown in this turn; the plots are drawn in the next (at once with ``force``)."""
        if not (force or self.isVisible()):
            self.stale = True
            return
        self.stale = False
        st = self.state
        self.summary, self.error = None, ""
        self.commit_hist, self.gap_hist, self.gap_stats = pd.DataFrame(), pd.DataFrame(), None
        self._fill_pair()
        if st.tset is not None and len(st.labels):
            labels = self.label_table()
            notes = []
            if st.rules is None:
                notes.append("no rules: every label other than the fixed ones counts as a product")
            if getattr(st, "blind_labeler", ""):
                notes.append(f"blind labeling: only {st.blind_labeler}'s hand labels count here, other people's "
                             "are hidden")
            try:
                extra = [self._tst_warning] if self._tst_warning else []
                outside = None if getattr(st, "loading", False) else outside_set_warning(st.labels_outside)
                if outside is not None:
                    extra.append(outside)
                kw = self.settings()
                if self.tst_problem:
                    extra.append(f"TST comparison left out: {self.tst_problem}")
                try:  # a TST estimate the rules cannot take drops the comparison, not the whole summary
                    if kw["tst"] is not None:
                        kw["tst"].check_products(self.products())
                except BasinmarkError as exc:
                    extra.append(f"TST comparison left out: {exc}")
                    kw["tst"] = None
                measured = kw["experiment"]
                if measured is not None and not {measured.a, measured.b} <= set(self.products()):
                    extra.append(f"The measured ratio ({measured.text()}) names a product the rules do not have; "
                                 f"it is left out.")
                    kw["experiment"] = None
                self.summary = build_summary(labels, self.products(), notes=notes, extra_warnings=extra, **kw)
            except BasinmarkError as exc:
                self.error = str(exc)
            self._timings(labels)
        self._draw()
        self.plots_pending = True
        if force:
            self.draw_plots()
        else:
            self._plot_timer.start()
        self.updated.emit()

    def _timings(self, labels: pd.DataFrame) -> None:
        counted = labels[labels["final_label"].notna() & (labels["final_label"] != "excluded")]
        table = pd.DataFrame({"outcome": counted["final_label"].astype(str),
                              DEFAULT_COMMIT_COLUMN: pd.to_numeric(counted[DEFAULT_COMMIT_COLUMN], errors="coerce")})
        self.commit_hist = commit_time_histogram(table, bins=HIST_BINS)  # product side, final entry
        # runs per outcome as the run table counts them: a legend says "2 of 7" when only 2 have a commit time
        self.outcome_totals = final_label_counts(labels["final_label"], self.products())
        rules, cls = self.state.rules, self.state.classification
        if rules is None or rules.time_gap is None or cls is None or "time_gap_fs" not in cls:
            return
        products = set(rules.products)
        final = final_label_map(labels)
        gaps = cls[[final.get(r) in products for r in cls["run"]]]
        cf = rules.time_gap.concerted_fs
        self.gap_stats = concerted_fraction(gaps["time_gap_fs"], cf)
        gt = pd.DataFrame({"outcome": [gap_mode(g, cf) for g in gaps["time_gap_fs"]],
                           "time_gap_fs": gaps["time_gap_fs"].to_numpy()})
        self.gap_hist = commit_time_histogram(gt[gt["outcome"] != "not formed"], bins=HIST_BINS, column="time_gap_fs")

    # --- drawing --------------------------------------------------------------------------
    def _colour(self, label: str) -> QColor:
        return outcome_colour(label, self.summary.products if self.summary else self.products())

    def _draw(self) -> None:
        """The table, sentences and warnings (the plots follow in :meth:`draw_plots`)."""
        s = self.summary
        if s is None:
            self.table.setRowCount(0)
            self.shares_table.setRowCount(0)
            self.shares_table.setVisible(False)
            self.lines.setText(self.error or "Open a set with rules (or labels) to see its summary.")
            self.warning_box.set_warnings([])
            return
        self._fill_table(s)
        text = [s._headline()] + [f"Note: {n}" for n in s.notes] + s.lines()  # the core's own sentences
        self.lines.setText("\n\n".join(text))
        self.warning_box.set_warnings(s.warnings)
        self._fit_top()

    def draw_plots(self) -> None:
        """Draw the plots of the summary shown, if they wait for it."""
        if not self.plots_pending:
            return
        self.plots_pending = False
        self._plot_timer.stop()
        for p in self.all_plots:
            p.clear()
            if p.legend is not None:
                p.legend.clear()
            self._title(p, self.titles[id(p)])
        s = self.summary
        if s is None:
            return
        self._draw_outcomes(s)
        self._draw_convergence(s)
        self._draw_hist(self.p_commit, self.commit_hist, "commit_time")
        self._draw_gap()

    def _fill_table(self, s: Summary) -> None:
        tab = s.table
        sim = "simultaneous_lo" in tab
        self.table.setColumnHidden(4, not sim)
        self.table.setHorizontalHeaderItem(3, QTableWidgetItem(f"{s.confidence_text} interval"))
        self.table.setRowCount(len(tab))
        for i, r in enumerate(tab.itertuples(index=False)):
            cells = [r.label, str(int(r.count)), _fmt(r.fraction), f"{_fmt(r.lo)}–{_fmt(r.hi)}",
                     f"{_fmt(r.simultaneous_lo)}–{_fmt(r.simultaneous_hi)}" if sim else ""]
            for j, c in enumerate(cells):
                item = QTableWidgetItem(c)
                if j:
                    item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                else:
                    item.setData(Qt.ItemDataRole.DecorationRole, self._colour(r.label))
                self.table.setItem(i, j, item)
        self._fill_shares(s)

    def _fill_shares(self, s: Summary) -> None:
        sh = s.shares
        self.shares_table.setVisible(s.show_shares)
        if not s.show_shares:
            self.shares_table.setRowCount(0)
            return
        tst = bool(sh["tst_share"].notna().any())
        self.shares_table.setColumnHidden(4, not tst)
        self.shares_table.setHorizontalHeaderItem(
            3, QTableWidgetItem(f"all products at once ({s.confidence_text})"))
        self.shares_table.setRowCount(len(sh))
        for i, r in enumerate(sh.itertuples(index=False)):
            cells = [r.product, str(int(r.count)), _fmt(r.share), f"{_fmt(r.lo)}–{_fmt(r.hi)}", _fmt(r.tst_share)]
            for j, c in enumerate(cells):
                item = QTableWidgetItem(c)
                if j:
                    item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                else:
                    item.setData(Qt.ItemDataRole.DecorationRole, self._colour(r.product))
                if j == 4 and tst and not np.isnan(r.tst_share) and not r.lo <= r.tst_share <= r.hi:
                    item.setToolTip("outside the simultaneous interval: the runs do not bear this TST share out")
                    font = item.font()
                    font.setBold(True)
                    item.setFont(font)
                self.shares_table.setItem(i, j, item)

    def _draw_outcomes(self, s: Summary) -> None:
        tab = s.table
        if tab.empty:
            return
        x = np.arange(len(tab), dtype=float)
        frac = tab["fraction"].to_numpy(float)
        lo, hi = tab["lo"].to_numpy(float), tab["hi"].to_numpy(float)
        brushes = [pg.mkBrush(self._colour(lab)) for lab in tab["label"]]
        self.bars = pg.BarGraphItem(x=x, height=frac, width=0.7, brushes=brushes, pen=pg.mkPen(None))
        self.p_out.addItem(self.bars)
        text = self.palette().color(QPalette.ColorRole.Text)
        self.error_bars = pg.ErrorBarItem(x=x, y=frac, top=hi - frac, bottom=frac - lo, beam=0.25,
                                          pen=pg.mkPen(text, width=1.5))
        self.p_out.addItem(self.error_bars)
        sep = "\n" if len(tab) > 5 else " "  # many outcomes: the count below its name, so that names do not collide
        line = self.fontMetrics().height()
        self.p_out.getAxis("bottom").setHeight(2 * line + 14 if len(tab) > 5 else None)
        self.p_out.getAxis("bottom").setTicks([[(i, f"{lab}{sep}({int(c)})") for i, (lab, c)
                                                in enumerate(zip(tab["label"], tab["count"]))]])
        self.p_out.setYRange(0, max(1e-9, float(np.nanmax(hi))) * 1.08, padding=0)
        self.p_out.setXRange(-0.6, len(tab) - 0.4, padding=0)

    def _draw_convergence(self, s: Summary) -> None:
        conv = _drawn_rows(s.convergence)
        p = self.p_conv
        if conv is not None and not conv.empty and s.a and not s.b:
            self._draw_kappa_convergence(s)
            return
        if conv is None or conv.empty or not (s.a and s.b):
            self._title(p, "Convergence (needs two products)")
            return
        self._title(p, f"Convergence of {s.a} : {s.b}")
        p.setLabel("left", f"{s.a} : {s.b}")
        n = conv["n"].to_numpy(float)

        def finite(col: str) -> np.ndarray:
            v = conv[col].to_numpy(float)
            return np.where(np.isfinite(v), v, np.nan)

        r, lo, hi = finite("ratio"), finite("ratio_lo"), finite("ratio_hi")
        colour = QColor(self._colour(s.a))
        ok = self._band(p, n, lo, hi, colour)
        self.conv_curve = pg.PlotDataItem(n, r, pen=pg.mkPen(colour, width=2), connect="finite",
                                          name=f"observed ({s.confidence_text} band)")
        p.addItem(self.conv_curve)
        top = hi[ok][len(hi[ok]) // 4:] if ok.any() else np.array([])
        ymax = float(np.nanmax(top)) if top.size and np.isfinite(top).any() else None
        if s.tst_ratio is not None and math.isfinite(s.tst_ratio):
            line = pg.InfiniteLine(s.tst_ratio, angle=0,
                                   pen=pg.mkPen(self.palette().color(QPalette.ColorRole.Text), width=1.5,
                                                style=Qt.PenStyle.DashLine))
            p.addItem(line)
            p.legend.addItem(pg.PlotDataItem(pen=line.pen), f"TST {_fmt(s.tst_ratio, 2)}")
            ymax = max(ymax or 0.0, s.tst_ratio)
        p.setXRange(0, max(n[-1], 1), padding=0.02)
        if ymax:
            p.setYRange(0, ymax * 1.1, padding=0)  # the earliest, widest part of the band would flatten the rest

    @staticmethod
    def _band(p, n: np.ndarray, lo: np.ndarray, hi: np.ndarray, colour: QColor) -> np.ndarray:
        """The interval band of a convergence plot, where both ends are known; returns that mask."""
        band = QColor(colour)
        band.setAlpha(60)
        ok = np.isfinite(lo) & np.isfinite(hi)
        if ok.sum() >= 2:
            p.addItem(band_item(n[ok], lo[ok], hi[ok], pg.mkBrush(band)))
            p.addItem(pg.PlotDataItem(n[ok], lo[ok], pen=pg.mkPen(band)))
            p.addItem(pg.PlotDataItem(n[ok], hi[ok], pen=pg.mkPen(band)))
        return ok

    def _draw_kappa_convergence(self, s: Summary) -> None:
        """One product: the transmission coefficient as runs accumulate, with its band."""
        conv, p = _drawn_rows(s.convergence), self.p_conv
        self._title(p, "Convergence of the transmission coefficient")
        p.setLabel("left", "reactive / (reactive + recrossing)")
        n = conv["n"].to_numpy(float)
        kappa, lo, hi = (conv[c].to_numpy(float) for c in ("fraction_a", "lo", "hi"))
        colour = QColor(self._colour(s.a))
        self._band(p, n, lo, hi, colour)
        self.conv_curve = pg.PlotDataItem(n, kappa, pen=pg.mkPen(colour, width=2), connect="finite",
                                          name=f"observed ({s.confidence_text} band)")
        p.addItem(self.conv_curve)
        p.setXRange(0, max(n[-1], 1), padding=0.02)
        p.setYRange(0, 1.02, padding=0)

    def _draw_hist(self, p, hist: pd.DataFrame, what: str) -> None:
        if hist is None or hist.empty:
            self._title(p, self.titles[id(p)] + " (none yet)")
            return
        order = list(self.summary.table["label"]) if self.summary is not None else []
        groups = sorted(hist.groupby("outcome", sort=False), key=lambda g: order.index(g[0]) if g[0] in order else len(order))
        for outcome, grp in groups:
            edges = np.append(grp["bin_lo_fs"].to_numpy(float), grp["bin_hi_fs"].to_numpy(float)[-1])
            counts = grp["count"].to_numpy(float)
            colour = QColor(self._colour(outcome)) if what == "commit_time" else QColor(self._gap_colour(outcome))
            fill = QColor(colour)
            fill.setAlpha(70)
            k = int(counts.sum())
            n = getattr(self, "outcome_totals", {}).get(outcome, k) if what == "commit_time" else k
            p.addItem(pg.PlotDataItem(edges, counts, stepMode="center", fillLevel=0, brush=pg.mkBrush(fill),
                                      pen=pg.mkPen(colour, width=1.5),
                                      name=f"{outcome} ({k} of {n})" if k != n else f"{outcome} ({n})"))
        if what == "commit_time":
            p.setToolTip("Legend: runs of each outcome with a product commit time, of all runs with that outcome")

    def _gap_colour(self, mode: str) -> QColor:
        from basinmark.gui.colours import trace_colour

        return trace_colour(0 if mode == "concerted" else 1)  # not the products' nor the energies' colours

    def _draw_gap(self) -> None:
        p = self.p_gap
        g = self.gap_stats
        rules = self.state.rules
        if g is None:
            self._title(p, "Bond-formation time gap (no [time_gap] in the rules)")
            return
        self._draw_hist(p, self.gap_hist, "gap")
        cf = rules.time_gap.concerted_fs
        p.addItem(pg.InfiniteLine(cf, angle=90, pen=pg.mkPen(self.palette().color(QPalette.ColorRole.Text),
                                                              style=Qt.PenStyle.DashLine)))
        if g["n_formed"]:
            self._title(p, f"Time gap: {g['concerted']} concerted, {g['stepwise']} stepwise "
                       f"(concerted {_fmt(g['fraction_concerted'], 2)}, 95 % {_fmt(g['lo'], 2)}–{_fmt(g['hi'], 2)}; "
                       f"cut {cf:g} fs)")
        else:
            self._title(p, "Time gap: no product run formed both bonds")

    # --- for exports ----------------------------------------------------------------------
    def figure_widget(self) -> QWidget:
        return self.plots


def install_summary_dock(window: QMainWindow) -> QDockWidget:
    """Add the summary as a tab of the analysis area (hidden until asked for) with its toggle in the View menu."""
    from basinmark.gui.analysis_area import add_analysis_dock
    from basinmark.gui.map_view import _menu

    panel = SummaryPanel(window.state, window)
    dock = add_analysis_dock(window, "summary", "Summary", panel)
    docks = getattr(window, "docks", None)
    window.summary_panel = panel

    def show_runs(run_ids: tuple, caption: str) -> None:
        table = getattr(window, "run_table", None)
        if table is None:
            return
        table.show_only_runs(run_ids, caption)
        runs_dock = docks.get("runs") if isinstance(docks, dict) else None
        if runs_dock is not None:
            runs_dock.show()
            runs_dock.raise_()
        window.statusBar().showMessage(f"Run table: {len(run_ids)} runs of the warning “{caption}”", 8000)

    panel.show_runs.connect(show_runs)
    act = dock.toggleViewAction()
    act.triggered.connect(lambda checked: dock.raise_() if checked else None)
    act.setText("S&ummary")
    act.setShortcut("Ctrl+Shift+M")
    act.setToolTip("Counts, product ratio with its interval, TST comparison, convergence and timings "
                   "(Ctrl+Shift+M)")
    _menu(window, "&View").addAction(act)
    return dock
