"""The Export menu: label table, summary, figures and runs to files, each through a file dialog.

Every dialog starts in the last export folder, never inside the set's folder (:mod:`basinmark.gui.export_folder`).

The ``export_*`` functions take a path and do the work (tests and scripts call them directly); the
menu entries only ask for the path and report the result in the status bar.  Tables and runs are
written by :mod:`basinmark.core.report`, figures by :mod:`basinmark.gui.figures`.
"""

from __future__ import annotations

from pathlib import Path
from typing import Callable

from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import QMainWindow, QMenu, QWidget

from basinmark.core import report
from basinmark.core.errors import BasinmarkError
from basinmark.core.summary import build_summary
from basinmark.gui.export_folder import ask_export_path
from basinmark.gui.figures import save_widget

FIGURE_FILTER = "PNG image (*.png);;SVG drawing (*.svg)"


class NothingToExport(BasinmarkError):
    """The window has nothing of that kind to export yet (no set, no run, no summary)."""


# --- the work (path given) -----------------------------------------------------------------

def _need_set(state) -> None:
    if state.tset is None or not len(state.tset):
        raise NothingToExport("Open a set first: there is nothing to export.")


def export_label_table(state, path: str | Path) -> Path:
    """The window's label table (one row per run: final, automatic and hand label, flags...) as CSV."""
    _need_set(state)
    return report.write_label_table(state.labels, path)


def current_summary(state, panel=None):
    """The summary the summary view shows (with its ΔΔG‡, unit, temperature), else one with defaults."""
    if panel is not None and hasattr(panel, "ensure_current"):
        panel.ensure_current()
    if panel is not None and getattr(panel, "summary", None) is not None:
        return panel.summary
    _need_set(state)
    if state.rules is None:
        raise NothingToExport("There are no rules, so no products to summarise: open a rules file first.")
    return build_summary(state.labels.copy(), state.rules.products)


def export_summary(state, path: str | Path, panel=None) -> Path:
    """The summary as Markdown (.md) or CSV (.csv), as the suffix says."""
    return report.write_summary(current_summary(state, panel), path)


def export_figure(widget: QWidget, path: str | Path, size: tuple[int, int] | None = None) -> Path:
    """Any plot widget of the window to PNG or SVG (a hidden panel is brought up to date first)."""
    parent = widget.parentWidget()
    while parent is not None:
        if getattr(parent, "stale", False) and hasattr(parent, "refresh"):
            parent.refresh(force=True)
            break
        parent = parent.parentWidget()
    return save_widget(widget, path, size)


def export_frame(state, path: str | Path) -> Path:
    """The current frame of the current run as extended XYZ."""
    traj = state.traj
    if traj is None:
        raise NothingToExport("No run is shown: choose a run first.")
    return report.write_run_xyz(traj, path, frame=state.frame)


def export_run(state, path: str | Path) -> Path:
    """Every frame of the current run as extended XYZ (one joined file, backward half at negative times)."""
    traj = state.traj
    if traj is None:
        raise NothingToExport("No run is shown: choose a run first.")
    return report.write_run_xyz(traj, path)


def export_run_data(state, path: str | Path, energy_unit: str = "kcal/mol") -> Path:
    """The current run's time, monitors (the rules' and the added ones), basin of each frame and energies as CSV
    (:func:`basinmark.core.run_data.run_data_table`)."""
    from basinmark.core.run_data import run_data_table, write_run_data
    from basinmark.gui.traces import monitor_name

    traj = state.traj
    if traj is None:
        raise NothingToExport("No run is shown: choose a run first.")
    extra = {monitor_name(m): [a - 1 for a in m] for m in state.user_monitors}
    table = run_data_table(traj, state.run_result(), state.rules, extra, energy_unit)
    return write_run_data(table, path)


# --- the menu --------------------------------------------------------------------------------

def _ask(window: QMainWindow, title: str, default: str, filters: str) -> str:
    # the last export folder, never inside the set's folder (export_folder): exports are not part of the data
    return ask_export_path(window, title, default, filters)


