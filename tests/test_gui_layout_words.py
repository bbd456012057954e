"""The map key, the table's flag words, one spelling, and transient messages across sets."""

from __future__ import annotations

import ast
from pathlib import Path

import pytest
from PySide6.QtCore import QSettings
from PySide6.QtGui import QKeySequence
from PySide6.QtWidgets import QApplication

from basinmark.gui.app import install_extras
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

SRC = Path(__file__).resolve().parents[1] / "src" / "basinmark"


@pytest.fixture
def win(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", ["left", "right", "recrossing", "unfinished", "left"], drift_runs=[1])
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    install_extras(w)
    w.show()
    qtbot.waitExposed(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    yield w
    w.close()


def _settle(qtbot) -> None:
    for _ in range(3):
        QApplication.processEvents()
        qtbot.wait(20)


def _action_for(win, keys: str):
    hits = [a for a in win.findChildren(type(win.actions_["undo_label"]))
            if a.isEnabled() and any(s == QKeySequence(keys) for s in a.shortcuts())]
    assert len(hits) == 1, f"{keys} belongs to {[a.text() for a in hits]}"
    return hits[0]


def test_ctrl_m_shows_and_raises_the_map_every_time(win, qtbot):
    act = _action_for(win, "Ctrl+M")
    map_dock = win.docks["map"]
    for _ in range(3):
        win.docks["traces"].raise_()
        _settle(qtbot)
        act.trigger()
        _settle(qtbot)
        assert map_dock.isVisible() and not map_dock.visibleRegion().isEmpty()
    map_dock.close()
    _settle(qtbot)
    act.trigger()
    _settle(qtbot)
    assert map_dock.isVisible() and not map_dock.visibleRegion().isEmpty()


def test_flags_read_as_words_in_the_table(win):
    model = win.run_table.model
    col = next(c for c in range(model.columnCount()) if model.headerData(c, __import__(
        "PySide6.QtCore").QtCore.Qt.Orientation.Horizontal) == "Flags")
    shown = [model.index(r, col).data() for r in range(model.rowCount())]
    assert any(shown), "the toy set should have a flagged run"
    for text in shown:
        assert "_" not in (text or ""), text
    assert any("energy drift" in (t or "") for t in shown)


def test_opening_another_set_clears_the_passing_message(win, qtbot, tmp_path):
    win.statusBar().showMessage("Undone: left for toy-001", 60000)
    other = make_toy_set(tmp_path / "other", ["left", "right"])
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(other, use_cache=False)
    assert "Undone" not in win.statusBar().currentMessage()


def _user_strings(path: Path):
    """String literals that people read: not docstrings, not bare identifiers such as column keys."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    docs = set()
    for node in ast.walk(tree):
        if isinstance(node, (ast.Module, ast.ClassDef, ast.FunctionDef, ast.AsyncFunctionDef)):
            body = node.body
            if body and isinstance(body[0], ast.Expr) and isinstance(body[0].value, ast.Constant):
                docs.add(id(body[0].value))
    for node in ast.walk(tree):
        if isinstance(node, ast.Constant) and isinstance(node.value, str) and id(node) not in docs:
            if not node.value.isidentifier():
                yield node.lineno, node.value


def test_one_spelling_of_labeled_in_what_users_read():
    found = [f"{p.relative_to(SRC)}:{line}: {text!r}" for p in sorted(SRC.rglob("*.py"))
             for line, text in _user_strings(p) if "labelled" in text.lower() or "labelling" in text.lower()]
    assert not found, "\n".join(found)


def test_one_spelling_in_output_keys_and_source():
    """Keys a script reads (``summary --json``) and the source's own words use the same spelling as the screens."""
    found = [f"{p.relative_to(SRC)}:{n}" for p in sorted(SRC.rglob("*.py"))
             for n, line in enumerate(p.read_text(encoding="utf-8").splitlines(), 1) if "labelled" in line.lower() or "labelling" in line.lower()]
    assert not found, "\n".join(found)
