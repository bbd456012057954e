"""Review by name in the window: A and B list every person in the journal (also people who labeled in
this session), the automatic classification with no recording step, the final labels and other journal
files; kappa per person equals the command line's and scikit-learn's.  Blind labeling hides other
people's hand labels in the run table and the label panel."""

from __future__ import annotations

import json
import random

import pandas as pd
import pytest
from PySide6.QtCore import QSettings
from sklearn.metrics import cohen_kappa_score

from basinmark.core.journal import LabelJournal
from basinmark.core.sets import journal_path, open_set
from basinmark.gui.main_window import MainWindow
from basinmark.gui.review_view import install_review_dock

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = (["left", "right", "left", "recrossing", "left", "right", "unfinished", "left"] * 3)[:22]
RUNS = [f"toy-{i + 1:03d}" for i in range(len(OUTCOMES))]
CHOICES = ["left", "right", "recrossing", "unfinished", "ambiguous"]


@pytest.fixture(autouse=True)
def _labeler_settled(monkeypatch):
    """Where the window asks once who is labeling, answer with the name already set."""
    try:
        import basinmark.gui.labeler as labeler
    except ImportError:
        return
    monkeypatch.setattr(labeler, "ask_labeler", lambda parent, current, login, **kw: current)


def _people_labels(seed: int) -> tuple[dict[str, str], dict[str, str]]:
    """Two people's labels: mostly the designed outcome, sometimes another label (fixed seed)."""
    rng = random.Random(seed)
    ann = {r: (o if rng.random() < 0.8 else rng.choice(CHOICES)) for r, o in zip(RUNS, OUTCOMES)}
    bo = {r: (o if rng.random() < 0.7 else rng.choice(CHOICES)) for r, o in zip(RUNS[3:], OUTCOMES[3:])}
    return ann, bo


def _open(qtbot, tmp_path, root) -> MainWindow:
    win = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(win)
    win.show()
    qtbot.waitExposed(win)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(root, use_cache=False)
    install_review_dock(win)
    return win


