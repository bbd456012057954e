"""The quick-open record stands in for finding the runs while the set's folder lists the same run files; a run
added or removed is noticed (the runs are found again) and named."""

from __future__ import annotations

import json
import shutil

import pytest

from basinmark.core import quick_open as quick_mod
from basinmark.core.pairing import listing_digest
from basinmark.core.quick_open import full_check, quick_open, record_path
from basinmark.core.sets import discover, open_set

from gui_fixtures import make_toy_set

OUTCOMES = ["left", "right", "recrossing", "unfinished"]


@pytest.fixture
def recorded(tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    open_set(root)
    assert full_check(root).recorded
    return root


@pytest.fixture
def finding(monkeypatch):
    """Counts the times the runs are found from the folder (not from the record)."""
    calls = []
    real = quick_mod.discover
    monkeypatch.setattr(quick_mod, "discover", lambda root: calls.append(root) or real(root))
    return calls


def _plan_rows(plan):
    return ([(s.run_id, s.backward, s.forward, s.joined) for s in plan.runs],
            [(f.path, f.reason, f.line) for f in plan.left_out], plan.notes,
            {k: [s.run_id for s in v] for k, v in plan.conventions.items()}, plan.plain, plan.listing)


def test_the_record_stands_in_for_finding_the_runs(recorded, finding):
    (recorded / "odd.txt").write_text("not a run")  # a file left out by the finder: recorded with the plan
    (recorded / "notes.xyz").write_text("1\nno time\nC 0 0 0\n")  # a single frame: a run until read
    open_set(recorded)
    assert full_check(recorded).recorded
    rec = json.loads(record_path(discover(recorded)).read_text())
    assert rec["plan"]["listing"] == listing_digest(recorded, discover(recorded).layout)
    finding.clear()
    quick = quick_open(recorded)
    assert quick is not None and finding == []  # no pairing of file names: the record's plan was taken
    assert _plan_rows(quick.plan) == _plan_rows(discover(recorded))
    assert quick.tset.run_ids == open_set(recorded).run_ids


def test_the_journal_and_its_lock_do_not_make_the_runs_found_again(recorded, finding):
    (recorded / "basinmark-labels.jsonl").write_text("")
    (recorded / "basinmark-labels.jsonl.lock").write_text("12345")
    finding.clear()
    assert quick_open(recorded) is not None and finding == []


def test_an_added_run_is_noticed_and_named(recorded, finding):
    for half in ("bwd", "fwd"):
        shutil.copy(recorded / f"toy-001.{half}.xyz", recorded / f"toy-009.{half}.xyz")
    changes: list[str] = []
    finding.clear()
    assert quick_open(recorded, changes=changes) is None  # found again; a file the record does not know: usual open
    assert finding and len(changes) == 1
    assert "1 run added (toy-009)" in changes[0] and "removed" not in changes[0]
    assert "toy-009" in open_set(recorded).run_ids


def test_a_removed_half_is_noticed_and_named(recorded, finding):
    (recorded / "toy-003.fwd.xyz").unlink()
    changes: list[str] = []
    assert quick_open(recorded, changes=changes) is None
    assert len(changes) == 1 and "1 run removed (toy-003)" in changes[0]
    tset = open_set(recorded)
    assert "toy-003" not in tset.run_ids and any("toy-003" in f.reason for f in tset.left_out)


def test_a_renamed_file_is_noticed(recorded, finding):
    (recorded / "toy-002.bwd.xyz").rename(recorded / "toy-002.back.xyz")  # same run, another convention
    finding.clear()
    assert quick_open(recorded) is None and finding  # the names changed: found again, then the usual open
    assert "toy-002" in open_set(recorded).run_ids
