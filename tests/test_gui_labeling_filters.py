"""Quick filters show their counts, and "Needs a look" holds every run without a hand label that is
flagged or not cleanly reactive (recrossing, unfinished, ambiguous)."""

from __future__ import annotations

import pytest
from PySide6.QtCore import Qt
from PySide6.QtTest import QTest

from basinmark.core.classify import classify_set
from basinmark.core.rules import load_rules
from basinmark.core.sets import open_set
from basinmark.gui.labeler import LabelerDialog

from labeling_helpers import click_filter, make_root, open_window

pytestmark = pytest.mark.gui


@pytest.fixture
def root(tmp_path):
    return make_root(tmp_path)


def test_quick_filters_show_counts_and_needs_a_look(qtbot, tmp_path, root):
    win = open_window(qtbot, tmp_path, root)
    win.set_labeler("ines")
    panel = win.label_panel
    # hand labels: a recrossing run settled by hand, a flagged run settled by hand, one clean run labeled
    for run, label in (("toy-003", "recrossing"), ("toy-005", "left"), ("toy-001", "left")):
        win.state.set_run(run)
        assert panel.apply_label(label, reason="")
    # the reference: the core's classification of the files, read again from disk
    tset = open_set(root, use_cache=False)
    core = classify_set(tset, load_rules(root / "basins.toml", n_atoms=tset.n_atoms))
    hand = {"toy-003", "toy-005", "toy-001"}
    look = sorted(r for r, outcome, flags in zip(core["run"], core["outcome"], core["flags"])
                  if r not in hand and (flags or outcome in ("recrossing", "unfinished", "ambiguous")))
    assert look == ["toy-004", "toy-008", "toy-009", "toy-011"]
    flagged = sorted(r for r, flags in zip(core["run"], core["flags"]) if flags)
    expected = {"all": len(core), "look": len(look), "flagged": len(flagged), "unlabeled": len(core) - len(hand)}
    for key, n in expected.items():
        assert win.run_table.filter_buttons[key].text().endswith(f" {n}"), key
    click_filter(win, "look")
    assert sorted(win.run_table.visible_runs()) == look
    assert win.state.run_id == look[0] and win.run_table.selected_run() == look[0]
    for key in ("flagged", "unlabeled", "disagree", "changed", "all"):
        click_filter(win, key)
        shown = len(win.run_table.visible_runs())
        assert win.run_table.filter_buttons[key].text().endswith(f" {shown}"), key
    win.close()


def test_empty_filter_selects_no_run_and_refuses_labels(qtbot, tmp_path, root):
    win = open_window(qtbot, tmp_path, root)
    win.set_labeler("ines")
    click_filter(win, "changed")
    assert win.run_table.visible_runs() == []
    assert win.state.run_id == "" and win.label_panel.title.text() == "No run"
    assert "no run selected" in win.status_where.text()
    assert not win.run_table.empty_label.isHidden()
    win.actions_["ask_reason"].setChecked(False)
    QTest.keyClick(win.run_table.view, Qt.Key.Key_1)
    assert "No run is selected" in win.label_panel.feedback.text()
    click_filter(win, "all")                  # back to the run shown before the empty filter
    assert win.state.run_id == "toy-001" and win.run_table.selected_run() == "toy-001"
    win.close()


def test_labeler_dialog_needs_a_name(qtbot):
    dlg = LabelerDialog("old-name", "login-name", first_label=True)
    qtbot.addWidget(dlg)
    assert dlg.name.text() == "old-name"
    dlg.name.setText("  ")
    dlg._accept()
    assert not dlg.result() and "Type a name" in dlg.hint.text()
    dlg.name.setText("new-name")
    dlg._accept()
    assert dlg.result() and dlg.chosen() == "new-name"
