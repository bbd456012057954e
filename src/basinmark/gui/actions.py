"""Every command of the window, declared once: text, shortcuts, tooltip, icon and group.

:func:`build_actions` turns the table into QActions bound to slots; the
main window puts the same QActions into menus, the toolbar and the
shortcut help, so a shortcut is defined in exactly one place.

Keys without Ctrl/Alt (letters, arrows, Space, …) are *viewer* keys: they act only while the
focus is in the molecule, the traces or the run table (the window attaches them there), never in
a text field or another panel.  In the run table, letters find a run by its id instead (see
``run_table.RunTableView``).  Keys with Ctrl, and F1, act anywhere in the window.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Mapping

from PySide6.QtCore import Qt
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import QWidget

from basinmark.gui.icons import icon


@dataclass(frozen=True)
class ActionSpec:
    name: str
    text: str
    group: str
    shortcuts: tuple[str, ...] = ()
    tip: str = ""
    icon: str = ""
    checkable: bool = False

    @property
    def viewer(self) -> bool:
        """Only in the viewer (molecule, traces, run table): every key of it is a bare key (no Ctrl/Alt, not F1)."""
        return bool(self.shortcuts) and all(
            not any(m in k for m in ("Ctrl+", "Alt+", "Meta+")) and k not in ("F1",) for k in self.shortcuts)


ACTIONS: tuple[ActionSpec, ...] = (
    # file
    ActionSpec("open_folder", "&Open Folder…", "File", ("Ctrl+O",), "Open a folder of runs as a set", "open-folder"),
    ActionSpec("open_rules", "Open &Rules…", "File", ("Ctrl+Shift+O",),
               "Load a basins file and re-classify every run", "open-rules"),
    ActionSpec("save_rules", "&Save Rules As…", "File", ("Ctrl+Shift+S",),
               "Write the current rules (with any thresholds you dragged) to a TOML file", "save-rules"),
    ActionSpec("quit", "&Quit", "File", ("Ctrl+Q",), "Close the window"),
    # playback
    ActionSpec("play_pause", "&Play / Pause", "Playback", ("Space",), "Play or pause the current run", "play"),
    ActionSpec("step_back", "Step &Back", "Playback", ("Left",), "One frame back", "step-back"),
    ActionSpec("step_forward", "Step &Forward", "Playback", ("Right",), "One frame forward", "step-forward"),
    ActionSpec("skip_back", "Back 10 Frames", "Playback", ("Shift+Left",), "Ten frames back", "skip-back"),
    ActionSpec("skip_forward", "Forward 10 Frames", "Playback", ("Shift+Right",), "Ten frames forward",
               "skip-forward"),
    ActionSpec("jump_start", "Go to &Start", "Playback", ("Home",), "First frame (end of the backward half)",
               "jump-start"),
    ActionSpec("jump_end", "Go to &End", "Playback", ("End",), "Last frame (end of the forward half)", "jump-end"),
    ActionSpec("jump_ts", "Go to &Transition State", "Playback", ("T",), "The frame at t = 0", "jump-ts"),
    ActionSpec("jump_commit", "Go to &Commit", "Playback", ("C",), "The frame where the run entered the product basin for good "
               "(product-side commit, final entry; at either end)",
               "jump-commit"),
    ActionSpec("faster", "Faster", "Playback", ("]",), "Double the playback speed (up to 8x)"),
    ActionSpec("slower", "Slower", "Playback", ("[",), "Halve the playback speed (down to 0.25x)"),
    ActionSpec("loop", "&Loop", "Playback", ("L",), "Start again at the end", "loop", checkable=True),
    # runs
    ActionSpec("next_run", "&Next Run", "Runs", ("PgDown", "N"), "The next run in the table", "next-run"),
    ActionSpec("previous_run", "P&revious Run", "Runs", ("PgUp", "P"), "The previous run in the table",
               "previous-run"),
    ActionSpec("next_flagged", "Next &Flagged Run", "Runs", ("F",), "The next run with a flag", "next-flagged"),
    ActionSpec("next_unlabeled", "Next &Unlabeled Run", "Runs", ("U",), "The next run without a hand label",
               "next-unlabeled"),
    ActionSpec("goto_run", "&Go to Run…", "Runs", ("Ctrl+G",), "Find a run by its id (with completion)"),
    # labels
    ActionSpec("undo_label", "&Undo Label", "Labels", ("Ctrl+Z",),
               "Undo the last hand label of this run (recorded in the journal)", "undo"),
    ActionSpec("auto_advance", "&Advance After Labeling", "Labels", (),
               "After each label, go on to the next run of the current filter", checkable=True),
    ActionSpec("ask_reason", "Ask for a &Reason", "Labels", (),
               "A label key or button first asks for a reason: Enter saves label and reason together, Esc cancels. "
               "Off: labels are saved at once (those that need a reason still ask)", checkable=True),
    ActionSpec("change_labeler", "Change &Labeler…", "Labels", (),
               "The name recorded with every label you set (shown in the status bar)"),
    # view
    ActionSpec("reset_view", "&Reset View", "View", ("R",), "Initial orientation, fitted", "reset-view"),
    ActionSpec("fit_view", "&Fit Molecule", "View", ("Shift+R",), "Zoom to fit, keep the orientation", "fit-view"),
    ActionSpec("atom_numbers", "Atom &Numbers", "View", ("A",), "Show 1-based atom numbers", "atom-numbers",
               checkable=True),
    ActionSpec("clear_picks", "Clear &Picked Atoms", "View", ("Esc",), "Forget the atoms picked so far"),
    ActionSpec("clear_monitors", "&Clear Added Traces", "View", ("Ctrl+Backspace",),
               "Remove the distances, angles and dihedrals you added by picking atoms"),
    ActionSpec("energy_unit", "Energies in kJ/mol", "View", (), "Show energies in kJ/mol instead of kcal/mol",
               checkable=True),
    # help
    ActionSpec("shortcuts", "&Keyboard Shortcuts", "Help", ("F1",), "All commands and their keys", "shortcuts"),
    ActionSpec("about", "&About basinmark", "Help", (), "Version and what this tool is for"),
)

SPECS: dict[str, ActionSpec] = {s.name: s for s in ACTIONS}


def build_actions(parent: QWidget, slots: Mapping[str, Callable]) -> dict[str, QAction]:
    """One QAction per spec, triggered into ``slots``.

    Window-wide actions are added to ``parent``; viewer actions get a widget-with-children context and
    are attached to the viewer widgets by the window (:func:`viewer_actions`).
    """
    out: dict[str, QAction] = {}
    for spec in ACTIONS:
        act = QAction(spec.text, parent)
        if spec.icon:
            act.setIcon(icon(spec.icon))
        if spec.shortcuts:
            act.setShortcuts([QKeySequence(s) for s in spec.shortcuts])
        tip = spec.tip
        if spec.shortcuts:
            keys = ", ".join(QKeySequence(s).toString(QKeySequence.SequenceFormat.NativeText) for s in spec.shortcuts)
            tip = f"{tip} ({keys})" if tip else keys
        act.setToolTip(tip)
        act.setStatusTip(spec.tip)
        act.setCheckable(spec.checkable)
        slot = slots.get(spec.name)
        if slot is not None:
            if spec.checkable:
                act.toggled.connect(slot)
            else:
                act.triggered.connect(lambda checked=False, f=slot: f())
        if spec.viewer:
            act.setShortcutContext(Qt.ShortcutContext.WidgetWithChildrenShortcut)
        else:
            parent.addAction(act)
        out[spec.name] = act
    return out


def viewer_actions(actions: Mapping[str, QAction]) -> list[QAction]:
    """The actions whose keys act only while the viewer (molecule, traces, run table) has the focus."""
    return [act for name, act in actions.items() if name in SPECS and SPECS[name].viewer]


def shortcut_rows(actions: Mapping[str, QAction]) -> list[tuple[str, str, str]]:
    """(group, command, keys) for the shortcut help, from the live actions (including label keys)."""
    rows = []
    for name, act in actions.items():
        spec = SPECS.get(name)
        group = spec.group if spec else str(act.property("group") or "Labels")
        keys = ", ".join(k.toString(QKeySequence.SequenceFormat.NativeText) for k in act.shortcuts())
        rows.append((group, act.text().replace("&", ""), keys))
    return rows
