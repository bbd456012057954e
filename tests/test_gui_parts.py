"""The window's parts on their own: actions, label table, state, playback timer, traces, run table."""

from __future__ import annotations


import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from PySide6.QtGui import QKeySequence
from PySide6.QtWidgets import QWidget

from basinmark.core.classify import classify_run, classify_set
from basinmark.core.geometry import angle, distance
from basinmark.core.rules import load_rules
from basinmark.core.units import energy_factor
from basinmark.gui.actions import ACTIONS, build_actions
from basinmark.gui.icons import icon, icon_names
from basinmark.gui.label_table import LABEL_COLUMNS, build_label_table
from basinmark.gui.playback import PlaybackController
from basinmark.gui.run_table import RunTable, row_matches
from basinmark.gui.state import AppState
from basinmark.gui.traces import TracesView

from gui_fixtures import toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished", "left"]


@pytest.fixture
def toy(tmp_path):
    tset = toy_set(tmp_path / "toy", OUTCOMES, drift_runs=[4])
    rules = load_rules(tmp_path / "toy" / "basins.toml", n_atoms=3)
    return tset, rules


def test_no_two_actions_share_a_shortcut(qtbot):
    keys = [QKeySequence(k).toString() for spec in ACTIONS for k in spec.shortcuts]
    assert len(keys) == len(set(keys))
    # number keys are left free for labels, and the requested keys are bound
    assert not {str(i) for i in range(10)} & set(keys)
    by_name = {s.name: s.shortcuts for s in ACTIONS}
    assert by_name["play_pause"] == ("Space",) and by_name["jump_ts"] == ("T",)
    assert set(by_name["next_run"]) == {"PgDown", "N"} and by_name["undo_label"] == ("Ctrl+Z",)


def test_every_icon_named_by_an_action_exists_and_renders(qtbot):
    names = set(icon_names())
    for spec in ACTIONS:
        if spec.icon:
            assert spec.icon in names, spec.icon
            assert not icon(spec.icon).pixmap(24, 24).isNull()


def test_build_actions_binds_slots(qtbot):
    w = QWidget()
    qtbot.addWidget(w)
    hits = []
    acts = build_actions(w, {"next_run": lambda: hits.append("n"), "loop": lambda on: hits.append(on)})
    acts["next_run"].trigger()
    acts["loop"].setChecked(True)
    assert hits == ["n", True]
    assert "PgDown" in acts["next_run"].toolTip() or "Page Down" in acts["next_run"].toolTip()


def test_label_table_final_is_hand_else_auto():
    cls = pd.DataFrame({"run": ["a", "b", "c"], "outcome": ["left", "right", "unfinished"],
                        "product_end": ["backward", None, None], "product_final_entry_fs": [10.0, None, np.nan],
                        "flags": ["", "late_commit", ""]})
    jst = pd.DataFrame({"run": ["b", "c"], "auto_label": ["right", "unfinished"], "hand_label": ["left", None],
                        "final_label": ["left", "unfinished"], "labeler": ["ada", None], "time": ["", ""],
                        "reason": ["looks left", ""], "events": [1, 1],
                        "data_changed": pd.array([True, pd.NA], dtype="boolean")})
    df = build_label_table(["a", "b", "c", "d"], cls, jst)
    assert list(df.columns) == LABEL_COLUMNS
    assert df["final_label"].tolist() == ["left", "left", "unfinished", ""]
    assert df["hand_label"].tolist() == ["", "left", "", ""]
    assert df["labeler"].tolist() == ["", "ada", "", ""]
    assert df["data_changed"].tolist() == [False, True, False, False]
    assert np.isnan(df["product_final_entry_fs"][1])
    assert df["product_end"].tolist() == ["backward", "", "", ""] and df["product_final_entry_fs"][0] == 10.0


@given(st.lists(st.tuples(st.sampled_from(["", "left", "right"]), st.sampled_from(["", "left", "right"]),
                          st.booleans(), st.sampled_from(["", "energy_drift"])), max_size=12))
def test_filters_partition_consistently(rows):
    recs = [{"run": f"r{i}", "auto_label": a, "hand_label": h, "data_changed": c, "flags": f}
            for i, (a, h, c, f) in enumerate(rows)]
    for r in recs:
        assert row_matches(r, "all")
        assert row_matches(r, "unlabeled") == (r["hand_label"] == "")
        if row_matches(r, "disagree"):
            assert not row_matches(r, "unlabeled") and r["hand_label"] != r["auto_label"]
        assert row_matches(r, "flagged") == bool(r["flags"])
        assert row_matches(r, "changed") == r["data_changed"]


