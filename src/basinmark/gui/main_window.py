"""The main window: run table, molecule, traces, playback and labeling, wired through AppState."""

from __future__ import annotations

import codecs
import contextlib
import gc
import os
import sys
from pathlib import Path

from PySide6.QtCore import QByteArray, QObject, QSettings, QSize, Qt, QTimer, Signal
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import (QApplication, QDockWidget, QFileDialog, QLabel, QMainWindow, QMenu, QMenuBar, QMessageBox,
                               QProgressBar, QToolBar, QToolButton, QVBoxLayout, QWidget)

from basinmark import __version__
from basinmark.core.errors import BasinmarkError
from basinmark.core.journal import JournalError, JournalLockedError, LabelJournal, default_labeler
from basinmark.core.labels import all_labels
from basinmark.core.model import TrajectorySet
from basinmark.core.not_a_set import holds_no_runs, not_a_set_message
from basinmark.core.rules_keep import round_as_shown
from basinmark.core.sets import journal_path, rules_path
from basinmark.core.summary import outside_set_warning
from basinmark.gui import give_way
from basinmark.gui import labeler as labeler_dialog
from basinmark.gui.actions import build_actions, viewer_actions
from basinmark.gui import journal_elsewhere
from basinmark.gui.dialogs import FailuresDialog, ShortcutsDialog
from basinmark.gui.gc_guard import freeze_survivors, thaw
from basinmark.gui.goto_run import GotoRunDialog
from basinmark.gui.icons import icon
from basinmark.gui.label_panel import Banner, LabelPanel
from basinmark.gui.loader import FileCheckWorker, LoadJob, RulesWorker, SetLoader, close_opened
from basinmark.gui.molecule_view import MoleculeView
from basinmark.gui.playback import PlaybackBar, PlaybackController
from basinmark.gui.lock_dialog import open_or_offer_break
from basinmark.gui.run_table import RunTable
from basinmark.gui.state import AppState
from basinmark.gui.traces import TracesView

MAX_RECENT = 8

# the journal's head file is read as ASCII when a set opens: Python imports that codec on first use, and every
# import in the window's process goes through PySide6's import hook, which reads the module's source (~10 ms in
# the turn that shows a loaded set, bench/bench_window_scale.py --why); looked up once here instead
codecs.lookup("ascii")

#: the version of the saved dock layout (QMainWindow.saveState's version number, also kept as
#: ``window/layout_version``).  Raise it whenever the first layout changes enough that a layout saved by an
#: older version would undo it: such a layout is then ignored once (version 1: the 1366×768 layout with
#: the analysis views as tabs beside the traces; older versions saved version 0 and no key).
LAYOUT_VERSION = 1

#: the longest time (s) a background thread of the window's process may keep Python's lock while the window's
#: thread waits for it (``sys.setswitchinterval``; Python's default is 5 ms).  Every call from Qt into Python (a
#: table cell, a plot item's paint) needs the lock: with a busy Python thread beside a loaded 10,000-run window, a
#: repaint of the run table took 210 ms at 5 ms, 59 ms at 1 ms and 7.7 ms with no such thread (measured).  More
#: hand-overs cost the background threads little (at most a thousand a second).
SWITCH_INTERVAL_S = 0.001


class AfterPaint:
    """Calls ``fn`` two turns of the event loop from :meth:`start`, so that the paint of what this turn changed has
    a turn of its own: Qt paints at the start of a turn, before that turn's timers, so work scheduled for the next
    turn ran right after the paint it followed, as one long turn (seen as one gap by bench/bench_window_scale.py)."""

    def __init__(self, fn, parent: QObject) -> None:
        self._hop = QTimer(parent)
        self._call = QTimer(parent)
        for timer in (self._hop, self._call):
            timer.setSingleShot(True)
            timer.setInterval(0)
        self._hop.timeout.connect(self._call.start)
        self._call.timeout.connect(fn)

    def start(self) -> None:
        self._call.stop()
        self._hop.start()

    def stop(self) -> None:
        self._hop.stop()
        self._call.stop()

    def isActive(self) -> bool:  # noqa: N802  (as QTimer's)
        return self._hop.isActive() or self._call.isActive()


def _short_reason(failure) -> str:
    """``ts.xyz (one frame only, …)``: the file's name and the reason without its full path."""
    name = Path(failure.path).name
    reason = str(failure.reason)
    reason = reason.split(": ", 1)[1] if reason.startswith(str(failure.path)) and ": " in reason else reason
    return f"{name} ({reason})"


def default_settings() -> QSettings:
    return QSettings("basinmark", "basinmark")


#: how long the set's readers hold back when its first run arrives and again when it is shown (our choice: the
#: first run's turns, shown, drawn and each painted, took 35-43 ms of the window's work each at 10,000 runs)
FIRST_RUN_HOLD_S = 0.2


