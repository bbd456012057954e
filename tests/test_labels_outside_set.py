"""Labels the journal holds for runs that are not in the open set (a run folder moved or renamed, files removed,
runs that failed to load) are neither shown nor counted, and both the window and `basinmark summary` say so plainly.

Found on a 10,000-run set whose journal named its runs differently from the set (`runs/run-00001` against
`run-00001`): the window showed none of 20,000 hand labels and said nothing, while `basinmark summary` counted
them beside the set's own runs (twice the runs)."""

from __future__ import annotations

import json

import pytest
from PySide6.QtCore import QSettings

from basinmark.cli import main
from basinmark.core.journal import LabelJournal
from basinmark.core.sets import journal_path, open_set
from basinmark.gui.main_window import MainWindow
from basinmark.gui.summary_view import install_summary_dock

from gui_fixtures import make_toy_set

OUTCOMES = ["left", "right", "left", "recrossing", "left", "right"]
GONE = ["old/toy-001", "old/toy-002", "toy-099"]


@pytest.fixture
def root(tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    hashes = dict(open_set(root, use_cache=False).content_hashes())
    with LabelJournal.open(journal_path(root), labeler="mara") as j:
        # the set classified into the journal (its designed outcomes), then hand labels on four of its runs
        j.record_batch([{"run_id": r, "label": o, "content_hash": h} for (r, h), o in zip(hashes.items(), OUTCOMES)])
        j.record_batch([{"run_id": r, "label": "left", "content_hash": h} for r, h in hashes.items()][:4],
                       source="hand")
        j.record_batch([{"run_id": r, "label": "right", "content_hash": "ab" * 32} for r in GONE], source="hand")
    return root


def _cli_summary(root, capsys) -> dict:
    main(["summary", str(root), "--format", "json", "--quiet", "--no-tst"])
    return json.loads(capsys.readouterr().out)


def _opened(qtbot, tmp_path, root):
    """The window with its summary dock, the set at ``root`` loaded."""
    win = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    dock = install_summary_dock(win)
    win.show()
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    qtbot.waitUntil(lambda: not win.busy, timeout=20000)
    return win, dock


def test_cli_summary_counts_only_the_runs_of_the_set_and_names_the_others(root, capsys):
    out = _cli_summary(root, capsys)
    assert out["n_runs"] == len(OUTCOMES)
    counts = {row["label"]: row["count"] for row in out["outcomes"]}
    assert counts["right"] == 1 and counts["left"] == 5  # the three other "right" labels are outside the set
    said = [w for w in out["warnings"] if "not in this set" in w]
    assert len(said) == 1, out["warnings"]
    assert said[0].startswith("3 runs labeled in the journal are not in this set") and "old/toy-001" in said[0]
    assert "not shown or counted" in said[0]


def test_window_says_so_and_counts_what_the_cli_counts(root, qtbot, tmp_path, capsys):
    cli = _cli_summary(root, capsys)
    win, dock = _opened(qtbot, tmp_path, root)
    banner = win.banner.text()
    assert "3 runs labeled in the journal are not in this set" in banner and "toy-099" in banner
    assert win.state.labels_outside == sorted(GONE)
    dock.show()
    dock.raise_()
    panel = win.summary_panel
    panel.ensure_current()
    s = panel.summary
    assert s.n_runs == cli["n_runs"] and s.n_counted == cli["n_counted"]
    assert {r.label: int(r.count) for r in s.table.itertuples()} == {r["label"]: r["count"] for r in cli["outcomes"]}
    assert any("not in this set" in w for w in s.warnings)
    win.close()


def test_a_set_whose_journal_labels_only_its_own_runs_says_nothing(tmp_path, qtbot):
    root = make_toy_set(tmp_path / "plain", OUTCOMES)
    hashes = dict(open_set(root, use_cache=False).content_hashes())
    with LabelJournal.open(journal_path(root), labeler="mara") as j:
        j.record_batch([{"run_id": r, "label": "left", "content_hash": h} for r, h in hashes.items()], source="hand")
    win, _dock = _opened(qtbot, tmp_path, root)
    assert "not in this set" not in win.banner.text()
    assert win.state.labels_outside == []
    win.close()


def test_runs_without_a_journal_label_count_alike_in_the_window_and_the_cli(tmp_path, qtbot, capsys):
    """A journal with hand labels on some runs and no automatic ones (the set never classified into it, or runs
    added since): the window shows and counts the other runs by the rules' automatic labels, computed in memory;
    `basinmark summary` counted them as unlabeled (4 runs against 6).  Both now count them alike, and the CLI says
    that those labels were computed in memory, not recorded."""
    root = make_toy_set(tmp_path / "partly", OUTCOMES)
    hashes = dict(open_set(root, use_cache=False).content_hashes())
    with LabelJournal.open(journal_path(root), labeler="mara") as j:
        j.record_batch([{"run_id": r, "label": "left", "content_hash": h} for r, h in hashes.items()][:4],
                       source="hand")
    cli = _cli_summary(root, capsys)
    assert cli["n_counted"] == len(OUTCOMES) and cli["n_unlabeled"] == 0
    assert any(n.startswith("2 runs of the set have no label in the journal") for n in cli["notes"]), cli["notes"]
    win, dock = _opened(qtbot, tmp_path, root)
    dock.show()
    win.summary_panel.ensure_current()
    s = win.summary_panel.summary
    assert s.n_counted == cli["n_counted"]
    assert {r.label: int(r.count) for r in s.table.itertuples()} == {r["label"]: r["count"] for r in cli["outcomes"]}
    win.close()
