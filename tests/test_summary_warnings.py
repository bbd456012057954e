"""Every summary warning names the runs it is about (core.summary.SummaryWarning.run_ids), the text,
Markdown and JSON outputs list them, and in the window a click on a warning filters the run table to
exactly those runs."""

from __future__ import annotations

import copy
import json
import pickle

import pandas as pd
import pytest

from basinmark.core.summary import SummaryWarning, build_summary, flag_warnings


def _frame(rows: list[tuple]) -> pd.DataFrame:
    """(run, final, hand, flags[, data_changed]) rows as a label table."""
    cols = ["run", "final_label", "hand_label", "flags", "data_changed"]
    return pd.DataFrame([r + (False,) * (5 - len(r)) for r in rows], columns=cols)


def _by_text(warnings, piece: str) -> SummaryWarning:
    hit = [w for w in warnings if piece in w]
    assert len(hit) == 1, (piece, warnings)
    return hit[0]


# products called "left" and "right" on purpose: "left out of the product ratio" must not count as naming one
LABELS = _frame(
    [(f"r{i:02d}", "left", None, "") for i in range(20)]
    + [("r20", "right", None, "energy_drift"), ("r21", "right", "right", "energy_drift;late_commit"),
       ("r22", "right", None, "late_commit"), ("r23", "left", None, "energy_drift"),
       ("r24", "ambiguous", None, ""), ("r25", "excluded", "excluded", "energy_drift"),
       ("r26", None, None, ""), ("r27", "unfinished", None, "several_visits", True),
       ("r28", "left", "left", "late_commit", True)])


def test_every_warning_is_a_string_that_names_its_runs():
    s = build_summary(LABELS, ["left", "right"])
    assert s.warnings and all(isinstance(w, SummaryWarning) and isinstance(w, str) for w in s.warnings)
    final = dict(zip(LABELS["run"], LABELS["final_label"]))
    # energy check: counted runs with energy_drift (r25 is excluded, so not counted)
    drift = _by_text(s.warnings, "failed the energy check")
    assert drift.run_ids == ("r20", "r21", "r23")
    # flagged for a look with no hand label: r22 (late_commit), r27 (several_visits); r21/r28 have hand labels
    look = _by_text(s.warnings, "flagged for a look")
    assert look.run_ids == ("r22", "r27")
    assert _by_text(s.warnings, "no label yet").run_ids == ("r26",)
    assert _by_text(s.warnings, "changed since").run_ids == ("r27", "r28")
    # count warnings name the runs of the labels they are about
    assert _by_text(s.warnings, "labeled ambiguous").run_ids == ("r24",)
    assert _by_text(s.warnings, "excluded by hand").run_ids == ("r25",)
    assert _by_text(s.warnings, "gave right").run_ids == tuple(r for r, f in final.items() if f == "right")
    reached = _by_text(s.warnings, "reached a product")
    assert reached.run_ids == tuple(r for r, f in final.items() if f in ("left", "right"))
    # still plain strings to everything else
    assert drift == str(drift) and drift.startswith("3 counted runs failed the energy check")


def test_flag_warnings_keep_the_table_order_and_the_index_does_not_matter():
    labels = LABELS.iloc[::-1].set_index(pd.Index(range(100, 100 + len(LABELS))))
    drift = _by_text(flag_warnings(labels), "energy check")
    assert drift.run_ids == ("r23", "r21", "r20")


def test_outputs_list_the_run_ids():
    s = build_summary(LABELS, ["left", "right"])
    text = s.to_text()
    assert "failed the energy check" in text
    block = text[text.index("failed the energy check"):]
    assert "runs: r20, r21, r23" in block.splitlines()[1]
    md = s.to_markdown()
    line = next(x for x in md.splitlines() if "failed the energy check" in x)
    assert line.endswith("Runs: `r20`, `r21`, `r23`.")
    doc = json.loads(s.to_json())
    assert doc["warnings"] == [str(w) for w in s.warnings]  # unchanged: plain sentences
    entry = next(e for e in doc["warning_runs"] if "energy check" in e["warning"])
    assert entry["run_ids"] == ["r20", "r21", "r23"]
    assert len(doc["warning_runs"]) == len(doc["warnings"])


def test_a_warning_survives_copy_and_pickle_with_its_runs():
    w = SummaryWarning("2 runs are odd.", ["a", "b"])
    for other in (copy.copy(w), copy.deepcopy(w), pickle.loads(pickle.dumps(w))):
        assert other == "2 runs are odd." and other.run_ids == ("a", "b")
    assert SummaryWarning("plain").run_ids == ()