@pytest.fixture
def toy(tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    hashes = dict(open_set(root, use_cache=False).content_hashes())
    return root, hashes


def test_two_people_by_name_give_the_kappa_of_the_command_line_and_scikit_learn(qtbot, tmp_path, toy, capsys):
    from basinmark.cli import main

    root, hashes = toy
    ann, bo = _people_labels(7)
    with LabelJournal.open(journal_path(root), labeler="ann") as j:
        for run, lab in ann.items():
            j.record(run, lab, content_hash=hashes[run])
        # ann takes one label back: the one in force is the earlier one (here: none for toy-022)
        j.undo("toy-022")
    ann.pop("toy-022")
    win = _open(qtbot, tmp_path, root)
    # bo labels in this window session, after it opened: bo must still be offered as A or B
    for run, lab in bo.items():
        win.state.journal.record(run, lab, content_hash=hashes[run], labeler="bo")
    win.state.refresh_labels()
    panel = win.review_panel
    win.review_dock.toggleViewAction().trigger()
    keys = panel.source_b.keys()
    assert ("person", "ann") in keys and ("person", "bo") in keys
    assert ("auto_now", "") in keys and ("final", "") in keys and ("choose_file", "") in keys
    panel.set_sources(("person", "ann"), ("person", "bo"))
    review = panel.compare()
    both = [r for r in RUNS if r in ann and r in bo]
    ref = cohen_kappa_score([ann[r] for r in both], [bo[r] for r in both])  # scikit-learn reference
    assert review.n == len(both) and review.kappa == pytest.approx(ref, abs=1e-12)
    assert f"{ref:.3f}" in panel.summary.text()
    # the confusion matrix counts the pairs, per person
    for (a, b), n in review.confusion.stack().items():
        assert n == sum(1 for r in both if ann[r] == a and bo[r] == b)
    # the queue lists exactly the runs they disagree on, named per person
    assert list(panel.queue["run"]) == [r for r in both if ann[r] != bo[r]]
    assert set(panel.queue["labeler_a"]) == {"ann"} and set(panel.queue["labeler_b"]) == {"bo"}
    # the command line gives the same kappa
    win.state.journal.close()
    capsys.readouterr()
    assert main(["compare", str(root), "--labelers", "ann", "bo", "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["runs_compared"] == review.n and doc["kappa"] == pytest.approx(review.kappa, abs=1e-6)
    win.close()


def test_default_review_works_without_recording_automatic_labels(qtbot, tmp_path, toy, capsys):
    from basinmark.cli import main

    root, hashes = toy
    ann, _bo = _people_labels(11)
    with LabelJournal.open(journal_path(root), labeler="ann") as j:
        for run, lab in ann.items():
            j.record(run, lab, content_hash=hashes[run])
    assert not any(e.get("source") == "rule" for e in _events(journal_path(root)))
    win = _open(qtbot, tmp_path, root)
    panel = win.review_panel
    win.review_dock.toggleViewAction().trigger()
    qtbot.waitUntil(lambda: panel.review is not None, timeout=3000)
    review = panel.review
    cls = win.state.classification
    auto = dict(zip(cls["run"], cls["outcome"]))
    assert review.n == len(ann) and "nothing to compare" not in " ".join(review.warnings)
    ref = cohen_kappa_score([auto[r] for r in ann], [ann[r] for r in ann])  # scikit-learn reference
    assert review.kappa == pytest.approx(ref, abs=1e-12)
    assert review.name_a == "automatic (current rules)" and review.name_b == "ann"
    # the command line compares the same classification, also without recording it
    capsys.readouterr()
    assert main(["compare", str(root), "--labelers", "current", "ann", "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["runs_compared"] == review.n and doc["kappa"] == pytest.approx(review.kappa, abs=1e-6)
    assert not any(e.get("source") == "rule" for e in _events(journal_path(root)))
    # choosing the recorded automatic labels says plainly why there is nothing to compare
    panel.source_a.set_source("auto")
    assert panel.review.n == 0 and "no automatic labels are recorded" in panel.warning.text()
    win.close()


def test_another_journal_file_is_chosen_from_the_list(qtbot, tmp_path, toy, monkeypatch):
    from PySide6.QtWidgets import QFileDialog

    root, hashes = toy
    ann, bo = _people_labels(3)
    with LabelJournal.open(journal_path(root), labeler="ann") as j:
        for run, lab in ann.items():
            j.record(run, lab, content_hash=hashes[run])
    other = tmp_path / "elsewhere" / "second.jsonl"
    other.parent.mkdir()
    with LabelJournal.open(other, labeler="bo") as j:
        for run, lab in bo.items():
            j.record(run, lab, content_hash=hashes[run])
    win = _open(qtbot, tmp_path, root)
    panel = win.review_panel
    monkeypatch.setattr(QFileDialog, "getOpenFileName", lambda *a, **k: (str(other), ""))
    b = panel.source_b
    i = next(k for k in range(b.combo.count()) if b.combo.itemData(k) == ("choose_file", ""))
    b.combo.setCurrentIndex(i)
    b.combo.activated.emit(i)
    assert b.source().kind == "file" and b.which.isVisibleTo(panel)
    assert b.which.findText("bo") >= 0  # the people of that file are offered too
    panel.source_a.set_source("person", "ann")
    review = panel.compare()
    both = [r for r in RUNS if r in bo]
    assert review.kappa == pytest.approx(cohen_kappa_score([ann[r] for r in both], [bo[r] for r in both]),
                                         abs=1e-12)  # scikit-learn reference
    assert review.name_b == "second.jsonl: final"
    win.close()


def _events(path):
    return [json.loads(x) for x in path.read_text().splitlines() if x.strip()]


def test_blind_labeling_hides_other_peoples_hand_labels_in_table_and_panel(qtbot, tmp_path, toy):
    root, hashes = toy
    with LabelJournal.open(journal_path(root), labeler="ann") as j:
        j.record("toy-001", "right", content_hash=hashes["toy-001"], reason="ann thinks so")
        j.record("toy-002", "left", content_hash=hashes["toy-002"])
        j.record("toy-003", "unfinished", content_hash=hashes["toy-003"], labeler="carla")
    win = _open(qtbot, tmp_path, root)
    st, table, lp = win.state, win.run_table, win.label_panel
    lp.set_labeler("carla")
    assert st.label_row("toy-001")["hand_label"] == "right"  # not blind: everyone's labels are shown
    win.blind_action.setChecked(True)
    assert st.blind_labeler == "carla"

    def shown(run: str) -> dict:
        r = table.model.row_of(run)
        return {key: table.model.index(r, c).data() for c, (key, _h) in enumerate(__import__(
            "basinmark.gui.run_table", fromlist=["COLUMNS"]).COLUMNS)}

    row = shown("toy-001")
    auto = st.classification.set_index("run").at["toy-001", "outcome"]
    assert row["hand_label"] == "" and row["labeler"] == "" and row["final_label"] == auto
    assert shown("toy-003")["hand_label"] == "unfinished" and shown("toy-003")["labeler"] == "carla"
    st.set_run("toy-001")
    panel_text = lp.current.text() + lp.current.toolTip()
    assert "ann" not in panel_text and "right" not in panel_text.replace(auto, "") and "ann thinks" not in panel_text
    # a blind person's label lands under their name and shows, without revealing ann's
    assert lp.apply_label("left")
    assert shown("toy-001")["hand_label"] == "left" and shown("toy-001")["labeler"] == "carla"
    # undo on a run whose latest hand label is someone else's is refused, not applied to their label
    st.set_run("toy-002")
    before = journal_path(root).read_bytes()
    assert not lp.undo() or journal_path(root).read_bytes() == before
    # the review does not open other people's labels while blind
    assert win.review_panel.compare() is None and "Blind" in win.review_panel.summary.text()
    # another person takes over the window: blind now as that person
    lp.set_labeler("dora")
    assert st.blind_labeler == "dora" and shown("toy-001")["hand_label"] == ""
    win.blind_action.setChecked(False)
    assert st.blind_labeler == ""
    assert shown("toy-002")["hand_label"] == "left" and shown("toy-002")["labeler"] == "ann"
    win.close()


def test_blind_undo_is_refused_when_the_latest_hand_label_is_another_persons(tmp_path, toy):
    from basinmark.core.review import blind_state, blind_undo_refusal

    root, hashes = toy
    with LabelJournal.open(journal_path(root), labeler="carla") as j:
        j.record("toy-001", "left", content_hash=hashes["toy-001"])
        j.record("toy-001", "right", content_hash=hashes["toy-001"], labeler="ann")
        j.record("toy-002", "left", content_hash=hashes["toy-002"])
        assert "not yours" in blind_undo_refusal(j, "toy-001", "carla")
        assert blind_undo_refusal(j, "toy-002", "carla") == ""
        seen = blind_state(j, "carla", hashes).set_index("run")
        assert seen.at["toy-001", "hand_label"] == "left" and seen.at["toy-001", "labeler"] == "carla"
        assert not seen["data_changed"].any()
        seen_by_ann = blind_state(j, "ann", hashes).set_index("run")
        assert seen_by_ann.at["toy-001", "hand_label"] == "right"
        assert pd.isna(seen_by_ann.at["toy-002", "hand_label"]) and pd.isna(seen_by_ann.at["toy-002", "final_label"])
