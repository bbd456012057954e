"""Review mode offscreen: two journals / two labelers, kappa against scikit-learn, decisions by key
written as review events, the 'review complete' event, the Markdown export, read-only journals."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from PySide6.QtCore import QSettings, Qt
from sklearn.metrics import cohen_kappa_score

from basinmark.core.journal import LabelJournal
from basinmark.core.sets import journal_path
from basinmark.gui.main_window import MainWindow
from basinmark.gui.review_view import install_review_dock

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "left", "right", "left", "right", "left", "recrossing"]
RUNS = [f"toy-{i + 1:03d}" for i in range(len(OUTCOMES))]
# hand labels of two people; they disagree on toy-002, toy-005 and toy-008
ANN = ["left", "right", "left", "right", "left", "right", "left", "recrossing"]
BO = ["left", "left", "left", "right", "unfinished", "right", "left", "left"]
DISAGREE = ["toy-002", "toy-005", "toy-008"]


def _write(path: Path, who: str, labels, hashes) -> None:
    with LabelJournal.open(path, labeler=who) as j:
        for run, lab in zip(RUNS, labels):
            j.record(run, lab, content_hash=hashes.get(run, ""))


def _events(path: Path) -> list[dict]:
    return [json.loads(x) for x in path.read_text().splitlines() if x.strip()]


def _open(qtbot, tmp_path, root) -> MainWindow:
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    qtbot.waitExposed(win)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    return win


def _bo_labels_too(win) -> LabelJournal:
    """bo's labels recorded in the open journal beside ann's (two people of one journal); the journal."""
    j = win.state.journal
    hashes = dict(win.state.tset.content_hashes())
    for run, lab in zip(RUNS, BO):
        j.record(run, lab, content_hash=hashes[run], labeler="bo")
    return j


def _ann_against_bo(win):
    """bo's labels recorded too, and the review panel comparing ann (A) with bo (B): the panel and its review."""
    _bo_labels_too(win)
    panel = win.review_panel
    panel.refresh_sources()
    panel.set_sources(("person", "ann"), ("person", "bo"))
    return panel, panel.compare()


@pytest.fixture
def setup(qtbot, tmp_path):
    from basinmark.core.sets import open_set

    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    hashes = dict(open_set(root, use_cache=False).content_hashes())
    _write(journal_path(root), "ann", ANN, hashes)
    other = tmp_path / "bo-labels.jsonl"
    _write(other, "bo", BO, hashes)
    win = _open(qtbot, tmp_path, root)
    dock = install_review_dock(win)
    yield win, dock, root, other
    win.close()


def test_two_journals_list_exactly_the_disagreements(setup):
    win, dock, root, other = setup
    panel = win.review_panel
    panel.set_sources(("final",), ("file", str(other)))
    review = panel.compare()
    assert review is not None and review.n == len(RUNS)
    assert list(panel.queue["run"]) == DISAGREE
    shown = [panel.queue_view.text(r, 0) for r in range(panel.queue_view.rowCount())]
    assert shown == DISAGREE
    # reference library: scikit-learn's Cohen's kappa over the same label pairs
    ref = cohen_kappa_score(ANN, BO)
    assert review.kappa == pytest.approx(ref, abs=1e-12)
    assert f"{ref:.3f}" in panel.summary.text()
    assert f"{100 * 5 / 8:.1f} %" in panel.summary.text()
    assert review.band in panel.summary.text()
    # few runs: the core's caution is shown
    assert panel.warning.isVisibleTo(panel) and "rough" in panel.warning.text()
    # diagonal emphasised
    m = panel.matrix
    i = review.confusion.index.get_loc("left")
    k = list(review.confusion.columns).index("left")
    assert m.item(i, k).font().bold() and not m.item(i, (k + 1) % m.columnCount()).font().bold()
    assert m.item(i, k).text() == str(int(review.confusion.loc["left", "left"]))


