"""The keyboard model of labeling: number keys act only in the viewer, typing in the run table finds a run
and never runs a command, the Reason field is one flow (Enter saves once, Escape cancels), Go to Run."""

from __future__ import annotations

import pytest
from PySide6.QtCore import Qt
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QLineEdit

from labeling_helpers import click_filter, click_row, journal_events, make_root, open_window

pytestmark = pytest.mark.gui


@pytest.fixture
def root(tmp_path):
    return make_root(tmp_path)


@pytest.fixture
def win(qtbot, tmp_path, root):
    w = open_window(qtbot, tmp_path, root)
    getattr(w, "set_labeler", w.label_panel.set_labeler)("kim")  # (the second: the window before this change)
    yield w
    w.close()


def test_typing_a_run_id_in_the_table_finds_it_and_writes_nothing(win, root):
    view = win.run_table.view
    view.setFocus()
    QTest.keyClicks(view, "toy-011")
    assert journal_events(root) == []
    assert win.state.run_id == "toy-011" and win.run_table.selected_run() == "toy-011"
    assert win.label_panel.pending is None and not win.label_panel.reason.hasFocus()
    assert "toy-011" in win.run_table.find_label.text()
    QTest.keyClick(view, Qt.Key.Key_Escape)   # stops finding; the next digit is a label key again
    assert not view.finding
    QTest.keyClick(view, Qt.Key.Key_2)
    assert win.label_panel.pending == ("toy-011", "right")


def test_letters_in_the_table_run_no_command(win, root):
    view = win.run_table.view
    view.setFocus()
    before = (win.state.run_id, win.state.frame, win.actions_["loop"].isChecked(),
              win.actions_["atom_numbers"].isChecked())
    QTest.keyClicks(view, "nufpl")   # next run, next unlabeled, next flagged, previous run, loop: none of them
    assert (win.state.run_id, win.state.frame, win.actions_["loop"].isChecked(),
            win.actions_["atom_numbers"].isChecked()) == before
    assert journal_events(root) == []
    assert "no run id contains it" in win.run_table.find_label.text()


def test_typing_into_the_reason_field_writes_nothing(win, root):
    reason = win.label_panel.reason
    reason.setFocus()
    QTest.keyClicks(reason, "12 fu 3456 nupa")
    assert reason.text() == "12 fu 3456 nupa"
    assert journal_events(root) == []
    assert win.state.run_id == "toy-001" and win.label_panel.pending is None


def test_enter_in_reason_writes_exactly_one_event_with_that_reason(win, root):
    click_row(win, 3)
    view = win.run_table.view
    QTest.keyClick(view, Qt.Key.Key_3)
    panel = win.label_panel
    assert panel.pending == ("toy-004", "recrossing") and panel.reason.hasFocus()
    assert "toy-004" in panel.pending_note.text() and panel.title.text() == "toy-004"
    QTest.keyClicks(panel.reason, "comes back 12 fs after")
    QTest.keyClick(panel.reason, Qt.Key.Key_Return)
    events = journal_events(root)
    assert [(e["run"], e["label"], e["reason"], e["labeler"]) for e in events] == [
        ("toy-004", "recrossing", "comes back 12 fs after", "kim")]
    assert panel.pending is None and panel.reason.text() == "" and view.hasFocus()
    QTest.keyClick(panel.reason, Qt.Key.Key_Return)   # a second Enter saves nothing more
    assert len(journal_events(root)) == 1


def test_escape_in_reason_writes_nothing_and_returns_to_the_viewer(win, root):
    win.molecule.setFocus()
    QTest.keyClick(win.molecule, Qt.Key.Key_1)
    panel = win.label_panel
    assert panel.pending == ("toy-001", "left")
    QTest.keyClicks(panel.reason, "not sure")
    QTest.keyClick(panel.reason, Qt.Key.Key_Escape)
    assert journal_events(root) == []
    assert panel.pending is None and panel.reason.text() == ""
    assert win.molecule.hasFocus()


def test_choosing_another_run_drops_a_pending_label(win, root):
    QTest.keyClick(win.run_table.view, Qt.Key.Key_2)
    assert win.label_panel.pending == ("toy-001", "right")
    click_row(win, 4)
    assert win.label_panel.pending is None
    assert "dropped" in win.label_panel.feedback.text()
    QTest.keyClick(win.label_panel.reason, Qt.Key.Key_Return)
    assert journal_events(root) == []


