"""Rule editing with live re-classification.

The panel edits monitors (1-based atoms), basin conditions, the reactant, the dwell time and the
flag limits.  Every edit is turned into :class:`Rules` through the core's own writer and reader
(``Rules.to_toml`` then ``parse_rules``), so the panel accepts exactly what a rules file accepts and
shows the core's :class:`RulesError` sentence inline when it does not; the last valid rules stay in
force.  Valid edits re-classify the open set in a background thread after a short pause (newer edits
cancel older jobs); the monitors of every run are computed once per set of monitors and reused while
only thresholds change (``core.classify.prepare`` / ``classify_prepared``).  Dragging a threshold
line on the traces lands here too.  Writing automatic labels is a separate, explicit action.
"""

from __future__ import annotations

import threading
from dataclasses import replace
from pathlib import Path

import pandas as pd
from PySide6.QtCore import QObject, Qt, QTimer, Signal
from PySide6.QtGui import QAction, QColor, QKeySequence, QPalette
from PySide6.QtWidgets import (QAbstractItemView, QComboBox, QDockWidget, QDoubleSpinBox, QFileDialog,
                               QFormLayout, QHBoxLayout, QHeaderView, QLabel, QLineEdit, QMessageBox,
                               QPushButton, QTableWidget, QTableWidgetItem, QVBoxLayout, QWidget)

from basinmark.core.errors import BasinmarkError
from basinmark.core.rules import (MONITOR_KINDS, MONITOR_UNITS, Basin, Condition, FlagLimits, Monitor, Rules,
                                  RulesError, parse_rules)
from basinmark.core.rules_keep import round_as_shown
from basinmark.core.units import ENERGY_UNITS
from basinmark.gui.movie import find_menu

DEBOUNCE_MS = 300
BOUND_KINDS = ("below", "above", "between")
EDITOR_SOURCE = "rules editor"


class _Cancelled(Exception):
    pass


def _fmt(x: float | None) -> str:
    """Shortest text that reads back to exactly ``x`` (so an untouched value never drifts)."""
    if x is None:
        return ""
    return str(int(x)) if float(x).is_integer() and abs(x) < 1e15 else repr(float(x))