def test_state_signals_and_frame_clamp(qtbot, toy):
    tset, _ = toy
    s = AppState()
    with qtbot.waitSignal(s.run_changed):
        s.set_set(tset)
    assert s.run_id == "toy-001" and s.frame == s.traj.ts_index
    with qtbot.waitSignal(s.frame_changed):
        s.set_frame(10**6)
    assert s.frame == s.traj.n_frames - 1
    s.set_time(-1000.0)
    assert s.frame == 0
    s.add_monitor((1, 2))
    s.add_monitor((2, 1))  # the same distance
    s.add_monitor((1, 1))  # not a monitor
    assert s.user_monitors == [(1, 2)]


def test_playback_timer_loops_and_stops(qtbot, toy):
    tset, _ = toy
    s = AppState()
    s.set_set(tset)
    pb = PlaybackController(s)
    pb.set_speed(8.0)
    assert pb.speed == 8.0
    pb.set_speed(100.0)
    assert pb.speed == 8.0  # capped at 8x
    pb.slower()
    assert pb.speed == 4.0
    pb.set_speed(8.0)
    s.set_frame(s.traj.n_frames - 5)
    pb.play()
    qtbot.waitUntil(lambda: not pb.playing, timeout=3000)
    assert s.frame == s.traj.n_frames - 1  # stops at the end without loop
    pb.set_loop(True)
    pb.play()  # from the end it starts again at frame 0
    qtbot.waitUntil(lambda: s.frame > 10, timeout=3000)
    pb.pause()
    s.set_frame(s.traj.n_frames - 2)
    seen = []
    s.frame_changed.connect(seen.append)
    pb.play()
    qtbot.waitUntil(lambda: len(seen) >= 3, timeout=3000)
    pb.pause()
    assert min(seen) < 5  # wrapped around
    pb.step(-1)
    assert not pb.playing


def test_traces_show_rule_monitors_thresholds_band_and_energies(qtbot, toy):
    tset, rules = toy
    traj = tset["toy-001"]
    res = classify_run(traj, rules)
    v = TracesView()
    qtbot.addWidget(v)
    v.set_run(traj, res, rules, [(1, 2, 3)])
    assert set(v.curves) == {"d_left", "d_right", "∠(1-2-3)", "E_pot", "E_kin", "E_total"}
    np.testing.assert_allclose(v.values["d_left"], distance(traj.positions, 0, 1), rtol=1e-9)
    # reference: core.geometry.angle and ase.Atoms.get_angle
    np.testing.assert_allclose(v.values["∠(1-2-3)"], angle(traj.positions, 0, 1, 2), rtol=1e-9)
    assert v.values["∠(1-2-3)"][3] == pytest.approx(traj.to_atoms(3).get_angle(0, 1, 2), abs=1e-4)
    assert v.p_angle.isVisible()
    # thresholds: 2.6 (reactant), 2.3 and 1.75 (products) on the distance plot
    levels = sorted(round(line.value(), 6) for line in v.threshold_lines if line.angle == 0)
    assert levels == [1.75, 2.3, 2.6]
    assert "commit" in v.marks and "ts" in v.marks
    assert v.marks["commit"].value() == pytest.approx(res.product_commit_time_fs)
    assert v.band_items  # reactant and product segments
    # energies relative to t = 0, in kcal/mol (core.units, 1 cal = 4.184 J)
    e = traj.energies["potential"]
    expected = (e - e[traj.ts_index]) / energy_factor("kcal/mol")
    np.testing.assert_allclose(v.values["E_pot"], expected)
    v.set_energy_unit("kJ/mol")
    np.testing.assert_allclose(v.values["E_pot"], expected * 4.184, rtol=1e-9)
    assert v.note.isHidden()


def test_traces_cursor_emits_only_when_dragged(qtbot, toy):
    tset, rules = toy
    v = TracesView()
    qtbot.addWidget(v)
    v.set_run(tset["toy-002"], classify_run(tset["toy-002"], rules), rules)
    got = []
    v.time_scrubbed.connect(got.append)
    v.set_time(12.0)
    assert got == [] and all(c.value() == 12.0 for c in v.cursors)
    v.cursors[2].setValue(-30.0)  # as a drag on the band's cursor would
    assert got == [-30.0] and all(c.value() == -30.0 for c in v.cursors)


