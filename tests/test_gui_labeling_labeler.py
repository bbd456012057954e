"""Who is labeling: the name is always in the status bar, a name kept from an earlier session (or not the
login name) is confirmed once per session on the first label, and Change Labeler… is a menu action."""

from __future__ import annotations

import pytest
from PySide6.QtCore import Qt
from PySide6.QtTest import QTest

import basinmark.gui.labeler as labeler_module
from basinmark.core.journal import default_labeler

from labeling_helpers import journal_events, make_root, open_window, settings_at

pytestmark = pytest.mark.gui


class FakePrompt:
    """Stands in for the modal dialog: records each question and gives a fixed answer."""

    def __init__(self, answer: str | None) -> None:
        self.answer = answer
        self.calls: list[dict] = []

    def __call__(self, parent, current, login, *, first_label=True, known=()):
        self.calls.append({"current": current, "login": login, "first_label": first_label})
        return self.answer


@pytest.fixture
def root(tmp_path):
    return make_root(tmp_path)


def _label(win, key=Qt.Key.Key_1) -> None:
    win.actions_["ask_reason"].setChecked(False)
    win.run_table.view.setFocus()
    QTest.keyClick(win.run_table.view, key)


def test_stored_name_unlike_the_login_is_confirmed_once_per_session(qtbot, tmp_path, root, monkeypatch):
    ini = tmp_path / "settings.ini"
    s = settings_at(ini)
    s.setValue("labeler", "previous-person")
    s.sync()
    prompt = FakePrompt("rosa")
    monkeypatch.setattr(labeler_module, "ask_labeler", prompt)
    win = open_window(qtbot, tmp_path, root, settings_at(ini))
    assert "previous-person" in win.status_labeler.text()   # visible before any label
    assert prompt.calls == []                               # nothing asked until a label is set
    _label(win)
    assert len(prompt.calls) == 1 and prompt.calls[0]["current"] == "previous-person"
    assert prompt.calls[0]["login"] == default_labeler() and prompt.calls[0]["first_label"]
    win.state.set_run("toy-002")
    _label(win, Qt.Key.Key_2)
    assert len(prompt.calls) == 1                           # once per session
    assert [e["labeler"] for e in journal_events(root)] == ["rosa", "rosa"]
    assert "rosa" in win.status_labeler.text()
    win.close()
    assert settings_at(ini).value("labeler") == "rosa"
    # the next session asks again: "rosa" now comes from an earlier session
    again = FakePrompt("rosa")
    monkeypatch.setattr(labeler_module, "ask_labeler", again)
    win2 = open_window(qtbot, tmp_path, root, settings_at(ini))
    win2.state.set_run("toy-003")
    _label(win2)
    assert len(again.calls) == 1
    win2.close()


def test_cancelling_the_question_saves_nothing_and_asks_again(qtbot, tmp_path, root, monkeypatch):
    ini = tmp_path / "settings.ini"
    s = settings_at(ini)
    s.setValue("labeler", "someone-before")
    s.sync()
    prompt = FakePrompt(None)
    monkeypatch.setattr(labeler_module, "ask_labeler", prompt)
    win = open_window(qtbot, tmp_path, root, settings_at(ini))
    _label(win)
    assert journal_events(root) == []
    assert "confirm who is labeling" in win.label_panel.feedback.text()
    prompt.answer = "someone-before"
    _label(win)
    assert len(prompt.calls) == 2
    assert [e["labeler"] for e in journal_events(root)] == ["someone-before"]
    win.close()


def test_login_name_without_a_stored_name_is_not_asked(qtbot, tmp_path, root, monkeypatch):
    prompt = FakePrompt("never")
    monkeypatch.setattr(labeler_module, "ask_labeler", prompt)
    win = open_window(qtbot, tmp_path, root)
    assert win.label_panel.labeler_name == default_labeler()
    assert default_labeler() in win.status_labeler.text()
    _label(win)
    assert prompt.calls == []
    assert [e["labeler"] for e in journal_events(root)] == [default_labeler()]
    win.close()


def test_change_labeler_is_a_menu_action(qtbot, tmp_path, root, monkeypatch):
    prompt = FakePrompt("tomas")
    monkeypatch.setattr(labeler_module, "ask_labeler", prompt)
    win = open_window(qtbot, tmp_path, root)
    act = win.actions_["change_labeler"]
    assert act in win.labels_menu.actions()
    act.trigger()
    assert prompt.calls == [{"current": default_labeler(), "login": default_labeler(), "first_label": False}]
    assert win.label_panel.labeler_name == "tomas" and "tomas" in win.status_labeler.text()
    assert win.settings.value("labeler") == "tomas"
    _label(win)    # chosen in this session: no second question
    assert len(prompt.calls) == 1
    assert [e["labeler"] for e in journal_events(root)] == ["tomas"]
    win.close()


def test_labels_menu_keeps_other_entries_when_the_rules_change(qtbot, tmp_path, root):
    win = open_window(qtbot, tmp_path, root)
    extra = win.labels_menu.addAction("Entry another panel added")
    win.state.rules_changed.emit()      # the label buttons and keys are built again
    texts = [a.text() for a in win.labels_menu.actions()]
    assert "Entry another panel added" in texts
    assert win.actions_["change_labeler"] in win.labels_menu.actions()
    label_entries = [t for t in texts if t.startswith("Label '")]
    assert label_entries == [a.text() for a in win.label_panel.label_actions.values()]
    assert extra in win.labels_menu.actions()
    win.close()
