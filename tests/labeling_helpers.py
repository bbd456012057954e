"""Shared helpers for the labeling tests of the window: a toy set, real clicks and keys, journal reading."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Callable

from PySide6.QtCore import QPoint, QSettings, Qt
from PySide6.QtTest import QTest

from basinmark.core.sets import journal_path
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

#: twelve toy runs: two with an energy drift (flagged), recrossing and unfinished ones
OUTCOMES = ["left", "right", "recrossing", "unfinished", "left", "right", "left", "right", "recrossing",
            "left", "unfinished", "left"]
DRIFT = [4, 7]          # toy-005 and toy-008 carry the energy_drift flag


def settings_at(path: Path) -> QSettings:
    return QSettings(str(path), QSettings.Format.IniFormat)


def make_root(tmp_path: Path) -> Path:
    return make_toy_set(tmp_path / "toyset", OUTCOMES, drift_runs=DRIFT)


def open_window(qtbot, tmp_path: Path, root: Path, settings: QSettings | None = None,
                install: Callable[[MainWindow], object] | None = None, timeout_ms: int = 20000) -> MainWindow:
    """A window on ``root`` read from its files (until ``set_loaded``); ``install(win)`` adds panels before it is
    shown."""
    win = MainWindow(settings or settings_at(tmp_path / "settings.ini"))
    qtbot.addWidget(win)
    if install is not None:
        install(win)
    win.show()
    qtbot.waitExposed(win)
    win.activateWindow()
    with qtbot.waitSignal(win.set_loaded, timeout=timeout_ms):
        win.open_set(root, use_cache=False)
    return win


def journal_events(root: Path, kinds=("label", "undo")) -> list[dict]:
    path = journal_path(root)
    if not path.is_file():
        return []
    out = [json.loads(x) for x in path.read_text().splitlines() if x.strip()]
    return [e for e in out if e.get("kind") in kinds and e.get("source") == "hand"]


class JournalTail:
    """The journal's hand events, read on from where the last call stopped (fast over thousands of calls)."""

    def __init__(self, root: Path) -> None:
        self.path = journal_path(root)
        self.offset = 0
        self.events: list[dict] = []

    def __call__(self) -> list[dict]:
        if self.path.is_file():
            with open(self.path, "rb") as fh:
                fh.seek(self.offset)
                data = fh.read()
            end = data.rfind(b"\n") + 1
            self.offset += end
            for line in data[:end].splitlines():
                if line.strip():
                    e = json.loads(line)
                    if e.get("kind") in ("label", "undo") and e.get("source") == "hand":
                        self.events.append(e)
        return list(self.events)


def click_filter(win: MainWindow, key: str) -> None:
    QTest.mouseClick(win.run_table.filter_buttons[key], Qt.MouseButton.LeftButton)


def click_row(win: MainWindow, row: int, column: int = 0) -> str:
    """Click a row of the run table as a person would; returns the run id written in that row."""
    view = win.run_table.view
    idx = view.model().index(row, column)
    view.scrollTo(idx)
    rect = view.visualRect(idx)
    QTest.mouseClick(view.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, rect.center())
    return view.model().index(row, 0).data()


def click_header(win: MainWindow, column: int) -> None:
    header = win.run_table.view.horizontalHeader()
    x = header.sectionViewportPosition(column) + header.sectionSize(column) // 2
    QTest.mouseClick(header.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                     QPoint(x, header.height() // 2))
