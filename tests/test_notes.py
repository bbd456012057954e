"""Per-run notes in the journal: audited note events that never change labels, kept apart on replay, listed in the
history, exported, and covered by the journal's integrity checks."""

from __future__ import annotations

import csv

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from basinmark.core.journal import JournalError, LabelJournal
from basinmark.core.journal_io import export_labels, export_table
from basinmark.core.journal_verify import verify_report
from basinmark.core.labels import LabelError

ALLOWED = ["alpha", "beta", "recrossing", "unfinished", "ambiguous", "excluded"]


def _open(path, **kw):
    return LabelJournal.open(path, set_id="notes-demo", labeler="ines", **kw)


def test_a_note_round_trips_and_never_changes_labels(tmp_path):
    path = tmp_path / "labels.jsonl"
    with _open(path) as j:
        j.allowed = ALLOWED
        j.record("r1", "alpha", content_hash="h1", reason="clean")
        before = j.state().copy()
        ev = j.note("r1", "check the C-O distance again")
        assert ev["kind"] == "note" and ev["run"] == "r1" and ev["labeler"] == "ines"
        j.note("r2", "starts oddly")             # a run without any label
        # labels untouched: same table, same event count per run
        assert j.state().equals(before) and j.final_label("r1") == "alpha"
    with _open(path, readonly=True) as j:
        assert j.run_note("r1") == "check the C-O distance again" and j.run_note("r2") == "starts oddly"
        assert j.run_note("r3") == ""
        assert list(j.notes()["run"]) == ["r1", "r2"]
        hist = j.history("r1")
        assert list(hist["kind"]) == ["label", "note"]
        assert hist.iloc[-1]["reason"] == "check the C-O distance again"
        assert j.final_label("r1") == "alpha"


def test_the_latest_note_wins_and_an_empty_note_clears(tmp_path):
    path = tmp_path / "labels.jsonl"
    with _open(path) as j:
        j.note("r1", "first thought")
        j.note("r1", "second thought")
        assert j.run_note("r1") == "second thought"
        j.note("r1", "")
        assert j.run_note("r1") == "" and j.notes().empty
        assert list(j.history("r1")["kind"]) == ["note", "note", "note"]   # every change stays on record


def test_undo_takes_back_labels_not_notes(tmp_path):
    with _open(tmp_path / "labels.jsonl") as j:
        j.allowed = ALLOWED
        j.record("r1", "alpha", content_hash="h1")
        j.note("r1", "look again")
        j.record("r1", "beta", content_hash="h1")
        j.undo("r1")
        assert j.final_label("r1") == "alpha" and j.run_note("r1") == "look again"


def test_notes_are_checked_text(tmp_path):
    with _open(tmp_path / "labels.jsonl") as j:
        with pytest.raises(LabelError):
            j.note("r1", "two\nlines")
        with pytest.raises(JournalError):
            j.note("", "no run")


def test_integrity_covers_notes(tmp_path):
    path = tmp_path / "labels.jsonl"
    with _open(path) as j:
        j.note("r1", "keep an eye on this one")
    problems, _notes, _res = verify_report(path, None)
    assert problems == []
    # the note text changed by hand after it was written: the chain says so
    lines = path.read_text(encoding="utf-8").splitlines()
    k = next(i for i, line in enumerate(lines) if '"kind":"note"' in line)
    lines[k] = lines[k].replace("keep an eye on this one", "nothing to see here")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    problems, _notes, _res = verify_report(path, None)
    assert any(p.what == "bad_hash" for p in problems)


def test_export_carries_the_notes(tmp_path):
    path = tmp_path / "labels.jsonl"
    with _open(path) as j:
        j.allowed = ALLOWED
        j.record("r1", "alpha", content_hash="h1")
        j.note("r1", "=SUM(A1) looks like a formula")
        j.note("r9", "only a note")
        table = export_table(j)
        assert dict(zip(table["run"], table["note"])) == {"r1": "=SUM(A1) looks like a formula",
                                                          "r9": "only a note"}
        out = export_labels(j, tmp_path / "labels.csv")
    rows = {r["run"]: r for r in csv.DictReader(out.open(encoding="utf-8"))}
    assert rows["r1"]["note"] == "'=SUM(A1) looks like a formula"   # spreadsheet-safe cell (csv_safe)
    assert rows["r9"]["note"] == "only a note" and rows["r9"]["label"] == ""


@settings(max_examples=40, deadline=None)
@given(st.text(alphabet=st.characters(blacklist_categories=("Cc", "Cs", "Zl", "Zp")), max_size=80))
def test_any_plain_note_round_trips(tmp_path_factory, text):
    path = tmp_path_factory.mktemp("n") / "labels.jsonl"
    try:
        with _open(path) as j:
            written = j.note("r1", text)["note"]
    except LabelError:
        return  # refused text (the journal's plain-text rule) is never written
    with _open(path, readonly=True) as j:  # read back from disk, through the hash chain
        assert j.run_note("r1") == written
        assert written.strip() == text.strip()
        assert list(j.history("r1")["kind"]) == ["note"]


def test_note_from_the_command_line_appears_in_history_and_export(tmp_path, capsys):
    from basinmark.cli import main
    from basinmark.core.sets import journal_path

    from gui_fixtures import make_toy_set

    root = make_toy_set(tmp_path / "toyset", ["left", "right"])
    assert main(["note", str(root), "toy-001", "check the forming bond again", "--as", "ines", "--no-cache"]) == 0
    assert main(["note", str(root), "toy-404", "a typo", "--no-cache"]) != 0          # not a run of the set
    capsys.readouterr()
    assert main(["history", str(root), "toy-001", "--format", "csv"]) == 0
    out = capsys.readouterr().out
    assert "note" in out and "check the forming bond again" in out and "ines" in out
    assert main(["export-labels", str(root), "--no-data", "--format", "csv"]) == 0
    rows = list(csv.DictReader(capsys.readouterr().out.splitlines()))
    assert [(r["run"], r["note"]) for r in rows] == [("toy-001", "check the forming bond again")]
    with LabelJournal.open(journal_path(root), readonly=True) as j:
        assert j.final_label("toy-001") is None   # a note is not a label