class MainWindow(QMainWindow):
    """One window over one set at a time."""

    set_loaded = Signal()        # a set (and its classification) finished loading
    load_failed = Signal(str)    # the folder could not be opened at all (the reason)
    rules_applied = Signal()

    def __init__(self, settings: QSettings | None = None, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        if sys.getswitchinterval() > SWITCH_INTERVAL_S:
            sys.setswitchinterval(SWITCH_INTERVAL_S)
        give_way.install(QApplication.instance())   # the window's workers hold back while a person acts
        self.settings = settings or default_settings()
        self.state = AppState(self)
        self.job: LoadJob | None = None
        self.file_check: LoadJob | None = None   # the files of the open set hashed in the background
        self._left_checks: list[LoadJob] = []    # checks of sets left meanwhile, still ending
        self.failure_dialog: FailuresDialog | None = None
        self.init_offer = None  # the offer to propose rules, for a folder without any
        self._messages: dict[str, str] = {}
        self._load_total = 0   # runs of the set being loaded (its progress' total), 0 before it is known
        self._default_state: QByteArray | None = None
        self.setWindowTitle("basinmark")
        self.setAcceptDrops(True)
        self.resize(self._fitted_size())

        self.playback = PlaybackController(self.state, self)
        self.actions_ = build_actions(self, self._slots())
        self.molecule = MoleculeView(self)
        self.traces = TracesView(self, readout=True)
        self.run_table = RunTable(self.state, self)
        self.label_panel = LabelPanel(self.state, self.actions_["undo_label"], self,
                                      labeler_action=self.actions_["change_labeler"])
        self.playback_bar = PlaybackBar(self.state, self.playback, self.actions_, self)
        self.banner = Banner(self)
        self.goto_dialog: GotoRunDialog | None = None
        self._ending = None   # (result, hold, traces' hold) between the first and fourth turns that end a load
        self._traces_timer = AfterPaint(self._draw_traces, self)
        self._labels_timer = AfterPaint(self._build_labels, self)
        self._end_timer = AfterPaint(self._end_load, self)
        self._finishing: dict | None = None   # a load's result between the fourth and fifth turns of its end
        self._finish_timer = AfterPaint(self._finish_load, self)
        self._first_timer = AfterPaint(self._show_first_run, self)   # the first run that arrives is shown apart
        # ... and its traces drawn in the turn after (_draw_first_traces), held back until then
        self._first_traces_timer = AfterPaint(self._draw_first_traces, self)
        self._first_traces_hold: contextlib.ExitStack | None = None
        self._build_layout()
        self._build_menus()
        self._build_status()
        self._attach_viewer_keys()
        self._connect()
        self._init_labeler()
        self.restore_layout()
        freeze_survivors()   # the window and its libraries: never walked by a full collection (gui/gc_guard.py)

    # --- construction ---------------------------------------------------------------------
    def _slots(self) -> dict:
        pb = self.playback
        return {
            "open_folder": self.choose_folder, "open_rules": self.choose_rules,
            "save_rules": self.save_rules_as, "quit": self.close,
            "play_pause": pb.toggle, "step_back": lambda: pb.step(-1), "step_forward": lambda: pb.step(1),
            "skip_back": lambda: pb.step(-10), "skip_forward": lambda: pb.step(10),
            "jump_start": pb.jump_start, "jump_end": pb.jump_end, "jump_ts": pb.jump_ts,
            "jump_commit": self.jump_commit, "faster": pb.faster, "slower": pb.slower, "loop": pb.set_loop,
            "next_run": lambda: self._nav(self.run_table.step_run(1), "This is the last run in the table."),
            "previous_run": lambda: self._nav(self.run_table.step_run(-1), "This is the first run in the table."),
            "next_flagged": lambda: self._nav(self.run_table.next_matching("flagged"), "No other flagged run."),
            "next_unlabeled": lambda: self._nav(self.run_table.next_matching("unlabeled"),
                                                "Every other run has a hand label."),
            "goto_run": self.goto_run,
            "undo_label": lambda: self.label_panel.undo(),
            "auto_advance": lambda on: self.settings.setValue("auto_advance", bool(on)),
            "ask_reason": self._set_ask_reason,
            "change_labeler": self.change_labeler,
            "reset_view": lambda: self.molecule.reset_view(), "fit_view": lambda: self.molecule.fit(),
            "atom_numbers": lambda on: self.molecule.set_show_numbers(on),
            "clear_monitors": lambda: self.state.clear_monitors(),
            "clear_picks": lambda: self.molecule.clear_picks(),
            "energy_unit": lambda on: self.traces.set_energy_unit("kJ/mol" if on else "kcal/mol"),
            "shortcuts": self.show_shortcuts, "about": self.show_about,
        }

    def _build_layout(self) -> None:
        centre = QWidget(self)
        lay = QVBoxLayout(centre)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.setSpacing(0)
        lay.addWidget(self.molecule, 1)
        lay.addWidget(self.playback_bar)
        self.setCentralWidget(centre)
        self.docks: dict[str, QDockWidget] = {}
        for name, title, widget, area in (
                ("runs", "Runs", self.run_table, Qt.DockWidgetArea.LeftDockWidgetArea),
                ("traces", "Traces", self.traces, Qt.DockWidgetArea.RightDockWidgetArea),
                ("label", "Label", self.label_panel, Qt.DockWidgetArea.LeftDockWidgetArea)):
            dock = QDockWidget(title, self)
            dock.setObjectName(f"dock_{name}")
            dock.setWidget(widget)
            dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                             | QDockWidget.DockWidgetFeature.DockWidgetClosable
                             | QDockWidget.DockWidgetFeature.DockWidgetFloatable)
            self.addDockWidget(area, dock)
            self.docks[name] = dock
        self.splitDockWidget(self.docks["runs"], self.docks["label"], Qt.Orientation.Vertical)
        self._first_dock_sizes()

    def _first_dock_sizes(self) -> None:
        """Run table over label panel about 2:1; table and traces about equal."""
        self.resizeDocks([self.docks["runs"], self.docks["traces"]], [480, 520], Qt.Orientation.Horizontal)
        self.resizeDocks([self.docks["runs"], self.docks["label"]], [560, 260], Qt.Orientation.Vertical)

    def _build_menus(self) -> None:
        a = self.actions_
        bar = QMenuBar(self)
        top = QWidget(self)
        tl = QVBoxLayout(top)
        tl.setContentsMargins(0, 0, 0, 0)
        tl.setSpacing(0)
        tl.addWidget(bar)
        tl.addWidget(self.banner)
        self.setMenuWidget(top)
        self.menu_bar = bar
        m = bar.addMenu("&File")
        m.addAction(a["open_folder"])
        self.recent_menu = QMenu("Open &Recent", self)
        m.addMenu(self.recent_menu)
        m.addAction(a["open_rules"])
        m.addAction(a["save_rules"])
        m.addSeparator()
        m.addAction(a["quit"])
        m = bar.addMenu("&Playback")
        for name in ("play_pause", None, "step_back", "step_forward", "skip_back", "skip_forward", None,
                     "jump_start", "jump_end", "jump_ts", "jump_commit", None, "faster", "slower", "loop"):
            m.addSeparator() if name is None else m.addAction(a[name])
        m = bar.addMenu("&Runs")
        for name in ("next_run", "previous_run", "next_flagged", "next_unlabeled", None, "goto_run"):
            m.addSeparator() if name is None else m.addAction(a[name])
        self.labels_menu = bar.addMenu("&Labels")
        m = bar.addMenu("&View")
        for name in ("reset_view", "fit_view", "atom_numbers", None, "clear_picks", "clear_monitors", "energy_unit"):
            m.addSeparator() if name is None else m.addAction(a[name])
        m.addSeparator()
        for dock in self.docks.values():
            m.addAction(dock.toggleViewAction())
        reset = QAction("Reset &Layout", self)
        reset.setObjectName("action_reset_layout")
        reset.setToolTip("Put every panel back in its first place and close the analysis tabs")
        reset.triggered.connect(self.reset_layout)
        self.actions_["reset_layout"] = reset
        m.addAction(reset)
        m = bar.addMenu("&Help")
        m.addAction(a["shortcuts"])
        m.addAction(a["about"])
        tb = QToolBar("Main", self)
        tb.setObjectName("toolbar_main")
        tb.setMovable(False)
        for name in ("open_folder", "open_rules", "save_rules", None, "previous_run", "next_run", "next_flagged",
                     "next_unlabeled", None, "reset_view", "fit_view", "atom_numbers", None, "undo_label"):
            tb.addSeparator() if name is None else tb.addAction(a[name])
        self.addToolBar(tb)
        self._fill_labels_menu()
        self._fill_recent_menu()

    def _fill_labels_menu(self) -> None:
        """The label actions at the top of the Labels menu (again after the rules changed); the rest of the
        menu, including entries other panels added, stays."""
        menu = self.labels_menu
        old = getattr(self, "_label_menu_actions", None)
        if old is None:
            menu.addSeparator()
            for name in ("undo_label", "ask_reason", "auto_advance", None, "change_labeler"):
                menu.addSeparator() if name is None else menu.addAction(self.actions_[name])
            menu.addAction(journal_elsewhere.action(self))
            old = []
        for act in old:
            menu.removeAction(act)
        acts = list(self.label_panel.label_actions.values())
        first = menu.actions()[0] if menu.actions() else None
        menu.insertActions(first, acts) if first is not None else menu.addActions(acts)
        self._label_menu_actions = acts

    def _build_status(self) -> None:
        sb = self.statusBar()
        self.status_where = QLabel(self)
        self.status_counts = QLabel(self)
        self.progress = QProgressBar(self)
        self.progress.setTextVisible(True)
        self._fit_progress("Loading 00000/00000")
        self.progress.setVisible(False)
        self.cancel_button = QToolButton(self)
        self.cancel_button.setIcon(icon("cancel"))
        self.cancel_button.setText("Cancel")
        self.cancel_button.setToolTip("Stop loading; the runs loaded so far stay usable")
        self.cancel_button.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
        self.cancel_button.setVisible(False)
        self.cancel_button.clicked.connect(self.cancel_loading)
        self.status_labeler = QToolButton(self)
        self.status_labeler.setAutoRaise(True)
        self.status_labeler.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        self.status_labeler.setToolTip("Labels are recorded under this name; click to change it")
        self.status_labeler.clicked.connect(self.change_labeler)
        sb.addWidget(self.status_where, 1)
        sb.addPermanentWidget(self.status_labeler)
        sb.addPermanentWidget(self.status_counts)
        sb.addPermanentWidget(self.progress)
        sb.addPermanentWidget(self.cancel_button)

    def _attach_viewer_keys(self) -> None:
        """Bare keys (letters, digits, arrows, Space) act only where the viewer has the focus."""
        self.viewer_widgets = [self.molecule, self.traces, self.run_table.view]
        self.traces.setFocusPolicy(Qt.FocusPolicy.ClickFocus)
        acts = viewer_actions(self.actions_)
        for w in self.viewer_widgets:
            w.addActions(acts)
        self.label_panel.set_key_widgets(self.viewer_widgets)
        self.label_panel.guard = self._label_guard
        self.label_panel.confirm_labeler = self._confirm_labeler
        self.label_panel.acting.connect(self.run_table.view.end_find)

    def _connect(self) -> None:
        st = self.state
        st.run_changed.connect(self._on_run)
        st.frame_changed.connect(self._on_frame)
        st.rules_changed.connect(self._on_rules)
        st.monitors_changed.connect(self._on_monitors)
        st.labels_changed.connect(self._update_status)
        st.labels_changed.connect(self._outside_notice)
        self.molecule.picks_changed.connect(st.set_picks)
        st.picks_changed.connect(self.molecule.set_picks)
        st.picks_changed.connect(lambda _p: self._update_status())
        st.runs_arrived.connect(self._update_status)
        self.molecule.monitor_requested.connect(st.add_monitor)
        self.traces.time_scrubbed.connect(self._on_scrub)
        self.traces.threshold_moved.connect(self.move_threshold)
        self.label_panel.message.connect(lambda text: self.statusBar().showMessage(text, 6000))
        self.label_panel.labeled.connect(self._after_label)
        self.label_panel.labeler_changed.connect(self._labeler_chosen)

    # --- layout ---------------------------------------------------------------------------
    def _fitted_size(self) -> QSize:
        """1400×900, or less where the screen (less its task bars) is smaller.

        Offscreen (tests, batch exports) there is no real screen to fit, only a nominal 800×600 one: the
        window keeps 1400×900 there so that exports and tests see the usual layout."""
        screen = self.screen() or QApplication.primaryScreen()
        if screen is None or QApplication.platformName() == "offscreen":
            return QSize(1400, 900)
        avail = screen.availableGeometry()
        return QSize(min(1400, avail.width()), min(900, avail.height()))

    def reset_layout(self) -> None:
        """Every dock back where it started (docked, core panels shown, analysis tabs closed), traces in front,
        and the window fitted to its screen."""
        for dock in self.docks.values():
            dock.setFloating(False)
        if self._default_state is not None:
            self.restoreState(self._default_state, LAYOUT_VERSION)
        for name, dock in self.docks.items():
            dock.setVisible(name in ("runs", "traces", "label", "map"))
        if "traces" in self.docks:
            self.docks["traces"].raise_()
        if not self.isMaximized() and not self.isFullScreen():
            self.resize(self._fitted_size())
        self._first_dock_sizes()
        self.statusBar().showMessage("Layout reset.", 4000)

    # --- settings -------------------------------------------------------------------------
    def restore_layout(self) -> None:
        """Window geometry, dock layout and energy unit from the settings (again after adding docks).

        The layout before restoring (every dock added so far, in its first place) is what Reset Layout
        returns to."""
        self._default_state = self.saveState(LAYOUT_VERSION)
        geo = self.settings.value("window/geometry")
        st = self.settings.value("window/state")
        try:
            saved_version = int(self.settings.value("window/layout_version", 0))
        except (TypeError, ValueError):
            saved_version = 0
        if saved_version != LAYOUT_VERSION:
            # a layout (and window size) from another version would undo the current first layout: ignored
            # once, and this version's layout is saved on closing
            if isinstance(st, QByteArray) and not st.isEmpty():
                self.statusBar().showMessage("The window layout saved by an older version was not restored; "
                                             "this version's layout is shown.", 8000)
            geo = st = None
        if isinstance(geo, QByteArray) and not geo.isEmpty():
            self.restoreGeometry(geo)
        if isinstance(st, QByteArray) and not st.isEmpty():
            self.restoreState(st, LAYOUT_VERSION)
        self.traces.set_energy_unit(str(self.settings.value("energy_unit", "kcal/mol")))
        self.actions_["energy_unit"].setChecked(self.traces.energy_unit == "kJ/mol")
        self.actions_["auto_advance"].setChecked(str(self.settings.value("auto_advance", "false")).lower() == "true")
        self.actions_["ask_reason"].setChecked(str(self.settings.value("ask_reason", "true")).lower() == "true")
        self.label_panel.ask_reason = self.actions_["ask_reason"].isChecked()

    def save_settings(self) -> None:
        self.settings.setValue("window/geometry", self.saveGeometry())
        self.settings.setValue("window/state", self.saveState(LAYOUT_VERSION))
        self.settings.setValue("window/layout_version", LAYOUT_VERSION)
        self.settings.setValue("labeler", self.label_panel.labeler_name)
        self.settings.setValue("energy_unit", self.traces.energy_unit)
        self.settings.sync()

    def recent_sets(self) -> list[str]:
        value = self.settings.value("recent", [])
        if isinstance(value, str):
            value = [value]
        return [str(v) for v in (value or [])]

    def _remember(self, path: Path) -> None:
        p = str(Path(path).resolve())
        recent = [p] + [r for r in self.recent_sets() if r != p]
        self.settings.setValue("recent", recent[:MAX_RECENT])
        self._fill_recent_menu()

    def _fill_recent_menu(self) -> None:
        self.recent_menu.clear()
        recent = self.recent_sets()
        for p in recent:
            act = self.recent_menu.addAction(p)
            act.triggered.connect(lambda _c=False, path=p: self.open_set(path))
        self.recent_menu.setEnabled(bool(recent))

    # --- unsaved rule edits ----------------------------------------------------------------
    def rules_unsaved(self) -> bool:
        """True when the rules in force were edited here (a dragged threshold, the editor) and not saved."""
        rules = self.state.rules
        return rules is not None and getattr(rules, "path", None) is None and self.state.tset is not None

    def _rules_home(self) -> Path | None:
        editor = getattr(self, "rules_editor", None)
        if editor is not None and editor.file_path is not None:
            return Path(editor.file_path)
        return rules_path(self.state.tset.root) if self.state.tset is not None else None

    def keep_or_drop_rules(self, doing: str) -> bool:
        """Before ``doing`` (quitting, opening another set or rules file) with unsaved rule edits, ask: Save
        (then go on if the save worked), Discard (go on) or Cancel (stay).  True means go on.

        BASINMARK_UNSAVED_RULES=discard|save answers without asking (scripted sessions and the test suite)."""
        if not self.rules_unsaved():
            return True
        answer = os.environ.get("BASINMARK_UNSAVED_RULES", "").strip().lower()
        if answer not in ("save", "discard"):
            home = self._rules_home()
            where = f" to {home.name}" if home is not None else ""
            button = QMessageBox.question(
                self, "Unsaved rule changes",
                f"The rules were changed here and not saved. Save them{where} before {doing}?",
                QMessageBox.StandardButton.Save | QMessageBox.StandardButton.Discard
                | QMessageBox.StandardButton.Cancel, QMessageBox.StandardButton.Save)
            answer = {QMessageBox.StandardButton.Save: "save",
                      QMessageBox.StandardButton.Discard: "discard"}.get(button, "cancel")
        if answer == "discard":
            return True
        if answer == "save":
            editor = getattr(self, "rules_editor", None)
            if editor is not None:
                return editor.save()
            home = self._rules_home()
            return self.save_rules_as(home) if home is not None else self.save_rules_as()
        return False

    def closeEvent(self, event) -> None:  # noqa: N802
        if not self.keep_or_drop_rules("quitting"):
            event.ignore()
            return
        self.playback.pause()
        if self.job is not None:
            self.job.wait(5000)
        for check in [self.file_check, *self._left_checks]:
            if check is not None:
                check.wait(10000)   # its thread must end before the window (its parent) is destroyed
        self.save_settings()
        self.state.set_journal(None)
        gc.unfreeze()   # what this window froze is the collector's again (collected with everything else later)
        super().closeEvent(event)

    # --- opening ----------------------------------------------------------------------------
    def choose_folder(self) -> None:
        start = self.recent_sets()[0] if self.recent_sets() else str(Path.home())
        path = QFileDialog.getExistingDirectory(self, "Open a set folder", start)
        if path:
            self.open_set(path)

    def choose_rules(self) -> None:
        if self.state.tset is None:
            self.statusBar().showMessage("Open a set first; rules classify the runs of a set.", 6000)
            return
        path, _ = QFileDialog.getOpenFileName(self, "Open a rules file", str(self.state.tset.root),
                                              "Rules (*.toml);;All files (*)")
        if path and self.keep_or_drop_rules("opening another rules file"):
            self.apply_rules(path)

    def open_set(self, path: str | Path, rules_file: str | Path | None = None, *, use_cache: bool = True) -> None:
        """Start loading a set in the background; the first run shows as soon as it is read.

        With unsaved rule edits the user is asked first (:meth:`keep_or_drop_rules`); Cancel opens nothing."""
        if not self.keep_or_drop_rules("opening another set"):
            self.statusBar().showMessage("Not opened: the rule changes are still unsaved.", 6000)
            return
        if self._ending is not None:  # a load ending: what it held back is let go, the rest dropped
            _result, hold, traces_hold = self._ending
            self._ending = None
            self._traces_timer.stop()
            self._labels_timer.stop()
            self._end_timer.stop()
            traces_hold.close()
            hold.close()
        if self._finishing is not None:   # its last turn is not wanted any more: the new load ends it
            self._finishing = None
            self._finish_timer.stop()
        if self.job is not None:
            self.job.cancel()
            self.job.wait(5000)
            self.job = None
        self._first_timer.stop()
        self._draw_first_traces()   # a first run's traces still held back: let go
        if self.file_check is not None:
            self.file_check.cancel()   # it ends on its own; its finding is about the set being left
            self._left_checks = [c for c in self._left_checks if c.thread.isRunning()] + [self.file_check]
            self.file_check = None
        self.playback.pause()
        self.state.set_journal(None)
        self._messages.clear()
        self.statusBar().clearMessage()  # a passing message ("Undone …") belongs to the set it was about
        self._show_banner()
        path = Path(path).expanduser()
        leaving = self.state.tset is not None and len(self.state.tset) > 0
        self.state.set_set(TrajectorySet(path, {}, metadata={"name": path.name}))
        if leaving:
            # the set left is let go: its objects (frozen as they arrived) and their cycles are collected now, once,
            # before the new set's runs arrive (gui/gc_guard.py)
            thaw()
        self.setWindowTitle(f"{path.name} — basinmark")
        # the set's journal, when it has one, is opened by the loader (off this thread); see _open_journal
        ask = (journal_elsewhere.remembered(self.settings, path), self.label_panel.labeler_name or None)
        job = LoadJob(SetLoader(path, rules_file, use_cache=use_cache, journal=ask), self)
        job.progress.connect(self._on_progress)
        job.run_loaded.connect(self._on_first_runs)
        self._auto_run = ""
        job.finished.connect(self._on_loaded)
        self.job = job
        self._busy(True, "Loading")
        job.start()

    def _on_first_runs(self, trajs) -> None:
        # a batch (gui/loader.LoadJob takes them every ARRIVALS_MS), listed in this turn; the first run is drawn
        # in the next, so that listing rows and drawing a run (traces, molecule, each with its paint) are two
        # turns of the event loop rather than one long one
        self.state.add_runs(trajs, show_first=False)
        if not self.state.run_id and not self._first_timer.isActive():
            self._first_timer.start()
            # the first run is what the person waits for: the threads reading the rest of the set (a cached set's
            # segments, core/set_cache.py) wait meanwhile, or its turns took 2-5x their own time (at 10,000 runs)
            give_way.acting(FIRST_RUN_HOLD_S)
        freeze_survivors(collect_young=False)   # the runs so far: left out of later full collections (gc_guard.py)

    def _show_first_run(self) -> None:
        """The set's first run arrived in the turn before: show it, unless a run is shown by now."""
        tset = self.state.tset
        if self.state.run_id or tset is None or not len(tset):
            return
        # the table, molecule and label panel show it in this turn; its traces are drawn in the next, each turn
        # painted apart (together, with their paint, the longest turn of a 10,000-run open: 113-144 ms)
        give_way.acting(FIRST_RUN_HOLD_S)   # through its traces' turn and paint
        hold = contextlib.ExitStack()
        hold.enter_context(self.traces.held())
        try:
            self.state.set_run(next(iter(tset.runs)))
        except BaseException:
            hold.close()
            raise
        self._auto_run = self.state.run_id
        self._first_traces_hold = hold
        self._first_traces_timer.start()

    def _draw_first_traces(self) -> None:
        """The turn after :meth:`_show_first_run`: the traces of the run shown, held back until now, are drawn."""
        self._first_traces_timer.stop()
        hold, self._first_traces_hold = self._first_traces_hold, None
        if hold is not None:
            hold.close()

    def move_threshold(self, targets: list, value: float) -> bool:
        """Set one threshold (of every listed basin condition) and classify the set again."""
        rules = self.state.rules
        if rules is None or self.job is not None:
            self._on_run(self.state.run_id, keep_view=True)  # put the line back
            return False
        try:
            if targets and targets[0][1] in rules.monitors:
                value = round_as_shown(value, rules.monitors[targets[0][1]].kind)
            for basin, monitor, bound in targets:
                rules = rules.with_threshold(basin, monitor, bound, value)
        except BasinmarkError as exc:
            self.statusBar().showMessage(f"Threshold not changed: {exc}", 8000)
            self._on_run(self.state.run_id, keep_view=True)
            return False
        self._messages["rules_edited"] = (f"Rules changed here (threshold now {value:.3g}) and not saved: "
                                          "File ▸ Save Rules As… writes them.")
        self.apply_rules(rules)
        return True

    def save_rules_as(self, path: str | Path | None = None) -> bool:
        rules = self.state.rules
        if rules is None or self.state.tset is None:
            self.statusBar().showMessage("There are no rules to save.", 4000)
            return False
        if path is None:
            path, _ = QFileDialog.getSaveFileName(self, "Save rules", str(Path(self.state.tset.root) / "basins.toml"),
                                                  "Rules (*.toml)")
            if not path:
                return False
        home = self._rules_home()
        try:  # the chemist's own text (comments, order) is kept: the file the rules came from is the template
            saved = rules.save(path, template=home if home is not None and home.is_file() else None)
        except (BasinmarkError, OSError) as exc:
            self.statusBar().showMessage(f"Rules not saved: {exc}", 8000)
            return False
        self.state.rules = saved
        self._messages.pop("rules_edited", None)
        self._show_banner()
        self.statusBar().showMessage(f"Rules saved to {path}", 6000)
        return True

    def apply_rules(self, rules_file) -> None:
        """Re-classify the open set with another rules file (or Rules object), in the background."""
        if self.state.tset is None or self.job is not None:
            return
        if isinstance(rules_file, (str, Path)):
            self._messages.pop("rules_edited", None)
        job = LoadJob(RulesWorker(self.state.tset, rules_file), self)
        job.progress.connect(self._on_progress)
        job.finished.connect(self._on_loaded)
        self.job = job
        self._busy(True, "Classifying")
        job.start()

    def cancel_loading(self) -> None:
        if self.job is not None:
            self.job.cancel()
            self.statusBar().showMessage("Cancelling…")

    @property
    def busy(self) -> bool:
        return self.job is not None

    def _busy(self, on: bool, phase: str = "") -> None:
        self.state.loading = on
        if on and phase == "Loading":
            self._load_total = 0
        if phase == "Loading" or not on:  # no key means a label until the set's rules are read
            self.label_panel.set_loading(on)
            self._fill_labels_menu()
        self.progress.setVisible(on)
        self.cancel_button.setVisible(on)
        if on:
            self.progress.setRange(0, 0)
            self.progress.setFormat(f"{phase}…")

    def _fit_progress(self, text: str) -> None:
        """The progress bar at least as wide as ``text`` on one line (at 1366 px its text wrapped and overlapped)."""
        need = self.progress.fontMetrics().horizontalAdvance(text) + 24
        if need > self.progress.minimumWidth():
            self.progress.setMinimumWidth(need)
            self.progress.setMaximumWidth(max(need, 220))

    def _on_progress(self, phase: str, done: int, total: int) -> None:
        self.progress.setRange(0, max(total, 1))
        self.progress.setValue(done)
        self.progress.setFormat(f"{phase} %v/%m")
        self._fit_progress(self.progress.text())
        if phase == "Loading":
            self.run_table.set_load_progress(done, total)
            if total != self._load_total:
                self._load_total = total
                self._update_status()

    def _on_loaded(self, result: dict) -> None:
        """The worker's result, in turns of the event loop, each painted before the next: this one puts the set, its
        journal and the rules in place; the next draws the traces once (:meth:`_draw_traces`); the next rebuilds the
        label table and every view of it (:meth:`_end_load`); the last ends the job (:meth:`_finish_load`).  Each
        turn stays short on a large set; the window is busy until the last."""
        opened = result.pop("journal", None)   # the set's journal, opened by the loader (or None)
        if result.get("error") or (not result.get("rules_only") and not result.get("cancelled")
                                   and holds_no_runs(result["tset"])):
            close_opened(opened)
            self.job = None
            self._busy(False)
            if result.get("error"):
                self._messages["error"] = f"Could not open the set: {result['error']}"
            else:
                # not a set: no journal, head, lock or cache is written into the folder, and it is not remembered
                self._messages["error"] = not_a_set_message(result["tset"].root, result["tset"].left_out)
            self._show_banner()
            self.statusBar().showMessage(self._messages["error"], 10000)
            self.load_failed.emit(result["error"] or self._messages["error"])
            return
        self._messages.pop("error", None)
        tset = result["tset"]
        # the set, its journal and the rules each change the label table and the traces: the traces are drawn once,
        # in the next turn; the label table is rebuilt once, in the one after; the map of a new set is measured
        # and drawn after that, in a turn of its own
        hold = contextlib.ExitStack()
        hold.enter_context(self._map_held(not result.get("rules_only")))
        hold.enter_context(self.state.labels_batch())
        traces_hold = contextlib.ExitStack()   # the traces are drawn in a turn of their own (_draw_traces), and not
        traces_hold.enter_context(self.traces.held(frozen=True))   # painted until then (the banner moves them here)
        self._draw_first_traces()   # a first run's traces not drawn yet: they wait for that turn instead
        ahead = None   # the label table the loader built beside opening the journal
        try:
            if not result.get("rules_only"):
                keep = self.state.run_id if self.state.run_id != getattr(self, "_auto_run", "") else ""
                self.state.set_set(tset)
                if keep and keep in tset:
                    self.state.set_run(keep)
                elif not self.molecule.user_moved:
                    self.molecule.reset_view()  # oriented on the set's first run, not on whichever loaded first
                self._remember(tset.root)
                said = list(tset.warnings)
                if tset.left_out or not tset.metadata.get("pairing_plain", True):
                    # runs found by a naming convention guessed from the files, or files left out: said out loud
                    said.insert(0, "Runs found: " + "; ".join(tset.notes) + "." if tset.notes else "No runs found.")
                    if tset.left_out:
                        n = len(tset.left_out)
                        said.insert(1, f"{n} file{'s' if n != 1 else ''} left out, not runs: "
                                       + "; ".join(_short_reason(f) for f in tset.left_out[:3])
                                       + (" …" if n > 3 else "") + ".")
                if said:
                    self._messages["set"] = " ".join(said)
                ahead = opened.labels if opened is not None else None
                self._open_journal(tset, result.get("rules"), opened)
                opened = None
            if result.get("rules_error"):
                self._messages["rules"] = result["rules_error"]
            else:
                self._messages.pop("rules", None)
            if not (result.get("rules_only") and result.get("rules") is None):
                self.state.set_rules(result.get("rules"), result.get("classification"),
                                     result.get("rules_error", ""))
            if not result.get("rules_only"):
                self.state.offer_labels(ahead)   # taken only if built from this journal, classification and set
        except BaseException:
            close_opened(opened)   # not taken (an error before the journal's turn): its lock is released
            self.job = None
            self._busy(False)
            traces_hold.close()
            hold.close()
            raise
        close_opened(opened)   # a rules-only result carries none; a set's was taken above
        self._ending = (result, hold, traces_hold)
        # the banner now, not in the last turn: shown or changed there, it pushed every panel down, and the traces
        # were laid out and drawn again, their axes too (a 55 ms paint at 10,000 runs)
        self._show_banner()
        self._traces_timer.start()

    def _draw_traces(self) -> None:
        """The second turn of :meth:`_on_loaded`: the traces of the run shown, drawn once for the set, journal, rules
        and monitors now in place, and painted before the label table is built (:meth:`_end_load`).  (With them in
        the first turn, it and its paint were the longest of a 10,000-run open: 115-144 ms.)"""
        if self._ending is None:
            return
        self._ending[2].close()
        self._labels_timer.start()

    def _build_labels(self) -> None:
        """The third turn of :meth:`_on_loaded`: the label table built (not yet shown); the next rebuilds its views
        (together they were the longest turn that ends a 10,000-run load from the cache: 73 ms under cProfile)."""
        if self._ending is None:
            return
        self.state.prepare_labels()
        self._end_timer.start()

    def _end_load(self) -> None:
        """The fourth turn of :meth:`_on_loaded`: the views of the label table built in the turn before (the map is
        refreshed in a later turn); the rest, and the end of busy, in a fifth (:meth:`_finish_load`), after these
        views are painted."""
        if self._ending is None:
            return
        result, hold, traces_hold = self._ending
        self._ending = None
        traces_hold.close()   # (already let go in its own turn; here when that turn was skipped)
        hold.close()   # the label table is rebuilt here, once
        self._finishing = result
        self._finish_timer.start()

    def _finish_load(self) -> None:
        """The fifth turn: not busy any more, offers, the background check of the files, ``set_loaded``.  (At
        10,000 runs the label table and this work together took 100-200 ms: one gap over the 100 ms target.)"""
        result = self._finishing
        if result is None:
            return
        self._finishing = None
        self.job = None
        self._busy(False)
        self._outside_notice()
        tset = result["tset"]
        if result.get("rules_only") and result.get("rules") is None:
            # other rules failed to load or classify: keep the ones in use, and say so
            self._messages["rules"] = (result.get("rules_error", "") + " The rules in use are unchanged.").strip()
            self._show_banner()
            self.rules_applied.emit()
            return
        journal = self.state.journal
        if journal is not None and not journal.readonly and result.get("rules") is not None:
            journal.allowed = all_labels(result["rules"])
        self._show_banner()
        self._update_status()
        if (tset is not None and len(tset) and not result.get("rules_only") and result.get("rules") is None
                and not rules_path(tset.root).exists()):
            from basinmark.gui.init_offer import InitOffer

            self.init_offer = InitOffer(self, tset)  # a folder without rules: offer to propose some
        if tset is not None and tset.failures and not result.get("rules_only"):
            self.failure_dialog = FailuresDialog(tset.name, tset.failures, self, left_out=tset.left_out)
            self.failure_dialog.open()
        if (not result.get("rules_only") and result.get("use_cache") and tset is not None and len(tset)
                and not result.get("cancelled")):
            self._check_files(tset.root, result.get("quick"))
        focus = QApplication.focusWidget()
        if not result.get("rules_only") and (focus is None or focus is self or not self.isAncestorOf(focus)):
            self.run_table.view.setFocus(Qt.FocusReason.OtherFocusReason)
        freeze_survivors()   # the set, its classification and label table (gui/gc_guard.py)
        (self.rules_applied if result.get("rules_only") else self.set_loaded).emit()

    def _map_held(self, hold: bool):
        """The map panel's :meth:`~basinmark.gui.map_view.MapPanel.held` when there is one and ``hold``, else nothing."""
        panel = getattr(self, "map_panel", None)
        return panel.held() if hold and panel is not None else contextlib.nullcontext()

    @property
    def files_checking(self) -> bool:
        """The open set's files are being hashed in the background (after a quick open from the cache)."""
        return self.file_check is not None

    def _check_files(self, root: Path, quick) -> None:
        """Hash the set's files in the background: after a quick open (sizes and times only), any file whose
        content is not what the cache shows is named in the banner and the set is read again."""
        job = LoadJob(FileCheckWorker(root, quick), self)
        job.finished.connect(lambda found, j=job: self._on_files_checked(j, found))
        self.file_check = job
        job.start()

    def _on_files_checked(self, job: LoadJob, found) -> None:
        # the job (a child of the window) holds the quick open and so the whole set it was about: let it go
        if job in self._left_checks:
            self._left_checks.remove(job)
        job.deleteLater()
        if job is not self.file_check:
            return  # about a set no longer open
        self.file_check = None
        if isinstance(found, str):
            self.statusBar().showMessage(found, 10000)
            return
        said = found.describe()
        if said:
            self.open_set(self.state.tset.root if self.state.tset is not None else job.worker.root)
            self._messages["files"] = said
            self._show_banner()

    def _open_journal(self, tset: TrajectorySet, rules, opened=None) -> None:
        """Open the set's journal for labeling, or take the one the loader opened (``opened``) if it is the journal
        this would open (same file, labeler and rules); one that is not is closed."""
        elsewhere = journal_elsewhere.remembered(self.settings, tset.root)  # Save Labels Elsewhere…
        path = elsewhere or journal_path(tset.root)
        allowed = all_labels(rules) if rules is not None else None
        name = self.label_panel.labeler_name or None
        if opened is not None and not opened.fits(path, name, rules):
            close_opened(opened)

        def opener() -> LabelJournal:
            taken = opened.take() if opened is not None else None
            return taken if taken is not None else LabelJournal.open(path, set_id=tset.name, labeler=name,
                                                                     allowed=allowed)

        try:
            # a lock left by a program that is gone: offered to break (recorded), else read-only below
            journal = open_or_offer_break(self, path, opener)
            self._messages.pop("journal", None)
            msg = ""
        except JournalLockedError as exc:
            from basinmark.core.journal_lock import describe

            holder = describe(exc.holder)
            journal = None
            if path.is_file():
                try:
                    journal = LabelJournal.open(path, readonly=True)
                    holder = journal.lock_holder or holder
                except JournalError:
                    journal = None
            msg = (f"Read-only: the label journal {path.name} is in use by {holder}. "
                   "You can look at runs and labels, but not set labels, until it is released "
                   "(if that program is gone, Labels ▸ Unlock Label Journal… breaks the lock).")
            self._messages["journal"] = msg
        except (JournalError, OSError) as exc:
            journal = None
            if path.is_file():  # still show what the journal holds, read-only
                try:
                    journal = LabelJournal.open(path, readonly=True)
                except (JournalError, OSError):
                    journal = None
            msg = f"Read-only: labels cannot be saved: {exc}"
            self._messages["journal"] = msg
        if journal is not None:
            for w in journal.warnings:
                self._messages.setdefault("journal_warn", w)
        if elsewhere and not msg:
            self._messages["journal"] = journal_elsewhere.notice(path)
        self.state.set_journal(journal, msg)

    def set_notice(self, key: str, text: str | None) -> None:
        """Show (or, with no text, clear) one line of the banner above the window, under its own key."""
        if text:
            self._messages[key] = text
        else:
            self._messages.pop(key, None)
        self._show_banner()

    def _outside_notice(self) -> None:
        """The banner's line for labels the journal holds for runs not in the set (said once the set is whole: while
        it loads, runs still to come would look missing)."""
        st = self.state
        said = None if st.loading else outside_set_warning(st.labels_outside)
        text = str(said) if said is not None else None
        if self._messages.get("outside") != text:
            self.set_notice("outside", text)

    def _show_banner(self) -> None:
        order = ("error", "files", "journal", "journal_warn", "outside", "rules", "rules_edited", "set")
        self.banner.show_message("\n".join(self._messages[k] for k in order if self._messages.get(k)))

    # --- reacting to state ------------------------------------------------------------------
    def _highlight_pairs(self) -> list[tuple[int, int]]:
        pairs: list[tuple[int, int]] = []
        rules = self.state.rules
        groups = [m.indices for m in rules.monitors.values()] if rules is not None else []
        groups += [tuple(a - 1 for a in m) for m in self.state.user_monitors]
        for idx in groups:
            pairs += list(zip(idx[:-1], idx[1:])) if len(idx) > 2 else [tuple(idx)]
        return pairs

    def _on_run(self, _run_id: str, keep_view: bool = False) -> None:
        traj = self.state.traj
        self.molecule.set_trajectory(traj, keep_view=True)
        self.molecule.set_frame(self.state.frame)
        self.molecule.set_highlight_pairs(self._highlight_pairs())
        self.traces.set_run(traj, self.state.run_result(), self.state.rules, self.state.user_monitors,
                            keep_view=keep_view)
        if self.state.run_id in self.state.run_errors:
            self.statusBar().showMessage(self.state.run_errors[self.state.run_id], 10000)
        self._on_frame(self.state.frame)

    def _on_rules(self) -> None:
        self.label_panel.rebuild()
        self._fill_labels_menu()
        self._on_run(self.state.run_id, keep_view=True)

    def _on_monitors(self) -> None:
        self.molecule.set_highlight_pairs(self._highlight_pairs())
        self.molecule.set_measures(self.state.user_monitors)  # each added measure's value on the molecule
        self.traces.set_user_monitors(self.state.user_monitors)

    def _on_frame(self, frame: int) -> None:
        traj = self.state.traj
        self.molecule.set_frame(frame)
        if traj is not None:
            self.traces.set_time(float(traj.times[frame]))
        self._update_status()

    def _on_scrub(self, t: float) -> None:
        self.playback.pause()
        self.state.set_time(t)

    def _update_status(self) -> None:
        st = self.state
        parts = []
        if st.tset is not None:
            n = len(st.tset)
            if st.loading and self._load_total > n:   # still arriving: so far, of how many
                parts.append(f"set {st.tset.name} ({n:,} of {self._load_total:,} runs loaded)")
            else:
                parts.append(f"set {st.tset.name} ({n:,} runs)")
        traj = st.traj
        if traj is not None:
            parts.append(f"run {st.run_id}")
            parts.append(f"frame {st.frame + 1}/{traj.n_frames}")
            parts.append(f"t = {traj.times[st.frame]:+.1f} fs")
        elif st.tset is not None and len(st.tset):
            parts.append("no run selected")
        if st.picked:
            parts.append("picked " + "-".join(map(str, st.picked)))
        self.status_where.setText("   ·   ".join(parts))
        counts = self.run_table.outcome_counts() if len(st.labels) else {}
        self.status_counts.setText("  ".join(f"{k}: {v:,}" for k, v in counts.items()))

    def _after_label(self, _run_id: str, _label: str) -> None:
        if not self.actions_["auto_advance"].isChecked():
            return
        mode = self.run_table.filter_mode
        ok = self.run_table.step_run(1) if mode == "all" else self.run_table.next_matching(mode)
        if not ok:
            self.statusBar().showMessage("Labeled. No further run in this filter.", 6000)

    def _nav(self, ok: bool, message: str) -> None:
        if not ok:
            self.statusBar().showMessage(message, 4000)

    def jump_commit(self) -> None:
        if not self.playback.jump_commit():
            self.statusBar().showMessage("This run has no product end (no product-side commit time).", 4000)

    # --- labeling: one current run, who labels -------------------------------------------------
    def _label_guard(self) -> str:
        """A label may go on only while the table selects exactly the run on screen."""
        if self.busy:
            return "Still loading or classifying the set; the label was not saved. Label again once it has finished."
        selected = self.run_table.selected_run()
        if selected != self.state.run_id:
            return (f"The run table selects {selected or 'no run'} but {self.state.run_id or 'no run'} is shown; "
                    "the label was not saved. Click the run you mean.")
        return ""

    def _set_ask_reason(self, on: bool) -> None:
        self.label_panel.ask_reason = bool(on)
        if not on and self.label_panel.pending is not None:
            self.label_panel.cancel_pending("The pending label was cancelled.")
        self.settings.setValue("ask_reason", bool(on))

    def _init_labeler(self) -> None:
        """The name from the settings (an earlier session) or the login name; confirmed on the first label."""
        stored = str(self.settings.value("labeler", "") or "").strip()
        self.login_name = default_labeler()
        self.labeler_source = "settings" if stored else "login"
        self.labeler_confirmed = False
        self.label_panel.set_labeler(stored or self.login_name, announce=False)
        self._show_labeler()

    def set_labeler(self, name: str) -> None:
        """Label under ``name`` (chosen in this session: no question on the first label)."""
        self.label_panel.set_labeler(name)  # tells those listening (e.g. blind labeling) when the name changed
        self._labeler_chosen(self.label_panel.labeler_name)

    def _labeler_chosen(self, name: str) -> None:
        self.labeler_source = "session"
        self.labeler_confirmed = True
        self.settings.setValue("labeler", name)
        self._show_labeler()

    def _show_labeler(self) -> None:
        name = self.label_panel.labeler_name
        self.status_labeler.setText(f"Labeler: {name}")

    def labeler_needs_confirming(self) -> bool:
        """True until the name is settled this session: it came from an earlier session or is not the login name."""
        if self.labeler_confirmed:
            return False
        return self.labeler_source == "settings" or self.label_panel.labeler_name != self.login_name

    def _known_labelers(self) -> list[str]:
        j = self.state.journal
        try:
            return [n for n in (j.labelers() if j is not None else []) if n]
        except Exception:  # a completion list must never stop labeling
            return []

    def _confirm_labeler(self) -> bool:
        """Asked once per session, before the first label, when the name is not settled (see above)."""
        if not self.labeler_needs_confirming():
            self.labeler_confirmed = True
            return True
        name = labeler_dialog.ask_labeler(self, self.label_panel.labeler_name, self.login_name,
                                          first_label=True, known=self._known_labelers())
        if not name or not name.strip():
            return False
        self.set_labeler(name.strip())
        self.statusBar().showMessage(f"Labeling as {self.label_panel.labeler_name}.", 6000)
        return True

    def change_labeler(self) -> bool:
        name = labeler_dialog.ask_labeler(self, self.label_panel.labeler_name, self.login_name,
                                          first_label=False, known=self._known_labelers())
        if not name or not name.strip():
            return False
        self.set_labeler(name.strip())
        self.statusBar().showMessage(f"Labels are now recorded under {self.label_panel.labeler_name}.", 6000)
        return True

    def goto_run(self) -> GotoRunDialog | None:
        """Go to Run… (Ctrl+G): a field completing the run ids of the open set."""
        if self.state.tset is None or not len(self.state.tset):
            self.statusBar().showMessage("Open a set first.", 4000)
            return None
        dlg = GotoRunDialog(self.state.run_ids, self.go_to_run, self)
        dlg.open()
        self.goto_dialog = dlg
        return dlg

    def go_to_run(self, run_id: str) -> bool:
        hidden = run_id not in self.run_table.visible_runs()
        if not self.run_table.go_to(run_id):
            return False
        if hidden:
            self.statusBar().showMessage(f"{run_id} was hidden by the filter, which now shows all runs.", 6000)
        self.run_table.view.setFocus(Qt.FocusReason.OtherFocusReason)
        return True

    def keyPressEvent(self, event) -> None:  # noqa: N802
        """A number key that reached the window itself: focus is outside the viewer, so say where it works."""
        if not (event.modifiers() & ~Qt.KeyboardModifier.KeypadModifier) and Qt.Key.Key_1 <= event.key() <= Qt.Key.Key_9:
            focus = QApplication.focusWidget()
            n = len(self.label_panel.label_actions)
            if focus is not None and any(w is focus or w.isAncestorOf(focus) for w in self.viewer_widgets):
                k = int(event.key()) - int(Qt.Key.Key_0)
                text = f"No label on key {k}: the rules give {n} labels (keys 1–{min(n, 9)})."
            else:
                text = ("Number keys label the run only while the run table, molecule or traces have the focus: "
                        "click one of them first.")
            self.statusBar().showMessage(text, 6000)
            event.accept()
            return
        super().keyPressEvent(event)

    # --- help -------------------------------------------------------------------------------
    def all_actions(self) -> dict:
        acts = dict(self.actions_)
        acts.update({f"label:{k}": v for k, v in self.label_panel.label_actions.items()})
        return acts

    def menu_shortcut_rows(self) -> list[tuple[str, str, str]]:
        """(menu, command, keys) for every action in the menus, including ones other modules added."""
        rows: list[tuple[str, str, str]] = []
        seen: set[int] = set()

        def walk(menu, group: str) -> None:
            for act in menu.actions():
                if act.isSeparator() or id(act) in seen or menu is self.recent_menu:
                    continue
                if act.menu() is not None:
                    walk(act.menu(), group)
                    continue
                seen.add(id(act))
                keys = ", ".join(k.toString(QKeySequence.SequenceFormat.NativeText) for k in act.shortcuts())
                rows.append((group, act.text().replace("&", ""), keys))

        for top in self.menu_bar.actions():
            if top.menu() is not None:
                walk(top.menu(), top.text().replace("&", ""))
        return rows

    def show_shortcuts(self) -> ShortcutsDialog:
        dlg = ShortcutsDialog(self.menu_shortcut_rows(), self)
        where = QLabel("Keys without Ctrl (letters, number keys, arrows, Space) act only while the run table, "
                       "the molecule or the traces have the focus, never in a text field. In the run table, "
                       "letters find a run by its id instead (Esc stops); Ctrl+G goes to any run. A number key "
                       "labels the run named in the label panel: Enter saves it with the reason typed, Esc "
                       "cancels.", dlg)
        where.setWordWrap(True)
        where.setObjectName("keyScopeNote")
        dlg.layout().insertWidget(0, where)
        dlg.open()
        self.shortcuts_dialog = dlg
        return dlg

    def show_about(self) -> None:
        QMessageBox.about(self, "About basinmark",
                          f"<b>basinmark {__version__}</b><p>Classify, inspect, hand-label and count the runs of "
                          "a reaction-dynamics set started from one transition state.</p>")

    # --- light/dark theme changes ------------------------------------------------------------
    def changeEvent(self, event) -> None:  # noqa: N802
        if event.type() == event.Type.PaletteChange:
            from basinmark.gui.actions import SPECS

            for name, act in self.actions_.items():
                spec = SPECS.get(name)
                if spec is not None and spec.icon:
                    act.setIcon(icon("pause" if name == "play_pause" and self.playback.playing else spec.icon))
            self.cancel_button.setIcon(icon("cancel"))
            self._show_banner()
        super().changeEvent(event)

    # --- drag and drop ------------------------------------------------------------------------
    def dragEnterEvent(self, event) -> None:  # noqa: N802
        urls = event.mimeData().urls() if event.mimeData().hasUrls() else []
        if urls and Path(urls[0].toLocalFile()).is_dir():
            event.acceptProposedAction()

    def dropEvent(self, event) -> None:  # noqa: N802
        urls = event.mimeData().urls()
        if urls:
            path = Path(urls[0].toLocalFile())
            if path.is_dir():
                self.open_set(path)
                event.acceptProposedAction()