def test_decisions_by_key_write_review_events_and_complete(setup, qtbot):
    win, dock, root, other = setup
    panel = win.review_panel
    dock.toggleViewAction().trigger()
    panel.set_sources(("final",), ("file", str(other)))
    panel.compare()
    panel.reviewer.setText("carla")
    # selecting a queue entry shows that run in the window
    panel.queue_view.selectRow(1)
    assert win.state.run_id == "toy-005"
    panel.reason.setText("both halves end in the left basin")
    panel.queue_view.setFocus()
    qtbot.keyClick(panel.queue_view, Qt.Key.Key_A)          # take A's label for toy-005
    ev = [e for e in _events(journal_path(root)) if e.get("kind") == "label"][-1]
    assert ev["source"] == "review" and ev["run"] == "toy-005" and ev["label"] == "left"
    assert (ev["label_a"], ev["label_b"]) == ("left", "unfinished")
    assert ev["reviewer"] == "carla" and ev["reason"] == "both halves end in the left basin"
    assert ev["content_hash"] == win.state.tset["toy-005"].content_hash
    assert list(panel.queue["run"]) == ["toy-002", "toy-008"]
    # label key 3 = the third label in the labeling panel's order (left, right, recrossing, ...)
    panel.queue_view.selectRow(1)
    qtbot.keyClick(panel.queue_view, Qt.Key.Key_3)
    ev = [e for e in _events(journal_path(root)) if e.get("kind") == "label"][-1]
    assert (ev["run"], ev["label"], ev["label_a"], ev["label_b"]) == ("toy-008", "recrossing", "recrossing", "left")
    assert not any(e.get("kind") == "review_complete" for e in _events(journal_path(root)))
    panel.queue_view.selectRow(0)
    qtbot.keyClick(panel.queue_view, Qt.Key.Key_B)
    events = _events(journal_path(root))
    done = [e for e in events if e.get("kind") == "review_complete"]
    assert len(done) == 1 and done[0]["reviewer"] == "carla"
    assert done[0]["summary"]["disagreements"] == 3
    assert done[0]["summary"]["kappa"] == pytest.approx(cohen_kappa_score(ANN, BO), abs=1e-6)
    assert panel.queue_view.rowCount() == 0 and "none" not in panel.queue_title.text()
    assert win.state.label_row("toy-002")["hand_label"] == "left"
    # the decisions survive a re-compare: still settled
    panel.compare()
    assert panel.queue.empty


def test_two_labelers_of_one_journal_and_export(setup, tmp_path):
    win, dock, root, other = setup
    panel, review = _ann_against_bo(win)
    assert list(panel.queue["run"]) == DISAGREE
    assert review.kappa == pytest.approx(cohen_kappa_score(ANN, BO), abs=1e-12)  # scikit-learn reference
    assert set(panel.queue["labeler_a"]) == {"ann"} and set(panel.queue["labeler_b"]) == {"bo"}
    out = panel.export_report(tmp_path / "review.md")
    text = out.read_text()
    assert "# Review: ann vs bo" in text and "| toy-005 |" in text and "| toy-001 |" not in text
    panel.source_b.set_source("person", "ann")
    assert panel.compare() is None and "different" in panel.summary.text()


def test_automatic_against_hand(qtbot, tmp_path):
    from basinmark.core.classify import classify_set, write_automatic_labels
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import open_set

    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    tset = open_set(root, use_cache=False)
    rules = load_rules(root / "basins.toml", n_atoms=tset.n_atoms)
    hashes = dict(tset.content_hashes())
    with LabelJournal.open(journal_path(root), labeler="ann") as j:
        write_automatic_labels(j, classify_set(tset, rules), rules)
        j.record("toy-003", "right", content_hash=hashes["toy-003"])
        j.record("toy-004", "right", content_hash=hashes["toy-004"])
    win = _open(qtbot, tmp_path, root)
    install_review_dock(win)
    panel = win.review_panel
    panel.set_sources(("auto",), ("hand",))
    review = panel.compare()
    assert review.n == 2 and list(panel.queue["run"]) == ["toy-003"]
    assert "only 2 runs" in panel.warning.text()
    win.close()


