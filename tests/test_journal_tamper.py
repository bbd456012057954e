"""Tamper detection (hypothesis): every single-byte change, deleted, duplicated, swapped or forged line
is reported by verify_journal at the line where it happened."""

from __future__ import annotations

import json
import shutil

import pytest
from hypothesis import given
from hypothesis import strategies as st

from basinmark.core.journal import LabelJournal, verify_journal
from basinmark.core.journal_format import head_path, seal

H = "ab" * 32


@pytest.fixture(scope="module")
def base(tmp_path_factory):
    d = tmp_path_factory.mktemp("tamper")
    path = d / "basinmark-labels.jsonl"
    with LabelJournal.open(path, labeler="mira", set_id="ringfork-demo") as j:
        j.record_batch([{"run_id": f"r{i:03d}", "label": ["alpha", "beta", "recrossing"][i % 3],
                         "content_hash": H} for i in range(6)], rules_hash="0f" * 32)
        j.record("r001", "beta", content_hash=H, reason="bond C2-C9 forms first — see frame 310")
        j.record("r004", "excluded", content_hash=H, reason="drift 2.4 kcal/mol")
        j.undo("r001", reason="wrong run")
        j.adjudicate("r002", "alpha", content_hash=H, label_a="alpha", label_b="beta", reviewer="chief")
        j.review_complete(reviewer="chief")
    assert verify_journal(path) == []
    work = d / "work"
    work.mkdir()
    return path.read_bytes(), head_path(path), work / "basinmark-labels.jsonl"


def check(base, data: bytes) -> list:
    _, head, target = base
    target.write_bytes(data)
    shutil.copyfile(head, head_path(target))
    return verify_journal(target)


def first_line(problems) -> int:
    lines = [p.line for p in problems if p.line is not None]
    assert lines, problems
    return min(lines)


def test_untouched_copy_verifies(base):
    assert check(base, base[0]) == []


@given(st.data())
def test_any_changed_byte_is_found_on_its_line(base, data):
    raw = base[0]
    pos = data.draw(st.integers(0, len(raw) - 1))
    new = data.draw(st.integers(0, 255).filter(lambda b: b != raw[pos]))
    changed = raw[:pos] + bytes([new]) + raw[pos + 1:]
    expected = raw[:pos].count(b"\n") + 1  # the line holding the byte (its own newline included)
    assert first_line(check(base, changed)) == expected


@given(st.data())
def test_deleted_line_is_found(base, data):
    lines = base[0].splitlines(keepends=True)
    k = data.draw(st.integers(0, len(lines) - 1))
    probs = check(base, b"".join(lines[:k] + lines[k + 1:]))
    # the next event now sits on line k+1; removing the last line is seen through the head file
    assert first_line(probs) == k + 1


@given(st.data())
def test_duplicated_line_is_found(base, data):
    lines = base[0].splitlines(keepends=True)
    k = data.draw(st.integers(0, len(lines) - 1))
    probs = check(base, b"".join(lines[:k + 1] + [lines[k]] + lines[k + 1:]))
    assert first_line(probs) == k + 2  # the copy


@given(st.data())
def test_swapped_pair_is_found(base, data):
    lines = base[0].splitlines(keepends=True)
    k = data.draw(st.integers(0, len(lines) - 2))
    swapped = lines[:k] + [lines[k + 1], lines[k]] + lines[k + 2:]
    assert first_line(check(base, b"".join(swapped))) == k + 1


@given(st.data())
def test_inserted_forged_line_is_found(base, data):
    lines = base[0].splitlines(keepends=True)
    p = data.draw(st.integers(0, len(lines)))  # insert before line p (0-based); p == len: at the end
    m = data.draw(st.integers(0, len(lines) - 1))  # the event the forger starts from
    ev = json.loads(lines[m])
    ev["reason"] = "forged"
    ev["seq"] = data.draw(st.sampled_from([ev["seq"], p, p + 1]))
    forged = seal(ev).encode("ascii")  # its own hash is correct: only the chain can tell
    probs = check(base, b"".join(lines[:p] + [forged] + lines[p:]))
    # even a forgery that fits the chain exactly at its place is reported at its own line: the events
    # before and after it follow each other without it (issue 12, item 7)
    assert first_line(probs) == p + 1


def test_writer_refuses_and_reader_warns_on_an_event_changed_in_place(tmp_path):
    """An event edited after it was written (its stored hash no longer matches) is not built upon."""
    from basinmark.core.journal import JournalError, LabelJournal

    path = tmp_path / "labels.jsonl"
    with LabelJournal.open(path, labeler="t") as j:
        j.record("r1", "alpha", content_hash="a" * 64, reason="first")
        j.record("r2", "beta", content_hash="b" * 64, reason="second")
    lines = path.read_text().splitlines()
    lines[1] = lines[1].replace('"alpha"', '"beta"', 1)  # same hash, other content
    path.write_text("\n".join(lines) + "\n")
    before = path.read_bytes()
    with pytest.raises(JournalError, match=r"line 2 \(event 1\): the event's hash does not match"):
        LabelJournal.open(path, labeler="t")
    ro = LabelJournal.open(path, readonly=True)
    assert any("line 2" in w and "hash does not match" in w for w in ro.warnings)
    ro.close()
    assert path.read_bytes() == before  # nothing was written or rewritten