class Reclassifier(QObject):
    """Classifies a set with given rules in a Python thread; emits ``done`` in the GUI thread.

    Keeps the prepared monitor arrays of the last set of monitors, so a threshold change costs only
    the basin and commitment pass.  ``start`` cancels any job still running.
    """

    done = Signal(object)   # {"generation", "rules", "classification", "error", "seconds"}

    def __init__(self, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.generation = 0
        self._cancel: threading.Event | None = None
        self._prepared: dict = {}
        self._lock = threading.Lock()
        self.thread: threading.Thread | None = None

    @staticmethod
    def prep_key(tset, rules: Rules) -> tuple:
        return (id(tset), len(tset), tuple(sorted(rules.monitor_indices().items())))

    def run_sync(self, tset, rules: Rules, cancel: threading.Event | None = None) -> pd.DataFrame:
        """The classification table, equal to ``classify_set(tset, rules)`` (reusing prepared monitors)."""
        from basinmark.core.classify import classify_prepared, prepare, results_table

        key = self.prep_key(tset, rules)
        with self._lock:
            prep = self._prepared.get(key)
        if prep is None:
            def progress(_d, _t, _r) -> None:
                if cancel is not None and cancel.is_set():
                    raise _Cancelled()
            prep = prepare(tset, rules, progress=progress)
            with self._lock:
                self._prepared = {key: prep}
        if cancel is not None and cancel.is_set():
            raise _Cancelled()
        return results_table(prep, classify_prepared(prep, rules), rules)

    def start(self, tset, rules: Rules) -> int:
        import time

        if self._cancel is not None:
            self._cancel.set()
        self.generation += 1
        gen = self.generation
        cancel = threading.Event()
        self._cancel = cancel

        def work() -> None:
            t0 = time.perf_counter()
            out = {"generation": gen, "rules": rules, "classification": None, "error": "", "cancelled": False,
                   "tset": tset}
            try:
                out["classification"] = self.run_sync(tset, rules, cancel) if len(tset) else None
            except _Cancelled:
                out["cancelled"] = True
            except Exception as exc:  # report, never crash the window
                out["error"] = f"Classification failed: {type(exc).__name__}: {exc}"
            out["seconds"] = time.perf_counter() - t0
            self.done.emit(out)

        self.thread = threading.Thread(target=work, name="basinmark-reclassify", daemon=True)
        self.thread.start()
        return gen

    def wait(self, timeout: float = 10.0) -> None:
        if self.thread is not None:
            self.thread.join(timeout)


def _heading(html: str, parent: QWidget) -> QLabel:
    """A section heading that wraps in a narrow dock (on one line it scrolled the editor sideways)."""
    label = QLabel(html, parent)
    label.setWordWrap(True)
    return label


class RulesEditor(QWidget):
    """Edit the rules of the open set; valid edits re-classify it in the background."""

    reclassified = Signal()        # new rules and counts are in the state
    saved = Signal(str)            # path the rules were written to
    invalid = Signal(str)          # the edit is not valid (message shown inline)
    message = Signal(str)

    def __init__(self, state, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.state = state
        self.rules: Rules | None = None        # the last valid rules of this panel (applied or pending)
        self.file_path: Path | None = None     # where "Save Rules" writes
        self.error_text = ""
        self._exact: dict = {}
        self._loading = False
        self._own_rules: Rules | None = None
        self.worker = Reclassifier(self)
        self.worker.done.connect(self._on_done)
        self.timer = QTimer(self)
        self.timer.setSingleShot(True)
        self.timer.setInterval(DEBOUNCE_MS)
        self.timer.timeout.connect(self.apply_now)

        lay = QVBoxLayout(self)
        lay.setContentsMargins(6, 4, 6, 4)
        top = QFormLayout()
        self.name = QLineEdit(self)
        self.name.setToolTip("A name for these rules (optional)")
        top.addRow("Name", self.name)
        self.reactant = QComboBox(self)
        self.reactant.setToolTip("Which basin is the reactant; every other basin is a product")
        top.addRow("Reactant", self.reactant)
        self.dwell = QDoubleSpinBox(self)
        self.dwell.setRange(0.0, 1e6)
        self.dwell.setDecimals(2)
        self.dwell.setSuffix(" fs")
        self.dwell.setToolTip("A run commits to a basin once it has stayed inside it this long")
        top.addRow("Dwell", self.dwell)
        lay.addLayout(top)

        lay.addWidget(_heading("<b>Monitors</b> (atoms numbered from 1: two = distance in Å, three = angle, "
                               "four = dihedral, in degrees)", self))
        self.monitors = QTableWidget(0, 3, self)
        self.monitors.setHorizontalHeaderLabels(["name", "atoms", "kind"])
        self.monitors.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        self.monitors.verticalHeader().setVisible(False)
        self.monitors.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.monitors.setToolTip("Double-click or F2 to edit; atoms as e.g. '1, 6'")
        self.monitors.setMaximumHeight(150)
        lay.addWidget(self.monitors)
        row = QHBoxLayout()
        self.add_monitor = QPushButton("Add Monitor", self)
        self.remove_monitor = QPushButton("Remove Monitor", self)
        row.addWidget(self.add_monitor)
        row.addWidget(self.remove_monitor)
        row.addStretch(1)
        lay.addLayout(row)

        lay.addWidget(_heading("<b>Basins</b> (all conditions of a basin must hold)", self))
        self.conditions = QTableWidget(0, 4, self)
        self.conditions.setHorizontalHeaderLabels(["basin", "monitor", "condition", "value(s)"])
        self.conditions.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        self.conditions.verticalHeader().setVisible(False)
        self.conditions.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
        self.conditions.setToolTip("below x: value < x · above x: value > x · between lo, hi: lo ≤ value ≤ hi "
                                   "(Å for distances, degrees for angles)")
        lay.addWidget(self.conditions, 1)
        row = QHBoxLayout()
        self.add_basin = QPushButton("Add Basin", self)
        self.add_basin.setToolTip("A new product basin with one condition to fill in")
        self.add_condition = QPushButton("Add Condition", self)
        self.add_condition.setToolTip("Another condition for the selected row's basin")
        self.remove_condition = QPushButton("Remove Condition", self)
        self.remove_condition.setToolTip("Remove the selected conditions (a basin with none left is removed)")
        row.addWidget(self.add_basin)
        row.addWidget(self.add_condition)
        row.addWidget(self.remove_condition)
        row.addStretch(1)
        lay.addLayout(row)

        lay.addWidget(_heading("<b>Flags</b> (0 switches a check off)", self))
        flags = QFormLayout()
        self.late = self._limit_spin(" fs", "A commit later than this after t = 0 is flagged")
        flags.addRow("Late commit after", self.late)
        self.drift = self._limit_spin("", "A total-energy drift larger than this is flagged")
        self.energy_unit = QComboBox(self)
        self.energy_unit.addItems(list(ENERGY_UNITS))
        self.energy_unit.setToolTip("Unit of the drift limit")
        drow = QHBoxLayout()
        drow.addWidget(self.drift, 1)
        drow.addWidget(self.energy_unit)
        flags.addRow("Energy drift above", drow)
        self.min_length = self._limit_spin(" fs", "A half shorter than this is flagged")
        flags.addRow("Half shorter than", self.min_length)
        lay.addLayout(flags)

        self.error = QLabel(self)
        self.error.setWordWrap(True)
        self.error.setObjectName("rulesError")
        self.error.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.error.setVisible(False)
        lay.addWidget(self.error)
        self.counts = QLabel(self)
        self.counts.setWordWrap(True)
        lay.addWidget(self.counts)
        self.saved_note = QLabel(self)
        self.saved_note.setWordWrap(True)
        lay.addWidget(self.saved_note)
        row = QHBoxLayout()
        self.revert_button = QPushButton("Revert", self)
        self.revert_button.setToolTip("Back to the rules in force (drops an invalid edit)")
        self.save_button = QPushButton("Save Rules", self)
        self.save_button.setToolTip("Write these rules to the rules file")
        self.record_button = QPushButton("Record Automatic Labels", self)
        self.record_button.setToolTip("Write every run's automatic outcome under these (saved) rules into the "
                                      "label journal as one batch")
        for b in (self.revert_button, self.save_button, self.record_button):
            row.addWidget(b)
        row.addStretch(1)
        lay.addLayout(row)

        for w in (self.name,):
            w.editingFinished.connect(self.schedule)
        self.reactant.currentIndexChanged.connect(self.schedule)
        self.energy_unit.currentIndexChanged.connect(self.schedule)
        for s in (self.dwell, self.late, self.drift, self.min_length):
            s.valueChanged.connect(self.schedule)
        self.monitors.itemChanged.connect(self._monitor_item_changed)
        self.conditions.itemChanged.connect(self.schedule)
        self.add_monitor.clicked.connect(self.add_monitor_row)
        self.remove_monitor.clicked.connect(lambda: self._remove_selected(self.monitors))
        self.add_condition.clicked.connect(self.add_condition_row)
        self.add_basin.clicked.connect(self.add_basin_row)
        self.remove_condition.clicked.connect(lambda: self._remove_selected(self.conditions))
        self.revert_button.clicked.connect(self.revert)
        self.save_button.clicked.connect(lambda: self.save())
        self.record_button.clicked.connect(lambda: self.record_automatic_labels())
        state.rules_changed.connect(self._state_rules_changed)
        state.journal_changed.connect(self._update_buttons)
        state.labels_changed.connect(self._show_counts)
        state.set_changed.connect(self._set_changed)
        self._style_error()
        self._state_rules_changed()

    def _set_changed(self) -> None:
        self.timer.stop()
        self.worker.generation += 1   # results for the previous set are dropped
        self.file_path = None

    def sync_saved(self) -> None:
        """The window saved the rules itself (File ▸ Save Rules As…): take over their file."""
        rules = self.state.rules
        if rules is not None and rules.path is not None:
            self.file_path = Path(rules.path)
            self._own_rules = rules
            self.rules = rules
        self._show_counts()
        self._update_buttons()

    def _limit_spin(self, suffix: str, tip: str) -> QDoubleSpinBox:
        s = QDoubleSpinBox(self)
        s.setRange(0.0, 1e6)
        s.setDecimals(3)
        s.setSuffix(suffix)
        s.setSpecialValueText("off")
        s.setToolTip(tip + " (0 = off)")
        return s

    def _style_error(self) -> None:
        dark = self.palette().color(QPalette.ColorRole.Window).lightness() < 128
        c = QColor("#ffb4a9") if dark else QColor("#b3261e")
        self.error.setStyleSheet(f"QLabel#rulesError {{ color: {c.name()}; font-weight: bold; }}")

    # --- filling the form -------------------------------------------------------------------
    def _state_rules_changed(self) -> None:
        rules = self.state.rules
        if rules is not None and rules is self._own_rules:
            self._show_counts()
            return
        if rules is not None and rules.path is not None:
            self.file_path = Path(rules.path)
        elif self.state.tset is not None and self.file_path is None:
            from basinmark.core.sets import rules_path

            self.file_path = rules_path(self.state.tset.root)
        self.load(rules)

    def load(self, rules: Rules | None) -> None:
        """Show ``rules`` in the form (no re-classification)."""
        self._loading = True
        try:
            self.rules = rules
            self.name.setText(rules.name if rules else "")
            self.reactant.clear()
            if rules is not None:
                self.reactant.addItems(rules.basin_names)
                self.reactant.setCurrentText(rules.reactant)
            f = rules.flags if rules else FlagLimits()
            self._exact = {}
            for spin, value in ((self.dwell, rules.dwell_fs if rules else 0.0), (self.late, f.late_commit_fs),
                                (self.drift, f.max_energy_drift), (self.min_length, f.min_length_fs)):
                spin.setValue(value or 0.0)
                self._exact[spin] = float(value or 0.0)
            self.energy_unit.setCurrentText(f.energy_unit)
            self.monitors.setRowCount(0)
            for m in (rules.monitors.values() if rules else ()):
                self._append_monitor(m.name, ", ".join(map(str, m.atoms)))
            self.conditions.setRowCount(0)
            for b in (rules.basins.values() if rules else ()):
                for c in b.conditions:
                    values = _fmt(c.hi) if c.kind == "below" else _fmt(c.lo) if c.kind == "above" else \
                        f"{_fmt(c.lo)}, {_fmt(c.hi)}"
                    self._append_condition(b.name, c.monitor, c.kind, values)
            self._set_error("")
        finally:
            self._loading = False
        self.setEnabled(rules is not None or self.state.tset is not None)
        self._show_counts()
        self._update_buttons()

    def _append_monitor(self, name: str, atoms: str) -> None:
        r = self.monitors.rowCount()
        self.monitors.insertRow(r)
        self.monitors.setItem(r, 0, QTableWidgetItem(name))
        self.monitors.setItem(r, 1, QTableWidgetItem(atoms))
        kind = QTableWidgetItem(self._kind_text(atoms))
        kind.setFlags(kind.flags() & ~Qt.ItemFlag.ItemIsEditable)
        self.monitors.setItem(r, 2, kind)

    @staticmethod
    def _kind_text(atoms: str) -> str:
        try:
            n = len([a for a in atoms.replace(",", " ").split() if a])
        except Exception:
            return ""
        kind = MONITOR_KINDS.get(n, "")
        unit = {"Å": "Å", "deg": "°"}.get(MONITOR_UNITS.get(kind, ""), "")
        return f"{kind} ({unit})" if kind else "needs 2–4 atoms"

    def _monitor_names(self) -> list[str]:
        out = []
        for r in range(self.monitors.rowCount()):
            item = self.monitors.item(r, 0)
            if item is not None and item.text().strip():
                out.append(item.text().strip())
        return out

    def _append_condition(self, basin: str, monitor: str, kind: str, values: str) -> None:
        r = self.conditions.rowCount()
        self.conditions.insertRow(r)
        self.conditions.setItem(r, 0, QTableWidgetItem(basin))
        mon = QComboBox(self.conditions)
        names = self._monitor_names()
        mon.addItems(names if monitor in names else names + [monitor])
        mon.setCurrentText(monitor)
        mon.currentIndexChanged.connect(self.schedule)
        self.conditions.setCellWidget(r, 1, mon)
        bound = QComboBox(self.conditions)
        bound.addItems(list(BOUND_KINDS))
        bound.setCurrentText(kind)
        bound.currentIndexChanged.connect(self.schedule)
        self.conditions.setCellWidget(r, 2, bound)
        self.conditions.setItem(r, 3, QTableWidgetItem(values))

    def _monitor_item_changed(self, item: QTableWidgetItem) -> None:
        if self._loading:
            return
        if item.column() == 1:
            kind = self.monitors.item(item.row(), 2)
            if kind is not None:
                kind.setText(self._kind_text(item.text()))
        if item.column() == 0:
            names = self._monitor_names()
            for r in range(self.conditions.rowCount()):
                combo = self.conditions.cellWidget(r, 1)
                keep = combo.currentText()
                combo.blockSignals(True)
                combo.clear()
                combo.addItems(names if keep in names else names + [keep])
                combo.setCurrentText(keep)
                combo.blockSignals(False)
        self.schedule()

    def add_monitor_row(self) -> None:
        names = set(self._monitor_names())
        i = 1
        while f"m{i}" in names:
            i += 1
        self._loading = True
        self._append_monitor(f"m{i}", "1, 2")
        self._loading = False
        self.monitors.setCurrentCell(self.monitors.rowCount() - 1, 1)
        self._monitor_item_changed(self.monitors.item(self.monitors.rowCount() - 1, 0))

    def add_condition_row(self) -> None:
        names = self._monitor_names()
        basin = self.reactant.currentText() or "reactant"
        r = self.conditions.currentRow()
        if r >= 0 and self.conditions.item(r, 0) is not None:
            basin = self.conditions.item(r, 0).text()
        self._loading = True
        self._append_condition(basin, names[0] if names else "", "below", "1.0")
        self._loading = False
        self.conditions.setCurrentCell(self.conditions.rowCount() - 1, 3)
        self.schedule()

    def add_basin_row(self) -> None:
        names = {self.conditions.item(r, 0).text() for r in range(self.conditions.rowCount())
                 if self.conditions.item(r, 0) is not None}
        i = 1
        while f"product{i}" in names:
            i += 1
        monitors = self._monitor_names()
        self._loading = True
        self._append_condition(f"product{i}", monitors[0] if monitors else "", "below", "1.0")
        self._loading = False
        self.conditions.setCurrentCell(self.conditions.rowCount() - 1, 0)
        self.schedule()

    def _remove_selected(self, table: QTableWidget) -> None:
        rows = sorted({i.row() for i in table.selectedIndexes()} or {table.currentRow()}, reverse=True)
        for r in rows:
            if r >= 0:
                table.removeRow(r)
        if table is self.monitors:
            self._monitor_item_changed(QTableWidgetItem())
        else:
            self.schedule()

    # --- building rules from the form -------------------------------------------------------
    def spin_value(self, spin: QDoubleSpinBox) -> float:
        """The spin box's value, or the exact loaded value when the box only shows it rounded."""
        v = float(spin.value())
        orig = getattr(self, "_exact", {}).get(spin)
        if orig is not None and abs(round(orig, spin.decimals()) - v) < 1e-12:
            return orig
        return v

    def _err(self, problem: str, key: str) -> RulesError:
        return RulesError(EDITOR_SOURCE, problem, key=key)

    def _number(self, text: str, key: str) -> float:
        try:
            return float(text.strip())
        except ValueError:
            raise self._err(f"{text.strip()!r} is not a number", key) from None

    def build_rules(self) -> Rules:
        """Rules from the form, validated by the core's reader; RulesError with a plain sentence if not."""
        monitors: dict[str, Monitor] = {}
        for r in range(self.monitors.rowCount()):
            name = (self.monitors.item(r, 0).text() if self.monitors.item(r, 0) else "").strip()
            atoms_text = self.monitors.item(r, 1).text() if self.monitors.item(r, 1) else ""
            key = f"monitors.{name or f'(row {r + 1})'}"
            if not name:
                raise self._err(f"monitor in row {r + 1} has no name", "monitors")
            if name in monitors:
                raise self._err(f"the monitor name {name!r} is used twice", key)
            try:
                atoms = tuple(int(a) for a in atoms_text.replace(",", " ").split())
            except ValueError:
                raise self._err(f"atoms must be whole numbers from 1, e.g. '1, 6'; got {atoms_text!r}", key) from None
            monitors[name] = Monitor(name, atoms)
        basins: dict[str, list[Condition]] = {}
        for r in range(self.conditions.rowCount()):
            bname = (self.conditions.item(r, 0).text() if self.conditions.item(r, 0) else "").strip()
            mon = self.conditions.cellWidget(r, 1).currentText().strip()
            kind = self.conditions.cellWidget(r, 2).currentText()
            vals = self.conditions.item(r, 3).text() if self.conditions.item(r, 3) else ""
            key = f"basins.{bname}.{mon}"
            if not bname:
                raise self._err(f"the condition in row {r + 1} names no basin", "basins")
            if any(c.monitor == mon for c in basins.get(bname, [])):
                raise self._err(f"basin {bname!r} has two conditions on {mon!r}; combine them (between)", key)
            if kind == "between":
                parts = [p for p in vals.replace(",", " ").split() if p]
                if len(parts) != 2:
                    raise self._err(f"'between' needs two values 'lo, hi'; got {vals!r}", key)
                cond = Condition(mon, "between", lo=self._number(parts[0], key), hi=self._number(parts[1], key))
            elif kind == "below":
                cond = Condition(mon, "below", hi=self._number(vals, key))
            else:
                cond = Condition(mon, "above", lo=self._number(vals, key))
            basins.setdefault(bname, []).append(cond)
        # nearest-atom conditions have no row in this form: they are kept as the loaded rules have them
        kept_nearest = {b.name: b.nearest for b in self.rules.basins.values() if b.nearest} if self.rules else {}
        for bname in kept_nearest:
            basins.setdefault(bname, [])
        reactant = self.reactant.currentText().strip()
        if reactant not in basins and basins:
            reactant = self.rules.reactant if self.rules is not None and self.rules.reactant in basins else reactant
        if [self.reactant.itemText(i) for i in range(self.reactant.count())] != list(basins):
            self.reactant.blockSignals(True)
            self.reactant.clear()
            self.reactant.addItems(list(basins))
            self.reactant.setCurrentText(reactant)
            self.reactant.blockSignals(False)
        off = lambda v: None if v <= 0 else float(v)  # noqa: E731
        flags = FlagLimits(late_commit_fs=off(self.spin_value(self.late)),
                           max_energy_drift=off(self.spin_value(self.drift)),
                           energy_unit=self.energy_unit.currentText(),
                           min_length_fs=off(self.spin_value(self.min_length)))
        base = self.rules
        draft = Rules(monitors=monitors, basins={b: Basin(b, tuple(c), kept_nearest.get(b, ()))
                                                 for b, c in basins.items()},
                      reactant=reactant, dwell_fs=self.spin_value(self.dwell), flags=flags,
                      time_gap=base.time_gap if base is not None else None, name=self.name.text().strip(),
                      allow_overlap=base.allow_overlap if base is not None else False)
        n_atoms = self.state.tset.n_atoms if self.state.tset is not None else None
        rules = parse_rules(draft.to_toml(), source=EDITOR_SOURCE, n_atoms=n_atoms)
        return replace(rules, origin=f"{EDITOR_SOURCE} (not saved)")

    # --- applying ---------------------------------------------------------------------------
    def schedule(self, *_args) -> None:
        """An edit happened: re-classify after a short pause (newer edits restart the pause)."""
        if self._loading:
            return
        self.timer.start()

    def _set_error(self, text: str) -> None:
        self.error_text = text
        self.error.setText(f"Not applied: {text}\nThe previous rules stay in force." if text else "")
        self.error.setVisible(bool(text))

    def apply_now(self) -> bool:
        """Validate the form and, if valid, start re-classifying; False (message shown) if invalid."""
        self.timer.stop()
        try:
            rules = self.build_rules()
        except BasinmarkError as exc:
            self._set_error(str(exc))
            self.invalid.emit(str(exc))
            return False
        self._set_error("")
        self.rules = rules
        self._sync_reactant(rules)
        return self.apply_rules(rules)

    def _sync_reactant(self, rules: Rules) -> None:
        names = rules.basin_names
        if [self.reactant.itemText(i) for i in range(self.reactant.count())] != names:
            self._loading = True
            self.reactant.clear()
            self.reactant.addItems(names)
            self.reactant.setCurrentText(rules.reactant)
            self._loading = False

    def apply_rules(self, rules: Rules) -> bool:
        tset = self.state.tset
        if tset is None:
            self._set_error("open a set first")
            return False
        self.rules = rules
        self.counts.setText("Classifying…")
        self.worker.start(tset, rules)
        return True

    def _on_done(self, out: dict) -> None:
        if out["generation"] != self.worker.generation or out.get("cancelled"):
            return  # a newer edit is on its way
        if out.get("tset") is not self.state.tset:
            return  # another set was opened meanwhile
        if out["error"]:
            self._set_error(out["error"])
            self._show_counts()
            return
        self._own_rules = out["rules"]
        self.state.set_rules(out["rules"], out["classification"])
        self.last_seconds = out.get("seconds")
        self._show_counts()
        self._update_buttons()
        self.message.emit("Classified again with the edited rules (not saved yet).")
        self.reclassified.emit()

    def apply_threshold(self, targets: list, value: float) -> bool:
        """A threshold line was dragged: set that bound of every listed condition and re-classify."""
        rules = self.state.rules if self.state.rules is not None else self.rules
        if rules is None:
            return False
        try:
            if targets and targets[0][1] in rules.monitors:  # a drag's value to the precision shown
                value = round_as_shown(value, rules.monitors[targets[0][1]].kind)
            for basin, monitor, bound in targets:
                rules = rules.with_threshold(basin, monitor, bound, value)
        except BasinmarkError as exc:
            self._set_error(str(exc))
            self.message.emit(f"Threshold not changed: {exc}")
            self.invalid.emit(str(exc))
            return False
        self.load(rules)
        return self.apply_rules(rules)

    def revert(self) -> None:
        self.timer.stop()
        self.load(self.state.rules)

    # --- counts and saving ------------------------------------------------------------------
    def _show_counts(self) -> None:
        from basinmark.core.classify import outcome_counts

        st = self.state
        if st.rules is None or st.classification is None:
            self.counts.setText("No classification yet." if st.tset is not None else "No set open.")
        else:
            table = outcome_counts(st.classification, st.rules)
            parts = [f"{r.outcome}: {r.count}" for r in table.itertuples(index=False)]
            self.counts.setText(f"Automatic outcomes under these rules ({len(st.classification)} runs): "
                                + " · ".join(parts))
        unsaved = st.rules is not None and getattr(st.rules, "path", None) is None
        self.saved_note.setText("These rules are not saved: Save Rules writes them, and automatic labels "
                                "can only be recorded from saved rules." if unsaved else "")

    def _update_buttons(self) -> None:
        st = self.state
        self.save_button.setEnabled(st.rules is not None)
        unsaved = st.rules is not None and getattr(st.rules, "path", None) is None
        self.record_button.setEnabled(st.rules is not None and st.classification is not None and not st.readonly
                                      and not unsaved)
        self.record_button.setToolTip(
            "The label journal is read-only here" if st.readonly else
            "Save the rules first: automatic labels record the hash of a saved rules file" if unsaved else
            "Write every run's automatic outcome under these saved rules into the label journal as one batch")

    def save(self, path: str | Path | None = None) -> bool:
        """Write the rules in force to ``path`` (default: the rules file they came from)."""
        st = self.state
        rules = st.rules
        if rules is None:
            self.message.emit("There are no rules to save.")
            return False
        target = Path(path) if path is not None else self.file_path
        if target is None:
            return self.save_as()
        template = self.file_path if self.file_path is not None and Path(self.file_path).is_file() else None
        try:  # the file the rules came from is the template: its comments, order and layout are kept
            saved = rules.save(target, template=template)
        except (BasinmarkError, OSError) as exc:
            self._set_error(f"rules not saved: {exc}")
            return False
        self.file_path = target
        # same rules, now with their file and its hash (what future automatic labels record)
        self._own_rules = saved
        st.rules = saved
        self.rules = saved
        self._show_counts()
        self._update_buttons()
        lost = [w.split(": ", 1)[-1] for w in saved.warnings if "afresh" in w]
        if lost:  # said plainly: the chemist's comments did not survive this save
            self.saved_note.setText(f"Saved, but {lost[0]}.")
            self.message.emit(f"Rules saved to {target}, but {lost[0]}")
        else:
            self.message.emit(f"Rules saved to {target}")
        self.saved.emit(str(target))
        return True

    def save_as(self) -> bool:
        start = str(self.file_path or (Path(self.state.tset.root) / "basins.toml" if self.state.tset else "basins.toml"))
        path, _ = QFileDialog.getSaveFileName(self, "Save rules as", start, "Rules (*.toml)")
        return self.save(path) if path else False

    def record_automatic_labels(self) -> int:
        """Write the current classification into the journal as one batch of automatic labels."""
        from basinmark.core.classify import write_automatic_labels

        st = self.state
        if st.rules is None or st.classification is None:
            self.message.emit("Nothing is classified yet.")
            return 0
        if st.readonly or st.journal is None:
            self.message.emit("The label journal is read-only here; no automatic labels were recorded.")
            return 0
        if getattr(st.rules, "path", None) is None:
            self._set_error("save the rules first: automatic labels record the hash of a saved rules file")
            return 0
        try:
            n = write_automatic_labels(st.journal, st.classification, st.rules)
        except BasinmarkError as exc:
            self._set_error(f"automatic labels not recorded: {exc}")
            return 0
        st.refresh_labels()
        self.message.emit(f"Recorded {n} automatic labels from {Path(st.rules.path).name} "
                          f"(rules hash {st.rules.sha256[:12]}).")
        return n


def install_rules_editor(window) -> QDockWidget:
    """Add the Rules dock, File ▸ Save Rules, Analysis ▸ Edit Rules, Labels ▸ Record Automatic Labels, and
    route dragged threshold lines through the editor (debounced, cancellable background re-classification)."""
    editor = RulesEditor(window.state, window)
    from basinmark.gui.analysis_area import add_analysis_dock

    dock = add_analysis_dock(window, "rules", "Rules", editor)
    editor.message.connect(lambda text: window.statusBar().showMessage(text, 8000))

    traces_view = getattr(window, "traces", None)
    if traces_view is not None:
        try:  # the window's own handler re-classifies without debounce; the editor takes over
            traces_view.threshold_moved.disconnect(window.move_threshold)
        except (RuntimeError, TypeError, AttributeError):
            pass

        def moved(targets: list, value: float) -> None:
            if not editor.apply_threshold(targets, value):
                traces_view.redraw()  # put the line back

        traces_view.threshold_moved.connect(moved)

    show = dock.toggleViewAction()
    show.setText("Edit &Rules")
    show.setShortcut(QKeySequence("Ctrl+Shift+B"))
    show.setToolTip("Edit monitors, basins and flag limits; the set is classified again as you type "
                    "(Ctrl+Shift+B)")
    show.triggered.connect(lambda checked: dock.raise_() if checked else None)
    find_menu(window, "menu_analysis", "&Analysis").addAction(show)
    window.addAction(show)

    save = QAction("Save &Rules", window)
    save.setObjectName("action_save_rules_here")
    save.setShortcut(QKeySequence("Ctrl+S"))
    save.setToolTip("Write the rules in force to their rules file (Ctrl+S)")
    save.triggered.connect(lambda: editor.save())
    file_menu = _file_menu(window)
    if file_menu is not None:
        acts = file_menu.actions()
        before = next((a for a in acts if a is getattr(window, "actions_", {}).get("save_rules")), None)
        file_menu.insertAction(before, save) if before is not None else file_menu.addAction(save)
    window.addAction(save)
    save_as = getattr(window, "actions_", {}).get("save_rules")
    if save_as is not None:  # runs after the window's own handler (connected first)
        save_as.triggered.connect(lambda *_a: editor.sync_saved())

    record = QAction("Record &Automatic Labels", window)
    record.setObjectName("action_record_auto")
    record.setToolTip("Write every run's automatic outcome under the saved rules into the journal as one batch")

    def do_record() -> None:
        st = window.state
        if st.classification is None:
            editor.record_automatic_labels()
            return
        if window.isVisible() and not getattr(window, "_confirm_off", False):
            ans = QMessageBox.question(window, "Record automatic labels",
                                       f"Write {len(st.classification)} automatic labels into the journal?")
            if ans != QMessageBox.StandardButton.Yes:
                return
        editor.record_automatic_labels()

    record.triggered.connect(do_record)
    # (not the Labels menu: the window rebuilds that one whenever the rules change)
    find_menu(window, "menu_analysis", "&Analysis").addAction(record)
    window.addAction(record)
    def banner(*_a) -> None:
        # the window's banner for unsaved rules (its own key, so the window's Save Rules As clears it too)
        rules = window.state.rules
        unsaved = rules is not None and getattr(rules, "path", None) is None
        window.set_notice("rules_edited", "Rules changed here and not saved: the counts shown follow the edited "
                                          "rules. File ▸ Save Rules writes them." if unsaved else None)

    editor.reclassified.connect(banner)
    editor.saved.connect(banner)
    window.rules_editor = editor
    window.rules_dock = dock
    return dock


def _file_menu(window):
    bar = getattr(window, "menu_bar", None) or window.menuBar()
    for act in bar.actions():
        if act.menu() is not None and (act.menu().objectName() == "menu_file" or act.text().replace("&", "") == "File"):
            return act.menu()
    return None