def test_extra_warnings_given_as_plain_strings_still_work():
    s = build_summary(LABELS, ["left", "right"], extra_warnings=["something else", SummaryWarning("x", ["r01"])])
    assert _by_text(s.warnings, "something else").run_ids == ()
    assert [w for w in s.warnings if w == "x"][0].run_ids == ("r01",)


def test_cli_stale_automatic_labels_name_their_runs():
    from basinmark.commands.summary import stale_auto_labels

    labels = pd.DataFrame({"run": ["a", "b", "c"], "auto_label": ["left", "right", "left"]})
    now = pd.DataFrame({"run": ["a", "b", "c"], "outcome": ["left", "left", "right"]})
    (w,) = stale_auto_labels(labels, now)
    assert w.startswith("2 of 3 automatic labels") and w.run_ids == ("b", "c")


# --- in the window --------------------------------------------------------------------------------

OUTCOMES = ["left", "right", "recrossing", "unfinished", "left", "right", "left", "left", "right", "left",
            "left", "right"]


@pytest.fixture(autouse=True)
def _labeler_settled(monkeypatch):
    """Where the window asks once who is labeling, answer with the name already set."""
    try:
        import basinmark.gui.labeler as labeler
    except ImportError:
        return
    monkeypatch.setattr(labeler, "ask_labeler", lambda parent, current, login, **kw: current)


@pytest.fixture
def win(qtbot, tmp_path):
    from PySide6.QtCore import QSettings

    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.summary_view import install_summary_dock
    from gui_fixtures import TOY_RULES, make_toy_set

    root = make_toy_set(tmp_path / "toyset", OUTCOMES, drift_runs=[1, 4, 9])
    # an earlier "late" commit time, so that the product runs are flagged for a look (late_commit)
    assert "late_commit_fs = 30.0" in TOY_RULES
    (root / "basins.toml").write_text(TOY_RULES.replace("late_commit_fs = 30.0", "late_commit_fs = 10.0"))
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    dock = install_summary_dock(w)
    w.show()
    qtbot.waitExposed(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    dock.show()
    yield w
    w.close()


def _click_warning(qtbot, panel, piece: str) -> SummaryWarning:
    from PySide6.QtCore import Qt

    i = next(k for k, w in enumerate(panel.summary.warnings) if piece in w)
    button = panel.warning_box.buttons[i]
    assert button.isVisibleTo(panel) and button.isEnabled()
    qtbot.mouseClick(button, Qt.MouseButton.LeftButton)
    return panel.summary.warnings[i]


@pytest.mark.gui
def test_clicking_the_energy_check_warning_filters_the_table_to_the_drifting_runs(win, qtbot):
    panel = win.summary_panel
    cls = win.state.classification
    # what the core flags: runs whose classification carries energy_drift (and which are counted)
    flagged = [r for r, f in zip(cls["run"], cls["flags"]) if "energy_drift" in str(f).split(";")]
    assert len(flagged) == 3
    w = _click_warning(qtbot, panel, "failed the energy check")
    assert list(w.run_ids) == flagged
    table = win.run_table
    assert table.visible_runs() == flagged
    assert table.only_caption.isVisibleTo(table)
    assert table.only_caption.text() == "Showing only 3 runs: 3 counted runs failed the energy check"
    # clearing shows every run again
    table.clear_only_runs()
    assert table.visible_runs() == win.state.run_ids and not table.only_caption.isVisibleTo(table)


@pytest.mark.gui
def test_clicking_the_no_hand_label_warning_filters_the_table_to_those_runs(win, qtbot):
    st = win.state
    # one flagged run gets a hand label: it must drop out of the warning and of the filter
    lab = st.labels
    flagged = [r for r, f in zip(lab["run"], lab["flags"]) if f and set(f.split(";")) - {"energy_drift"}]
    assert len(flagged) >= 2
    st.set_run(flagged[0])
    assert win.label_panel.apply_label("left")
    panel = win.summary_panel
    w = _click_warning(qtbot, panel, "no hand label yet")
    lab = st.labels
    expected = [r for r, f, h, fin in zip(lab["run"], lab["flags"], lab["hand_label"], lab["final_label"])
                if not h and fin != "excluded" and set(f.split(";")) - {"energy_drift", ""}]
    assert list(w.run_ids) == expected and flagged[0] not in expected
    assert win.run_table.visible_runs() == expected
    # choosing a quick filter leaves the warning's list
    win.run_table.set_filter("all")
    assert win.run_table.visible_runs() == st.run_ids


@pytest.mark.gui
def test_a_warning_about_no_runs_offers_no_filter(win):
    panel = win.summary_panel
    for i, w in enumerate(panel.summary.warnings):
        assert panel.warning_box.buttons[i].isEnabled() == bool(w.run_ids)
    assert panel.warnings.text().count("⚠") == len(panel.summary.warnings)