def test_excluded_waits_for_a_reason(win, root):
    win.actions_["ask_reason"].setChecked(False)
    QTest.keyClick(win.run_table.view, Qt.Key.Key_6)        # excluded always asks
    panel = win.label_panel
    assert panel.pending == ("toy-001", "excluded")
    QTest.keyClick(panel.reason, Qt.Key.Key_Return)
    assert journal_events(root) == [] and panel.pending is not None
    assert "needs a reason" in panel.feedback.text()
    QTest.keyClicks(panel.reason, "energy drifts")
    QTest.keyClick(panel.reason, Qt.Key.Key_Return)
    assert [(e["label"], e["reason"]) for e in journal_events(root)] == [("excluded", "energy drifts")]


def test_without_asking_a_number_key_saves_at_once(win, root):
    win.actions_["ask_reason"].setChecked(False)
    click_filter(win, "flagged")
    click_row(win, 1)
    QTest.keyClick(win.run_table.view, Qt.Key.Key_1)
    assert [(e["run"], e["label"], e["reason"]) for e in journal_events(root)] == [("toy-008", "left", "")]
    assert win.label_panel.pending is None and win.run_table.view.hasFocus()


def test_number_keys_outside_the_viewer_never_label(win, root, qtbot):
    win.actions_["ask_reason"].setChecked(False)
    for name in ("undo_button", "feedback"):
        widget = getattr(win.label_panel, name)
        widget.setFocusPolicy(Qt.FocusPolicy.StrongFocus)
        widget.setFocus()
        QTest.keyClick(widget, Qt.Key.Key_2)
    assert journal_events(root) == []
    assert "focus" in win.statusBar().currentMessage()


def test_number_keys_keep_their_meaning_while_loading(win, root):
    win.actions_["ask_reason"].setChecked(False)
    win.state.loading = True
    try:
        QTest.keyClick(win.run_table.view, Qt.Key.Key_1)
    finally:
        win.state.loading = False
    assert journal_events(root) == []
    assert "loading" in win.label_panel.feedback.text().lower()
    QTest.keyClick(win.run_table.view, Qt.Key.Key_1)
    assert [e["label"] for e in journal_events(root)] == ["left"]


def test_label_buttons_and_labeler_are_out_of_the_tab_order(win):
    panel = win.label_panel
    fields = [w for w in panel.findChildren(QLineEdit) if w.isVisible()]
    assert fields == [panel.reason, panel.note]          # the labeler's name is not a field any more
    assert panel.labeler_button.focusPolicy() == Qt.FocusPolicy.NoFocus
    assert all(b.focusPolicy() == Qt.FocusPolicy.NoFocus for b in panel.buttons.values())
    assert "kim" in win.status_labeler.text()


def test_go_to_run_completes_ids_and_shows_a_hidden_run(win, qtbot):
    click_filter(win, "flagged")
    assert win.state.run_id == "toy-005"
    QTest.keyClick(win.run_table.view, Qt.Key.Key_G, Qt.KeyboardModifier.ControlModifier)
    dlg = win.goto_dialog
    assert dlg is not None and dlg.isVisible()
    dlg.completer.setCompletionPrefix("-01")
    completions = [dlg.completer.completionModel().index(i, 0).data()
                   for i in range(dlg.completer.completionCount())]
    assert completions == ["toy-010", "toy-011", "toy-012"]
    QTest.keyClicks(dlg.field, "toy-0")
    assert not dlg.go() and "type more" in dlg.hint.text()
    dlg.field.setText("nothing-like-it")
    assert not dlg.go() and "No run named" in dlg.hint.text()
    dlg.field.setText("TOY-003")
    assert dlg.go()
    assert win.state.run_id == "toy-003" and win.run_table.selected_run() == "toy-003"
    assert win.run_table.filter_mode == "all"
    assert win.label_panel.title.text() == "toy-003"


def test_shortcut_help_says_where_keys_act(win):
    dlg = win.show_shortcuts()
    note = dlg.findChild(type(win.status_where), "keyScopeNote")
    assert note is not None and "never in a text field" in note.text() and "Ctrl+G" in note.text()
    keys = {dlg.table.item(r, 1).text(): dlg.table.item(r, 2).text() for r in range(dlg.table.rowCount())}
    assert keys["Go to Run…"] == "Ctrl+G"
    dlg.close()


def test_a_number_key_without_a_label_says_so(win, root):
    win.molecule.setFocus()
    QTest.keyClick(win.molecule, Qt.Key.Key_8)     # the toy rules give six labels
    assert journal_events(root) == [] and win.label_panel.pending is None
    assert "No label on key 8" in win.statusBar().currentMessage()