def _run(window: QMainWindow, title: str, default: str, filters: str, work: Callable[[str], Path]) -> Path | None:
    bar = window.statusBar()
    try:
        path = _ask(window, title, default, filters)
        if not path:
            return None
        out = work(path)
    except BasinmarkError as exc:
        bar.showMessage(f"Not exported: {exc}", 8000)
        return None
    bar.showMessage(f"Exported to {out}", 6000)
    return out


def _stem(window: QMainWindow) -> str:
    st = window.state
    return st.tset.name if st.tset is not None else "basinmark"


def _widget(window: QMainWindow, attr: str, inner: str) -> QWidget:
    panel = getattr(window, attr, None)
    if panel is None:
        raise NothingToExport("That view is not part of this window.")
    return getattr(panel, inner)


def install_export_menu(window: QMainWindow) -> QMenu:
    """Add the Export menu (before Help) to the window and return it."""
    from basinmark.gui.map_view import _menu

    menu = _menu(window, "E&xport")
    st = window.state

    def add(text: str, tip: str, slot: Callable[[], object], shortcut: str = "") -> QAction:
        act = QAction(text, window)
        act.setToolTip(tip)
        act.setStatusTip(tip)
        if shortcut:
            act.setShortcut(QKeySequence(shortcut))
        act.triggered.connect(lambda _c=False: slot())
        menu.addAction(act)
        return act

    add("&Label Table (CSV)…", "Every run with its final, automatic and hand label, flags and commit time",
        lambda: _run(window, "Export the label table", f"{_stem(window)}-labels.csv", "CSV table (*.csv)",
                     lambda p: export_label_table(st, p)), "Ctrl+Shift+E")
    add("Summary (&Markdown)…", "Counts, intervals, product ratio, TST comparison and warnings as Markdown",
        lambda: _run(window, "Export the summary", f"{_stem(window)}-summary.md", "Markdown (*.md)",
                     lambda p: export_summary(st, p, getattr(window, "summary_panel", None))))
    add("Summary (&CSV)…", "The summary's numbers as a tidy CSV table",
        lambda: _run(window, "Export the summary table", f"{_stem(window)}-summary.csv", "CSV table (*.csv)",
                     lambda p: export_summary(st, p, getattr(window, "summary_panel", None))))
    menu.addSeparator()
    add("Map &Figure…", "The map of all runs as PNG or SVG",
        lambda: _run(window, "Export the map", f"{_stem(window)}-map.png", FIGURE_FILTER,
                     lambda p: export_figure(_widget(window, "map_panel", "canvas"), p)))
    add("Summary Fi&gures…", "The summary's plots (outcomes, convergence, timings) as PNG or SVG",
        lambda: _run(window, "Export the summary plots", f"{_stem(window)}-summary.png", FIGURE_FILTER,
                     lambda p: export_figure(_widget(window, "summary_panel", "plots"), p)))
    add("&Traces Figure…", "The traces of the current run as PNG or SVG",
        lambda: _run(window, "Export the traces", f"{st.run_id or 'run'}-traces.png", FIGURE_FILTER,
                     lambda p: export_figure(_widget(window, "traces", "glw"), p)))
    add("Run &Data (CSV)…", "The current run's time, monitors, basin of each frame and energies as a CSV table",
        lambda: _run(window, "Export the run's data", f"{st.run_id or 'run'}-data.csv", "CSV table (*.csv)",
                     lambda p: export_run_data(st, p, getattr(getattr(window, "traces", None), "energy_unit",
                                                              "kcal/mol"))))
    menu.addSeparator()
    add("Current F&rame (XYZ)…", "The geometry shown now, as extended XYZ",
        lambda: _run(window, "Export the current frame", f"{st.run_id or 'run'}-frame{st.frame + 1}.xyz",
                     "Extended XYZ (*.xyz)", lambda p: export_frame(st, p)))
    add("Current R&un (XYZ)…", "Every frame of the current run as one extended XYZ file",
        lambda: _run(window, "Export the current run", f"{st.run_id or 'run'}.xyz", "Extended XYZ (*.xyz)",
                     lambda p: export_run(st, p)))
    window.export_menu = menu
    return menu
