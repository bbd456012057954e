"""In the window: a dragged threshold is rounded as shown, Save Rules keeps the chemist's comments, and
quitting or opening another set with unsaved rule edits asks first (Save / Discard / Cancel)."""

from __future__ import annotations

import pandas as pd
import pytest
from PySide6.QtCore import QSettings
from PySide6.QtWidgets import QMessageBox

from basinmark.core.classify import classify_set
from basinmark.core.rules import load_rules
from basinmark.gui.main_window import MainWindow
from basinmark.gui.rules_editor import install_rules_editor

from gui_fixtures import TOY_RULES, make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "left", "right"]

HEADER = "# toy fork rules, our own notes\n# thresholds chosen by eye from the first runs\n"


def _commented() -> str:
    lines = []
    for line in TOY_RULES.splitlines():
        lines.append(line + ("   # the forming bond" if line.startswith("d_left = { below") else ""))
        if line == "[flags]":
            lines.insert(len(lines) - 1, "# flag limits below: keep in step with the notebook")
    return HEADER + "\n".join(lines) + "\n"


def _comments(text: str) -> list[str]:
    return [line[line.index("#"):] for line in text.splitlines() if "#" in line]


@pytest.fixture
def win(qtbot, tmp_path, monkeypatch):
    monkeypatch.delenv("BASINMARK_UNSAVED_RULES", raising=False)
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    (root / "basins.toml").write_text(_commented(), encoding="utf-8")
    w = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    w.show()
    qtbot.waitExposed(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    install_rules_editor(w)
    yield w
    monkeypatch.setenv("BASINMARK_UNSAVED_RULES", "discard")
    w.close()


def _drag(win, qtbot, value: float) -> None:
    with qtbot.waitSignal(win.rules_editor.reclassified, timeout=10000):
        win.traces.threshold_moved.emit([("left", "d_left", "below")], value)


def test_drag_then_save_keeps_comments_and_classifies_the_same(win, qtbot):
    path = win.state.tset.root / "basins.toml"
    original = path.read_text(encoding="utf-8")
    _drag(win, qtbot, 1.80958)
    assert win.state.rules.basins["left"].condition("d_left").hi == 1.81   # rounded as shown (0.01 Å)
    assert win.rules_unsaved()
    assert win.rules_editor.save()
    text = path.read_text(encoding="utf-8")
    assert _comments(text) == _comments(original) and len(_comments(text)) == 4
    assert "d_left = { below = 1.81 }   # the forming bond" in text
    again = load_rules(path)
    assert again == win.state.rules and not win.rules_unsaved()
    pd.testing.assert_frame_equal(classify_set(win.state.tset, again).reset_index(drop=True),
                                  win.state.classification.reset_index(drop=True))


def test_quitting_with_unsaved_rules_asks(win, qtbot, monkeypatch):
    asked = []

    def answer(button):
        def question(*args, **kwargs):
            asked.append(args[2])
            return button
        return question

    _drag(win, qtbot, 1.7)
    monkeypatch.setattr(QMessageBox, "question", answer(QMessageBox.StandardButton.Cancel))
    assert not win.close()                         # Cancel: the window stays, the edit too
    assert asked and "not saved" in asked[-1] and win.isVisible() and win.rules_unsaved()
    path = win.state.tset.root / "basins.toml"
    before = path.read_text(encoding="utf-8")
    # opening another set: Cancel keeps this one
    root = win.state.tset.root
    win.open_set(root.parent / "elsewhere")
    assert win.state.tset.root == root and win.job is None and len(asked) == 2
    # Save: written (comments kept), then the window closes
    monkeypatch.setattr(QMessageBox, "question", answer(QMessageBox.StandardButton.Save))
    assert win.close()
    assert len(asked) == 3 and load_rules(path).basins["left"].condition("d_left").hi == 1.7
    assert _comments(path.read_text(encoding="utf-8")) == _comments(before)


def test_discard_quits_without_writing(win, qtbot, monkeypatch):
    path = win.state.tset.root / "basins.toml"
    before = path.read_text(encoding="utf-8")
    _drag(win, qtbot, 1.7)
    monkeypatch.setattr(QMessageBox, "question", lambda *a, **k: QMessageBox.StandardButton.Discard)
    assert win.close()
    assert path.read_text(encoding="utf-8") == before


def test_no_question_without_edits(win, monkeypatch):
    def never(*_a, **_k):
        raise AssertionError("asked although nothing changed")
    monkeypatch.setattr(QMessageBox, "question", never)
    assert win.close()