def test_traces_without_energies_say_so(qtbot, toy):
    tset, _ = toy
    traj = tset["toy-001"]
    traj.energies.clear()
    v = TracesView()
    qtbot.addWidget(v)
    v.set_run(traj)
    assert not v.note.isHidden() and "no energies" in v.note.text()


def test_run_table_counts_match_core(qtbot, toy):
    tset, rules = toy
    s = AppState()
    table = RunTable(s)
    qtbot.addWidget(table)
    s.set_set(tset)
    s.set_rules(rules, classify_set(tset, rules))
    counts = {k: v for k, v in table.outcome_counts().items() if v}
    assert counts == {"left": 2, "right": 1, "recrossing": 1, "unfinished": 1}
    assert table.model.rowCount() == 5
    # too few runs for a ratio: the table says so (core.stats.reliability_warnings)
    assert not table.warning_label.isHidden() and "rough guide" in table.warning_label.toolTip()
    # sorting by commit time puts the unfinished run (no commit) last
    table.view.sortByColumn(4, table.view.horizontalHeader().sortIndicatorOrder().AscendingOrder)
    assert table.visible_runs()[-1] == "toy-004"
    # selecting a row shows that run
    idx = table.proxy.index(1, 0)
    table.view.setCurrentIndex(idx)
    assert s.run_id == idx.data()


def test_molecule_and_traces_follow_a_dark_palette(qtbot):
    from PySide6.QtGui import QColor, QPalette

    from basinmark.gui.molecule_view import MoleculeView
    from gui_fixtures import stretched_ethylene

    pal = QPalette()
    pal.setColor(QPalette.ColorRole.Base, QColor("#1e1f22"))
    pal.setColor(QPalette.ColorRole.Text, QColor("#e8e8e8"))
    mv = MoleculeView()
    qtbot.addWidget(mv)
    mv.setPalette(pal)
    mv.resize(300, 300)
    mv.set_trajectory(stretched_ethylene())
    img = mv.render_image(300, 300)
    assert QColor(img.pixel(1, 1)) == QColor("#1e1f22")
    tv = TracesView()
    qtbot.addWidget(tv)
    tv.setPalette(pal)
    tv.apply_palette()
    assert tv.glw.backgroundBrush().color() == QColor("#1e1f22")


@settings(max_examples=30, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.booleans(), min_size=1, max_size=15), st.integers(0, 14), st.sampled_from([1, -1, 3, -2]))
def test_step_run_matches_a_plain_walk(qtbot, tmp_path_factory, labeled, current, step):
    # reference: a plain walk over the set order, skipping runs the "Unlabeled" filter hides
    import pandas as pd

    current %= len(labeled)
    s = AppState()
    table = RunTable(s)
    from basinmark.core.model import TrajectorySet

    from gui_fixtures import toy_trajectory
    ids = [f"r{i:02d}" for i in range(len(labeled))]
    s.tset = TrajectorySet(tmp_path_factory.mktemp("w"), {r: toy_trajectory(r, "left", n_half=3) for r in ids})
    s.run_id = ids[current]
    s.labels = pd.DataFrame({"run": ids, "auto_label": "left", "hand_label": ["left" if x else "" for x in labeled],
                             "final_label": "left", "product_final_entry_fs": 1.0, "flags": "", "labeler": "",
                             "reason": "", "data_changed": False})
    s.labels_changed.emit()
    table.set_filter("unlabeled")
    visible = [r for r, x in zip(ids, labeled) if not x]
    # a filter that hides the current run moves to its first run (or to no run when it is empty)
    start = ids[current] if ids[current] in visible else (visible[0] if visible else "")
    assert s.run_id == start
    assert table.selected_run() == start
    j = visible.index(start) + step if start else -1
    expected = visible[j] if 0 <= j < len(visible) else start
    moved = table.step_run(step)
    assert moved == (0 <= j < len(visible))
    assert s.run_id == expected
    assert table.selected_run() == expected
    table.deleteLater()


def test_cancelled_classification_gives_no_partial_table(toy):
    from basinmark.gui.loader import classify_with_rules

    tset, rules = toy
    out = classify_with_rules(tset, rules.path, cancel=lambda: True)
    assert out["classification"] is None and out["rules"] is None
    assert "cancelled" in out["rules_error"]
    full = classify_with_rules(tset, rules.path)
    assert len(full["classification"]) == len(tset) and full["rules"] is not None
