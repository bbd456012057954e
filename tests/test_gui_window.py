"""The main window end to end, offscreen: loading, labels through the journal, navigation, playback,
scrubbing, picked-atom traces, read-only journal, failed files, settings."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import QPoint, QPointF, QSettings, Qt

from basinmark.core.classify import classify_set
from basinmark.core.geometry import distance
from basinmark.core.journal import LabelJournal
from basinmark.core.rules import load_rules
from basinmark.core.sets import journal_path, open_set
from basinmark.gui.main_window import MainWindow

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished", "left", "right", "left"]


def _settings(tmp_path: Path) -> QSettings:
    return QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)


def open_window(qtbot, tmp_path: Path, root: Path, settings: QSettings | None = None) -> MainWindow:
    win = MainWindow(settings or _settings(tmp_path))
    qtbot.addWidget(win)
    win.show()
    qtbot.waitExposed(win)
    win.activateWindow()
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    return win


@pytest.fixture
def toy_root(tmp_path):
    return make_toy_set(tmp_path / "toyset", OUTCOMES, drift_runs=[4])


@pytest.fixture
def win(qtbot, tmp_path, toy_root):
    w = open_window(qtbot, tmp_path, toy_root)
    yield w
    w.close()


def _journal_events(root: Path) -> list[dict]:
    lines = journal_path(root).read_text().splitlines()
    return [json.loads(x) for x in lines if x.strip()]


def test_opening_fills_table_with_core_counts(win, toy_root):
    tset = open_set(toy_root, use_cache=False)
    core = classify_set(tset, load_rules(toy_root / "basins.toml", n_atoms=tset.n_atoms))
    assert win.run_table.model.rowCount() == len(core) == len(OUTCOMES)
    shown = win.run_table.outcome_counts()
    expected = core["outcome"].value_counts().to_dict()
    assert {k: v for k, v in shown.items() if v} == expected
    assert win.state.run_id == "toy-001"  # the set's first run, not whichever loaded first
    assert "toy-001" in win.status_where.text()


def _label_key(win, qtbot, key, reason: str = "") -> None:
    """A number key in the run table starts a pending label; the reason typed, Enter saves both."""
    win.run_table.view.setFocus()
    qtbot.keyClick(win.run_table.view, key)
    assert win.label_panel.pending is not None and win.label_panel.reason.hasFocus()
    if reason:
        qtbot.keyClicks(win.label_panel.reason, reason)
    qtbot.keyClick(win.label_panel.reason, Qt.Key.Key_Return)


def test_number_key_writes_journal_and_undo_restores(win, qtbot, toy_root):
    assert win.state.run_id == "toy-001"
    # button order: products (left, right) then recrossing, unfinished, ambiguous, excluded: key 3 = recrossing
    _label_key(win, qtbot, Qt.Key.Key_3, "turns back late")
    assert win.run_table.view.hasFocus()  # back in the viewer after Enter
    events = [e for e in _journal_events(toy_root) if e.get("kind") == "label"]
    assert events[-1]["run"] == "toy-001" and events[-1]["label"] == "recrossing"
    assert events[-1]["reason"] == "turns back late" and events[-1]["source"] == "hand"
    assert events[-1]["content_hash"] == win.state.tset["toy-001"].content_hash
    row = win.state.label_row("toy-001")
    assert row["hand_label"] == "recrossing" and row["final_label"] == "recrossing"
    r = win.run_table.model.row_of("toy-001")
    assert win.run_table.model.index(r, 2).data() == "recrossing"
    qtbot.keyClick(win.run_table.view, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier)
    assert _journal_events(toy_root)[-1]["kind"] == "undo"
    row = win.state.label_row("toy-001")
    assert row["hand_label"] == "" and row["final_label"] == "left"


def test_excluded_needs_a_reason(win, toy_root):
    assert not win.label_panel.apply_label("excluded")
    assert "reason" in win.label_panel.feedback.text()
    assert not [e for e in _journal_events(toy_root) if e.get("kind") == "label"]


def test_next_flagged_and_next_unlabeled(win, qtbot):
    view = win.molecule  # single-letter keys act in the molecule and traces, not while typing in the table
    view.setFocus()
    qtbot.keyClick(view, Qt.Key.Key_F)
    assert win.state.run_id == "toy-005"  # the only run with energy drift
    assert "energy_drift" in win.state.label_row()["flags"]
    win.state.set_run("toy-002")
    win.label_panel.apply_label("right")
    win.state.set_run("toy-001")
    win.label_panel.apply_label("left")
    view.setFocus()
    qtbot.keyClick(view, Qt.Key.Key_U)
    assert win.state.run_id == "toy-003"
    qtbot.keyClick(view, Qt.Key.Key_PageDown)
    assert win.state.run_id == "toy-004"
    qtbot.keyClick(view, Qt.Key.Key_P)
    assert win.state.run_id == "toy-003"


def test_filters_hide_rows(win):
    win.run_table.set_filter("flagged")
    assert win.run_table.visible_runs() == ["toy-005"]
    win.run_table.set_filter("all")
    assert len(win.run_table.visible_runs()) == len(OUTCOMES)


def test_playback_advances_frames_with_timer(win, qtbot):
    traj = win.state.traj
    win.playback.jump_start()
    assert win.molecule.frame == 0
    win.playback.set_speed(8.0)
    qtbot.keyClick(win.run_table.view, Qt.Key.Key_Space)
    assert win.playback.playing
    qtbot.waitUntil(lambda: win.state.frame >= 20, timeout=5000)
    qtbot.keyClick(win.run_table.view, Qt.Key.Key_Space)
    assert not win.playback.playing
    assert win.molecule.frame == win.state.frame
    assert win.traces.time == pytest.approx(traj.times[win.state.frame])
    assert win.playback_bar.slider.value() == win.state.frame


def test_step_and_jump_keys(win, qtbot):
    traj = win.state.traj
    view = win.run_table.view
    qtbot.keyClick(view, Qt.Key.Key_Home)
    assert win.state.frame == 0
    qtbot.keyClick(view, Qt.Key.Key_Right)
    assert win.state.frame == 1
    qtbot.keyClick(view, Qt.Key.Key_Right, Qt.KeyboardModifier.ShiftModifier)
    assert win.state.frame == 11
    qtbot.keyClick(view, Qt.Key.Key_End)
    assert win.state.frame == traj.n_frames - 1
    win.molecule.setFocus()
    qtbot.keyClick(win.molecule, Qt.Key.Key_T)
    assert traj.times[win.state.frame] == 0.0
    qtbot.keyClick(win.molecule, Qt.Key.Key_C)
    row = win.state.label_row()
    assert row["product_end"] == "forward"  # the toy set's products are at the forward end
    assert traj.times[win.state.frame] == pytest.approx(row["product_final_entry_fs"])


def test_dragging_time_cursor_moves_molecule_frame(win, qtbot):
    traces = win.traces
    traj = win.state.traj
    plot = traces.p_dist
    vb = plot.getViewBox()
    cursor = traces.cursors[0]
    glw = traces.glw

    def to_widget(t: float, y: float) -> QPoint:
        scene = vb.mapViewToScene(QPointF(t, y))
        return glw.mapFromScene(scene)

    y_mid = float(np.mean(vb.viewRange()[1]))
    start, end = to_widget(0.0, y_mid), to_widget(40.0, y_mid)
    vp = glw.viewport()
    qtbot.mousePress(vp, Qt.MouseButton.LeftButton, pos=start)
    for k in range(1, 11):
        qtbot.mouseMove(vp, QPoint(start.x() + (end.x() - start.x()) * k // 10, start.y()))
    qtbot.mouseRelease(vp, Qt.MouseButton.LeftButton, pos=end)
    assert cursor.value() == pytest.approx(40.0, abs=3.0)
    frame = int(np.argmin(np.abs(traj.times - cursor.value())))
    assert win.molecule.frame == frame == win.state.frame
    assert traj.times[frame] > 30.0


def test_clicking_two_atoms_adds_distance_trace_equal_to_core_geometry(win, qtbot):
    mv = win.molecule
    xy, _ = mv.project()
    qtbot.mouseClick(mv, Qt.MouseButton.LeftButton, pos=QPoint(*np.round(xy[1]).astype(int)))
    qtbot.mouseClick(mv, Qt.MouseButton.LeftButton, pos=QPoint(*np.round(xy[2]).astype(int)))
    assert win.state.user_monitors == [(2, 3)]
    curve = win.traces.curves["d(2-3)"]
    x, y = curve.getData()
    traj = win.state.traj
    np.testing.assert_allclose(x, traj.times)
    # reference: core.geometry.distance and ase.Atoms.get_distance (0-based 1, 2)
    np.testing.assert_allclose(y, distance(traj.positions, 1, 2), rtol=1e-12)
    f = 7
    assert y[f] == pytest.approx(traj.to_atoms(f).get_distance(1, 2), abs=1e-5)
    assert (1, 2) in mv._highlight


def test_locked_journal_opens_readonly_with_banner(qtbot, tmp_path, toy_root):
    holder = LabelJournal.open(journal_path(toy_root), labeler="someone-else")
    try:
        w = open_window(qtbot, tmp_path, toy_root)
        assert w.state.readonly
        assert not w.banner.isHidden()
        assert "read-only" in w.banner.text().lower() and "someone-else" in w.banner.text()
        assert w.label_panel.buttons and all(not b.isEnabled() for b in w.label_panel.buttons.values())
        before = journal_path(toy_root).read_bytes()
        qtbot.keyClick(w.run_table.view, Qt.Key.Key_1)
        assert journal_path(toy_root).read_bytes() == before
        w.close()
    finally:
        holder.close()


def test_failed_file_listed_and_rest_usable(qtbot, tmp_path, toy_root):
    bad = toy_root / "toy-009.bwd.xyz"
    bad.write_text("3\ntime=0\nC 0 0 0\nC 1 x 0\n")
    (toy_root / "toy-009.fwd.xyz").write_text((toy_root / "toy-001.fwd.xyz").read_text())
    w = open_window(qtbot, tmp_path, toy_root)
    assert w.failure_dialog is not None and w.failure_dialog.isVisible()
    texts = [w.failure_dialog.table.item(r, 0).text() for r in range(w.failure_dialog.table.rowCount())]
    assert any("toy-009" in t for t in texts)
    assert w.run_table.model.rowCount() == len(OUTCOMES)
    w.failure_dialog.close()
    w.close()


def test_shortcut_help_lists_every_action(win):
    dlg = win.show_shortcuts()
    rows = dlg.table.rowCount()
    commands = {dlg.table.item(r, 1).text() for r in range(rows)}
    assert {a.text().replace("&", "") for a in win.all_actions().values()} <= commands
    keys = {dlg.table.item(r, 1).text(): dlg.table.item(r, 2).text() for r in range(rows)}
    assert keys["Play / Pause"] == "Space"
    assert keys["Label 'left'"] == "1"
    dlg.close()


def test_settings_remember_recent_and_labeler(qtbot, tmp_path, toy_root):
    settings = _settings(tmp_path)
    w = open_window(qtbot, tmp_path, toy_root, settings)
    w.label_panel.set_labeler("dr-test")
    w.close()
    again = QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)
    assert again.value("labeler") == "dr-test"
    w2 = MainWindow(again)
    qtbot.addWidget(w2)
    assert w2.label_panel.labeler_name == "dr-test"
    assert w2.recent_sets()[0] == str(toy_root.resolve())
    assert w2.recent_menu.actions()[0].text() == str(toy_root.resolve())
    w2.close()


def test_label_records_labeler_name(win, toy_root):
    win.label_panel.set_labeler("ada")
    assert win.label_panel.apply_label("left")
    ev = [e for e in _journal_events(toy_root) if e.get("kind") == "label"][-1]
    assert ev["labeler"] == "ada"
    assert win.state.label_row()["labeler"] == "ada"


def test_energy_drift_note_shown(win):
    win.state.set_run("toy-005")
    assert not win.traces.note.isHidden()
    assert "Energy check failed" in win.traces.note.text()
    win.state.set_run("toy-001")
    assert win.traces.note.isHidden()


def test_no_rules_then_open_rules_classifies(qtbot, tmp_path, toy_root):
    rules_text = (toy_root / "basins.toml").read_text()
    (toy_root / "basins.toml").unlink()
    w = open_window(qtbot, tmp_path, toy_root)
    assert w.state.rules is None
    assert "No rules file" in w.banner.text()
    assert set(w.state.labels["auto_label"]) == {""}
    assert list(w.label_panel.buttons) == ["recrossing", "unfinished", "ambiguous", "excluded"]
    other = tmp_path / "elsewhere.toml"
    other.write_text(rules_text)
    with qtbot.waitSignal(w.rules_applied, timeout=20000):
        w.apply_rules(other)
    assert w.state.rules is not None and "No rules file" not in w.banner.text()
    assert w.run_table.outcome_counts()["left"] == OUTCOMES.count("left")
    assert list(w.label_panel.buttons)[:2] == ["left", "right"]
    assert w.traces.threshold_lines
    w.close()


def test_cancel_keeps_what_was_loaded(qtbot, tmp_path, toy_root):
    w = MainWindow(_settings(tmp_path))
    qtbot.addWidget(w)
    w.show()
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(toy_root, use_cache=False)
        w.cancel_loading()
    n = len(w.state.tset)
    assert 1 <= n < len(OUTCOMES)
    assert w.run_table.model.rowCount() == n
    assert "cancelled" in w.banner.text()
    assert w.state.traj is not None  # what was loaded is shown
    w.close()


def test_dragging_a_threshold_reclassifies_and_can_be_saved(win, qtbot, toy_root):
    line = next(ln for ln in win.traces.threshold_lines if ln.angle == 0 and abs(ln.value() - 1.75) < 1e-9)
    assert line.movable
    with qtbot.waitSignal(win.rules_applied, timeout=20000):
        line.setValue(1.4)
        line.sigPositionChangeFinished.emit(line)
    # products now need d < 1.4 Å, which no toy run reaches (1.5 Å at the end): every product run is unfinished
    rules = win.state.rules
    assert rules.basins["left"].condition("d_left").hi == pytest.approx(1.4)
    assert rules.basins["right"].condition("d_right").hi == pytest.approx(1.4)
    core = classify_set(win.state.tset, rules)["outcome"].value_counts().to_dict()
    assert {k: v for k, v in win.run_table.outcome_counts().items() if v} == core
    assert core.get("unfinished") == 1 + OUTCOMES.count("left") + OUTCOMES.count("right")
    assert "not saved" in win.banner.text()
    out = toy_root / "basins-edited.toml"
    assert win.save_rules_as(out)
    assert load_rules(out).basins["left"].condition("d_left").hi == pytest.approx(1.4)
    assert "not saved" not in win.banner.text()


def test_optional_panels_attach_and_show_in_shortcut_help(win):
    from basinmark.gui.app import EXTRAS, install_extras

    added = install_extras(win)
    assert set(added) <= {m for m, _f in EXTRAS}
    rows = win.menu_shortcut_rows()
    keys = [k for _g, _c, k in rows if k]
    assert len(keys) == len(set(keys)), "two menu commands share a shortcut"
    if "basinmark.gui.map_view" in added:
        assert "map" in win.docks


def test_advance_after_labeling_follows_the_filter(win, qtbot):
    win.actions_["auto_advance"].setChecked(True)
    win.run_table.set_filter("unlabeled")
    win.state.set_run("toy-002")
    _label_key(win, qtbot, Qt.Key.Key_2)
    assert win.state.label_row("toy-002")["hand_label"] == "right"
    assert win.state.run_id == "toy-003"  # the next unlabeled run after it
    _label_key(win, qtbot, Qt.Key.Key_3)
    assert win.state.run_id == "toy-004"
    assert "toy-003" not in win.run_table.visible_runs()
    assert win.settings.value("auto_advance") in (True, "true")


def test_labeling_under_a_filter_keeps_the_run_shown(win, qtbot):
    win.run_table.set_filter("unlabeled")
    win.state.set_run("toy-002")
    _label_key(win, qtbot, Qt.Key.Key_2)
    # the run stays on screen, and its row stays listed and selected (in italics) while it is shown
    assert win.state.run_id == "toy-002" and win.run_table.selected_run() == "toy-002"
    assert "toy-002" in win.run_table.visible_runs()
    assert win.molecule.trajectory is win.state.tset["toy-002"]
    win.state.set_run("toy-003")
    assert "toy-002" not in win.run_table.visible_runs()  # once left, the filter hides it


def test_dropping_a_folder_opens_it_and_layout_is_saved(qtbot, tmp_path, toy_root):
    from PySide6.QtCore import QMimeData, QUrl
    from PySide6.QtGui import QDragEnterEvent, QDropEvent

    settings = _settings(tmp_path)
    w = MainWindow(settings)
    qtbot.addWidget(w)
    w.show()
    mime = QMimeData()
    mime.setUrls([QUrl.fromLocalFile(str(toy_root))])
    enter = QDragEnterEvent(QPoint(10, 10), Qt.DropAction.CopyAction, mime, Qt.MouseButton.LeftButton,
                            Qt.KeyboardModifier.NoModifier)
    w.dragEnterEvent(enter)
    assert enter.isAccepted()
    drop = QDropEvent(QPointF(10, 10), Qt.DropAction.CopyAction, mime, Qt.MouseButton.LeftButton,
                      Qt.KeyboardModifier.NoModifier)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.dropEvent(drop)
    assert len(w.state.tset) == len(OUTCOMES)
    # a height the window can take whatever its panels' minimum sizes are (they differ with the docks shown)
    height = max(523, w.minimumSizeHint().height(), w.minimumHeight()) + 7
    w.resize(820, height)
    size = w.size()
    w.close()
    again = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(again)
    # the offscreen screen is 800 px wide and restoreGeometry clamps to it: compare the height
    assert size.height() == height and again.size().height() == height
    again.close()


def test_missing_folder_says_so_without_a_modal_dialog(qtbot, tmp_path):
    w = MainWindow(_settings(tmp_path))
    qtbot.addWidget(w)
    w.show()
    with qtbot.waitSignal(w.load_failed, timeout=20000) as blocker:
        w.open_set(tmp_path / "not-there")
    assert "not-there" in blocker.args[0]
    assert "Could not open the set" in w.banner.text() and not w.banner.isHidden()
    w.close()


def test_bad_rules_file_keeps_the_rules_in_use(win, qtbot, tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('reactant = "nowhere"\n[monitors]\nd = [1, 2]\n')
    before = win.state.rules
    with qtbot.waitSignal(win.rules_applied, timeout=20000):
        win.apply_rules(bad)
    assert win.state.rules is before
    assert "could not be used" in win.banner.text() and "unchanged" in win.banner.text()
    assert "bad.toml" in win.banner.text()


def test_adding_a_trace_keeps_the_time_and_zoom(win, qtbot):
    win.state.set_frame(5)
    t = win.state.traj.times[5]
    win.traces.p_dist.setXRange(-40, 10, padding=0)
    win.state.add_monitor((2, 3))
    assert win.traces.time == pytest.approx(t)
    lo, hi = win.traces.p_dist.viewRange()[0]
    assert lo == pytest.approx(-40, abs=1e-6) and hi == pytest.approx(10, abs=1e-6)


def test_panel_shows_reason_and_history_and_escape_clears_picks(win, qtbot):
    win.label_panel.reason.setText("bond 1-2 <forms> late")
    assert win.label_panel.apply_label("left")
    text = win.label_panel.current.text()
    assert "bond 1-2 &lt;forms&gt; late" in text and "<b>left</b>" in text
    tip = win.label_panel.current.toolTip()
    assert "Label history" in tip and "left (hand)" in tip
    xy, _ = win.molecule.project()
    win.molecule.click_at(*xy[0])
    assert win.state.picked == [1]
    qtbot.keyClick(win.run_table.view, Qt.Key.Key_Escape)
    assert win.state.picked == [] and win.molecule.picked == []


def test_tampered_journal_opens_readonly_showing_its_labels(qtbot, tmp_path, toy_root):
    with LabelJournal.open(journal_path(toy_root), labeler="someone") as j:
        j.record("toy-001", "right", content_hash="0" * 64, reason="hand")
        j.record("toy-002", "left", content_hash="0" * 64, reason="hand")
    path = journal_path(toy_root)
    lines = path.read_text().splitlines()
    lines[2] = lines[2].replace('"left"', '"right"', 1)  # an event changed after it was written
    path.write_text("\n".join(lines) + "\n")
    before = path.read_bytes()
    w = open_window(qtbot, tmp_path, toy_root)
    assert w.state.readonly and w.state.journal is not None
    assert "hash does not match" in w.banner.text() and "line 3" in w.banner.text()
    assert w.state.label_row("toy-001")["hand_label"] == "right"  # the labels are still shown
    assert all(not b.isEnabled() for b in w.label_panel.buttons.values())
    qtbot.keyClick(w.run_table.view, Qt.Key.Key_1)
    assert path.read_bytes() == before
    w.close()