def test_readonly_journal_disables_decisions(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    _write(journal_path(root), "ann", ANN, {})
    other = tmp_path / "bo.jsonl"
    _write(other, "bo", BO, {})
    holder = LabelJournal.open(journal_path(root), labeler="someone-else")
    try:
        win = _open(qtbot, tmp_path, root)
        install_review_dock(win)
        panel = win.review_panel
        panel.set_sources(("final",), ("file", str(other)))
        panel.compare()
        assert list(panel.queue["run"]) == DISAGREE
        assert not panel.take_a.isEnabled() and not panel.decide_button.isEnabled()
        assert "read-only" in panel.status.text()
        before = journal_path(root).read_bytes()
        qtbot.keyClick(panel.queue_view, Qt.Key.Key_A)
        assert journal_path(root).read_bytes() == before
        win.close()
    finally:
        holder.close()


def test_menu_and_dock(setup, qtbot):
    win, dock, root, other = setup
    names = [a.menu().objectName() for a in win.menu_bar.actions() if a.menu() is not None]
    assert "menu_analysis" in names and "menu_export" in names
    assert dock.isHidden()
    dock.toggleViewAction().trigger()
    # compared on first show (two labelers of this journal)
    qtbot.waitUntil(lambda: win.review_panel.review is not None, timeout=3000)


def test_labels_changing_elsewhere_do_not_move_the_window(setup, qtbot):
    win, dock, root, other = setup
    panel = win.review_panel
    dock.toggleViewAction().trigger()
    panel.set_sources(("final",), ("file", str(other)))
    panel.compare()
    panel.queue_view.selectRow(2)
    assert win.state.run_id == "toy-008"
    win.state.set_run("toy-003")          # the person looks at another run and labels it by hand
    assert win.label_panel.apply_label("right")
    assert win.state.run_id == "toy-003"
    assert panel.current_row()["run"] == "toy-008"     # the queue keeps its place
    # after a decision the next disagreement is shown
    panel.queue_view.selectRow(0)
    assert panel.decide_side("B")
    assert panel.current_row()["run"] == "toy-005"
    qtbot.waitUntil(lambda: win.state.run_id == "toy-005", timeout=3000)   # drawn in the turn after


def test_opening_another_set_drops_the_review_so_nothing_of_it_is_decided_there(setup, qtbot, tmp_path):
    win, dock, root, other = setup
    panel = win.review_panel
    panel.set_sources(("final",), ("file", str(other)))
    assert panel.compare() is not None and len(panel.queue) == 3
    second = make_toy_set(tmp_path / "second", OUTCOMES)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(second, use_cache=False)
    assert panel.review is None and len(panel.queue) == 0 and panel.queue_view.rowCount() == 0
    before = journal_path(second).read_bytes() if journal_path(second).exists() else b""
    panel.decide_side("B")  # nothing to decide: must not write
    after = journal_path(second).read_bytes() if journal_path(second).exists() else b""
    assert after == before


def test_a_hidden_review_asks_for_no_label_sources_until_used(setup, qtbot, monkeypatch):
    """Opening a set with a large journal made the hidden review panel count every label source in the load's
    last turn (96 ms of a 381 ms freeze at 10,000 runs with two labelers).  Hidden, it now waits until it is
    shown or used; shown or used, it lists the journal as it is then."""
    win, dock, root, other = setup
    panel = win.review_panel
    dock.hide()
    asked = []
    real = panel.source_entries
    monkeypatch.setattr(panel, "source_entries", lambda: (asked.append(1), real())[1])
    j = _bo_labels_too(win)
    win.state.set_journal(j)   # what opening a set does with its journal
    assert asked == []
    panel.set_sources(("person", "ann"), ("person", "bo"))   # used while hidden: the sources are listed first
    assert asked and panel.compare() is not None and list(panel.queue["run"]) == DISAGREE
    asked.clear()
    win.state.set_journal(j)
    dock.show()
    dock.raise_()
    qtbot.waitUntil(lambda: bool(asked))


def test_labels_refreshed_with_nothing_new_change_nothing(setup):
    """Asking for the label table again when no event came since (here: the same journal set again) built the rows
    of no run, and pandas refused to write nothing into a column of numbers: the window raised an error."""
    win, dock, root, other = setup
    st = win.state
    before = st.labels.copy()
    st.refresh_labels()
    st.refresh_labels()
    st.set_journal(st.journal)
    import pandas as pd

    pd.testing.assert_frame_equal(st.labels, before)


def test_choosing_both_sources_compares_once(setup, monkeypatch):
    """Choosing A and B together compared after each of them (two comparisons at 10,000 runs: 221 ms)."""
    win, dock, root, other = setup
    panel, _review = _ann_against_bo(win)
    compared = []
    real = panel.compare
    monkeypatch.setattr(panel, "compare", lambda: (compared.append(1), real())[1])
    panel.set_sources(("person", "bo"), ("person", "ann"))
    assert len(compared) == 1
    assert panel.review.name_a == "bo" and list(panel.queue["run"]) == DISAGREE


def test_a_long_queue_is_asked_only_for_the_rows_on_screen(setup, qtbot, monkeypatch):
    """2,048 disagreements at 10,000 runs were listed as 14,000 table items, made in the comparing turn (100 ms);
    the queue's cells are now asked for when shown, and every row is still there to select and decide."""
    import pandas as pd

    from basinmark.core.review import DISAGREEMENT_COLUMNS
    from basinmark.gui import review_view

    win, dock, root, other = setup
    dock.show()
    dock.raise_()
    panel = win.review_panel
    panel.set_sources(("final",), ("file", str(other)))
    review = panel.compare()
    n = 3000
    review.disagreements = pd.DataFrame([[f"x-{i:05d}", "left", "ann", "", "right", "bo", "why"] for i in range(n)],
                                        columns=DISAGREEMENT_COLUMNS)
    asked = [0]
    real = review_view.QueueModel.data

    def counting(self, index, role=Qt.ItemDataRole.DisplayRole):
        asked[0] += 1
        return real(self, index, role)

    monkeypatch.setattr(review_view.QueueModel, "data", counting)
    panel.refresh_queue()
    qtbot.wait(50)
    assert panel.queue_view.rowCount() == n
    assert asked[0] < n, f"{asked[0]} cells asked for a queue of {n} rows"
    assert panel.queue_view.text(n - 1, 0) == f"x-{n - 1:05d}" and panel.queue_view.text(0, 6) == "why"
    tip = panel.queue_view.model().index(0, 0).data(Qt.ItemDataRole.ToolTipRole)
    assert tip == "this run is not in the open set"


def test_showing_the_review_compares_in_a_turn_of_its_own(setup, qtbot, monkeypatch):
    """Shown for the first time, the review listed its sources and compared them in one turn (128 ms at 10,000
    runs with two people's labels); the comparison now comes in the next turn, and still comes by itself."""
    win, dock, root, other = setup
    panel = win.review_panel
    compared = []
    real = panel.compare
    monkeypatch.setattr(panel, "compare", lambda: (compared.append(1), real())[1])
    dock.toggleViewAction().trigger()
    assert compared == []
    qtbot.waitUntil(lambda: panel.review is not None, timeout=3000)
    assert compared == [1]


def test_comparing_moves_the_window_to_the_first_disagreement_in_the_next_turn(setup, qtbot, monkeypatch):
    """The comparing turn lists the queue; the window draws the first disagreement's run in the turn after (together
    they were one 152 ms turn at 10,000 runs with two people's labels)."""
    win, dock, root, other = setup
    panel = win.review_panel
    panel.set_sources(("final",), ("file", str(other)))
    shown = []
    real = win.state.set_run
    monkeypatch.setattr(win.state, "set_run", lambda run, *a, **k: (shown.append(run), real(run, *a, **k))[1])
    panel.compare()
    assert shown == [] and panel.current_row()["run"] == DISAGREE[0]
    qtbot.waitUntil(lambda: shown == [DISAGREE[0]], timeout=3000)
    assert win.state.run_id == DISAGREE[0]
