"""Rules editor offscreen: edits and dragged thresholds re-classify exactly as the core does, invalid
input keeps the previous rules, saved files reload identically, automatic labels only on request."""

from __future__ import annotations

import dataclasses
import hashlib
import json

import numpy as np
import pandas as pd
import pytest
from PySide6.QtCore import QSettings

from basinmark.core.classify import classify_set
from basinmark.core.journal import LabelJournal
from basinmark.core.rules import load_rules
from basinmark.core.sets import journal_path
from basinmark.gui.main_window import MainWindow
from basinmark.gui.rules_editor import install_rules_editor

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished", "left", "right", "left"]


def _open(qtbot, tmp_path, root) -> MainWindow:
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    qtbot.waitExposed(win)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    return win


@pytest.fixture
def win(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    w = _open(qtbot, tmp_path, root)
    install_rules_editor(w)
    yield w
    w.close()


def _row(editor, basin: str, monitor: str) -> int:
    t = editor.conditions
    for r in range(t.rowCount()):
        if t.item(r, 0).text() == basin and t.cellWidget(r, 1).currentText() == monitor:
            return r
    raise AssertionError(f"no condition {basin}.{monitor}")


def _core(win, rules) -> pd.DataFrame:
    return classify_set(win.state.tset, rules)


def _same_table(a: pd.DataFrame, b: pd.DataFrame) -> None:
    pd.testing.assert_frame_equal(a.reset_index(drop=True), b.reset_index(drop=True))


def test_editing_a_threshold_reclassifies_like_the_core(win, qtbot):
    ed = win.rules_editor
    before = win.state.rules
    assert win.state.classification["outcome"].value_counts()["left"] == 3
    r = _row(ed, "left", "d_left")
    with qtbot.waitSignal(ed.reclassified, timeout=10000):
        ed.conditions.item(r, 3).setText("1.4")      # the left runs end at 1.5 Å: no longer in 'left'
    expected = before.with_threshold("left", "d_left", "below", 1.4)
    assert win.state.rules == expected
    _same_table(win.state.classification, _core(win, expected))
    counts = win.state.classification["outcome"].value_counts()
    assert "left" not in counts and counts["unfinished"] == 4
    assert "unfinished: 4" in ed.counts.text() and "left: 0" in ed.counts.text()
    assert "not saved" in ed.saved_note.text()
    assert "not saved" in win.banner.text() and not win.banner.isHidden()
    # the run table shows the same counts
    assert win.run_table.outcome_counts().get("unfinished") == 4


def test_dragged_threshold_goes_through_the_editor(win, qtbot):
    ed = win.rules_editor
    before = win.state.rules
    with qtbot.waitSignal(ed.reclassified, timeout=10000):
        win.traces.threshold_moved.emit([("right", "d_right", "below"), ("left", "d_left", "below")], 1.4)
    expected = (before.with_threshold("right", "d_right", "below", 1.4)
                .with_threshold("left", "d_left", "below", 1.4))
    assert win.state.rules == expected
    _same_table(win.state.classification, _core(win, expected))
    assert ed.conditions.item(_row(ed, "right", "d_right"), 3).text() == "1.4"
    # the window's own handler no longer runs (it would start a job of its own)
    assert win.job is None


def test_invalid_input_shows_message_and_keeps_rules(win, qtbot):
    ed = win.rules_editor
    before, table = win.state.rules, win.state.classification
    ed.monitors.item(0, 1).setText("1, 99")
    assert not ed.apply_now()
    assert ed.error.isVisibleTo(ed) and "atom 99 is out of range" in ed.error.text()
    assert "previous rules stay in force" in ed.error.text()
    assert win.state.rules is before and win.state.classification is table
    ed.revert()
    assert not ed.error.isVisibleTo(ed) and ed.monitors.item(0, 1).text() == "1, 2"
    ed.conditions.item(_row(ed, "left", "d_left"), 3).setText("short")
    assert not ed.apply_now() and "'short' is not a number" in ed.error_text
    ed.revert()
    # overlapping basins: the core's own sentence
    ed.conditions.item(_row(ed, "left", "d_right"), 3).setText("0.5")
    ed.conditions.item(_row(ed, "right", "d_left"), 3).setText("0.5")
    assert not ed.apply_now() and "can both hold at once" in ed.error_text
    assert win.state.rules is before


def test_add_remove_monitor_and_condition(win, qtbot):
    ed = win.rules_editor
    ed.add_monitor_row()
    r = ed.monitors.rowCount() - 1
    ed.monitors.item(r, 0).setText("d_23")
    ed.monitors.item(r, 1).setText("2, 3")
    assert ed.monitors.item(r, 2).text().startswith("distance")
    ed.conditions.selectRow(_row(ed, "reactant", "d_left"))
    ed.add_condition_row()
    c = ed.conditions.rowCount() - 1
    ed.conditions.cellWidget(c, 1).setCurrentText("d_23")
    ed.conditions.cellWidget(c, 2).setCurrentText("above")
    ed.conditions.item(c, 3).setText("0.1")
    with qtbot.waitSignal(ed.reclassified, timeout=10000):
        assert ed.apply_now()
    rules = win.state.rules
    assert rules.monitors["d_23"].atoms == (2, 3)
    assert rules.basins["reactant"].condition("d_23").lo == pytest.approx(0.1)
    _same_table(win.state.classification, _core(win, rules))
    ed.conditions.selectRow(c)
    ed._remove_selected(ed.conditions)
    ed.monitors.selectRow(r)
    ed._remove_selected(ed.monitors)
    with qtbot.waitSignal(ed.reclassified, timeout=10000):
        assert ed.apply_now()
    assert "d_23" not in win.state.rules.monitors


def test_newer_edit_wins(win, qtbot):
    ed = win.rules_editor
    base = win.state.rules
    r = _row(ed, "left", "d_left")
    for v in ("1.6", "1.55", "1.45"):
        ed.conditions.item(r, 3).setText(v)
        ed.apply_now()                 # each starts a job, cancelling the one before
    qtbot.waitUntil(lambda: win.state.rules == base.with_threshold("left", "d_left", "below", 1.45), timeout=10000)
    ed.worker.wait()
    qtbot.wait(50)
    assert win.state.rules == base.with_threshold("left", "d_left", "below", 1.45)


def test_save_reloads_identically_and_labels_only_on_request(win, qtbot, tmp_path):
    ed = win.rules_editor
    root = win.state.tset.root
    with qtbot.waitSignal(ed.reclassified, timeout=10000):
        ed.conditions.item(_row(ed, "left", "d_left"), 3).setText("1.6")
    ed.late.setValue(0.0)      # switch the late-commit flag off
    ed.dwell.setValue(12.5)
    with qtbot.waitSignal(ed.reclassified, timeout=10000):
        ed.apply_now()
    def label_events():
        return [json.loads(x) for x in journal_path(root).read_text().splitlines() if '"label"' in x]
    n_before = len(label_events())
    # unsaved rules: refused, nothing written
    assert ed.record_automatic_labels() == 0 and "save the rules first" in ed.error_text
    assert len(label_events()) == n_before
    out = tmp_path / "edited.toml"
    assert ed.save(out)
    again = load_rules(out)
    assert again == win.state.rules and again.flags.late_commit_fs is None and again.dwell_fs == 12.5
    assert win.state.rules.path == out
    assert win.state.rules.sha256 == hashlib.sha256(out.read_bytes()).hexdigest()  # FIPS 180-4 via hashlib
    assert ed.saved_note.text() == "" and "not saved" not in win.banner.text()
    n = ed.record_automatic_labels()
    events = label_events()[n_before:]
    assert n == len(OUTCOMES) == len(events)
    assert {e["rules_hash"] for e in events} == {again.sha256} and {e["source"] for e in events} == {"rule"}
    by_run = {e["run"]: e["label"] for e in events}
    core = _core(win, again)
    assert by_run == dict(zip(core["run"], core["outcome"]))


def test_readonly_journal_disables_recording(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    holder = LabelJournal.open(journal_path(root), labeler="someone-else")
    try:
        w = _open(qtbot, tmp_path, root)
        install_rules_editor(w)
        assert not w.rules_editor.record_button.isEnabled()
        assert w.rules_editor.record_automatic_labels() == 0
        w.close()
    finally:
        holder.close()


def test_menus(win):
    names = {a.menu().objectName(): a.menu() for a in win.menu_bar.actions() if a.menu() is not None}
    analysis = [a.text() for a in names["menu_analysis"].actions()]
    assert "Edit &Rules" in analysis and "Record &Automatic Labels" in analysis
    file_menu = next(a.menu() for a in win.menu_bar.actions() if a.text() == "&File")
    assert "Save &Rules" in [a.text() for a in file_menu.actions()]


def test_sensitivity_sweep_matches_core(win, qtbot):
    from basinmark.core.sweep import sweep_threshold, sweep_values
    from basinmark.gui.sweep_view import install_sweep_dock

    dock = install_sweep_dock(win)
    view = win.sweep_view
    dock.toggleViewAction().trigger()
    view.basin.setCurrentText("left")
    view.monitor.setCurrentText("d_left")
    view.bound.setCurrentText("below")
    assert view.current_value() == pytest.approx(1.75)
    view.start.setValue(1.3)
    view.stop.setValue(2.1)
    view.steps.setValue(9)
    with qtbot.waitSignal(view.finished, timeout=20000):
        assert view.run() is not None
    ref = sweep_threshold(win.state.tset, win.state.rules, "left", "d_left", "below", sweep_values(1.3, 2.1, 9),
                          a="left", b="right")
    pd.testing.assert_frame_equal(view.table, ref)
    assert view.current_line.value() == pytest.approx(1.75)
    # seven runs: the core's "rough guide" note is shown, and values with no finite ratio are named
    assert "At 9 of 9 values fewer than 20 runs gave left or right" in view.note.text()
    curve = view.plot.getPlotItem().listDataItems()[-1]
    np.testing.assert_allclose(curve.yData, ref["ratio"].to_numpy(float))
    view.prod_b.setCurrentText("left")
    assert view.run() is None and "two different" in view.status.text()


def test_window_save_as_is_followed(win, qtbot, tmp_path):
    ed = win.rules_editor
    with qtbot.waitSignal(ed.reclassified, timeout=10000):
        ed.conditions.item(_row(ed, "left", "d_left"), 3).setText("1.6")
    assert not ed.record_button.isEnabled()          # unsaved rules: no automatic labels
    out = tmp_path / "via-window.toml"
    assert win.save_rules_as(out)
    ed.sync_saved()
    assert ed.file_path == out and ed.record_button.isEnabled() and ed.saved_note.text() == ""
    assert load_rules(out) == win.state.rules


def test_result_for_a_replaced_set_is_dropped(win, qtbot, tmp_path):
    ed = win.rules_editor
    old_tset = win.state.tset
    ed.conditions.item(_row(ed, "left", "d_left"), 3).setText("1.4")
    ed.timer.stop()
    rules = ed.build_rules()
    seen = []
    win.state.rules_changed.connect(lambda: seen.append(win.state.rules))
    ed.worker.start(old_tset, rules)
    other = make_toy_set(tmp_path / "other", ["right", "right"])
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(other, use_cache=False)
    ed.worker.wait()
    qtbot.wait(50)
    assert len(win.state.tset) == 2
    assert seen and all(r != rules for r in seen)   # the old set's result never reached the state


def test_untouched_values_do_not_drift(win, qtbot):
    ed = win.rules_editor
    exact = win.state.rules.with_threshold("left", "d_left", "below", 1.7523456789)
    exact = dataclasses.replace(exact, dwell_fs=12.3456789)
    ed.load(exact)
    assert ed.conditions.item(_row(ed, "left", "d_left"), 3).text() == "1.7523456789"
    ed.name.setText("renamed")          # an unrelated edit
    rebuilt = ed.build_rules()
    assert rebuilt.dwell_fs == 12.3456789
    assert rebuilt.basins["left"].condition("d_left").hi == 1.7523456789
    assert rebuilt == dataclasses.replace(exact, name="renamed")


def test_add_basin(win, qtbot):
    ed = win.rules_editor
    ed.add_basin_row()
    r = ed.conditions.rowCount() - 1
    assert ed.conditions.item(r, 0).text() == "product1"
    ed.conditions.item(r, 0).setText("middle")
    ed.conditions.cellWidget(r, 1).setCurrentText("d_left")
    ed.conditions.cellWidget(r, 2).setCurrentText("between")
    ed.conditions.item(r, 3).setText("1.9, 2.0")
    ed.add_condition_row()        # for the selected row's basin
    c = ed.conditions.rowCount() - 1
    assert ed.conditions.item(c, 0).text() == "middle"
    ed.conditions.cellWidget(c, 1).setCurrentText("d_right")
    ed.conditions.cellWidget(c, 2).setCurrentText("between")
    ed.conditions.item(c, 3).setText("1.9, 2.0")
    with qtbot.waitSignal(ed.reclassified, timeout=10000):
        assert ed.apply_now(), ed.error_text
    rules = win.state.rules
    assert rules.products == ["left", "right", "middle"]
    assert [ed.reactant.itemText(i) for i in range(ed.reactant.count())] == rules.basin_names
    _same_table(win.state.classification, _core(win, rules))


def test_nearest_atom_conditions_survive_the_editor(win, qtbot):
    """The form has no rows for nearest-atom conditions; an edit elsewhere must not drop them."""
    from basinmark.core.rules import parse_rules

    ed = win.rules_editor
    text = win.state.rules.to_toml().replace(
        "[basins.left]", "[basins.left]\nnearest = { atom = 1, among = [2, 3], is = 2 }").replace(
        "[basins.right]", "[basins.right]\nnearest = { atom = 1, among = [2, 3], is = 3 }")
    with_nearest = parse_rules(text)
    ed.load(with_nearest)
    ed.name.setText("renamed")
    rebuilt = ed.build_rules()
    assert rebuilt.basins["left"].nearest == with_nearest.basins["left"].nearest
    assert rebuilt.basins["right"].nearest[0].is_ == 3
