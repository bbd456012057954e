"""Every reader checks the journal before it trusts it (issue 12, items 1-3 and 7).

Property tests over every way of tampering with a journal: a changed byte, a deleted, duplicated,
swapped or forged line (its own hash recomputed), a cut at an event boundary with the head file
kept, deleted, garbled or copied from the last remaining line, and a rollback of the journal alone
or of journal and head together while a witness exists.  Each must be reported by verify at the
right line, by a read-only open (labels as of the last good event), and no writer may proceed.
"""

from __future__ import annotations

import json
import shutil

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from basinmark.core import journal_witness
from basinmark.core.journal import JournalDamagedError, JournalError, LabelJournal, verify_journal
from basinmark.core.journal_format import head_path, seal, write_head
from basinmark.core.journal_replay import Replay

H = "ab" * 32
KINDS = ["byte", "delete", "duplicate", "swap", "forge", "cut_head_kept", "cut_head_deleted", "cut_head_garbled",
         "cut_head_copied", "rollback_journal", "rollback_both"]


def build(path):
    with LabelJournal.open(path, labeler="mira", set_id="ringfork-demo") as j:
        j.record_batch([{"run_id": f"r{i:03d}", "label": ["alpha", "beta", "recrossing"][i % 3],
                         "content_hash": H} for i in range(6)], rules_hash="0f" * 32)
        j.record("r001", "beta", content_hash=H, reason="bond C2-C9 forms first")
        j.record("r004", "excluded", content_hash=H, reason="drift 2.4 kcal/mol")
        j.record("r003", "beta", content_hash=H, reason="late commit")
        j.undo("r001", reason="wrong run")
        j.record("r005", "alpha", content_hash=H, reason="second look")
        j.adjudicate("r002", "alpha", content_hash=H, label_a="alpha", label_b="beta", reviewer="chief")
        j.review_complete(reviewer="chief")
    assert verify_journal(path) == []


@pytest.fixture(scope="module")
def pristine(tmp_path_factory):
    d = tmp_path_factory.mktemp("integrity")
    path = d / "basinmark-labels.jsonl"
    build(path)
    return path.read_bytes().splitlines(keepends=True)


def tamper(lines: list[bytes], kind: str, draw) -> tuple[bytes, str, int | None]:
    """(new journal bytes, what to do with the head, the 1-based line where the break must be reported)."""
    n = len(lines)
    raw = b"".join(lines)
    if kind == "byte":
        pos = draw(st.integers(0, len(raw) - 1))
        new = draw(st.integers(0, 255).filter(lambda b: b != raw[pos]))
        return raw[:pos] + bytes([new]) + raw[pos + 1:], "keep", raw[:pos].count(b"\n") + 1
    if kind == "delete":
        k = draw(st.integers(0, n - 1))
        return b"".join(lines[:k] + lines[k + 1:]), "keep", k + 1
    if kind == "duplicate":
        k = draw(st.integers(0, n - 1))
        return b"".join(lines[:k + 1] + [lines[k]] + lines[k + 1:]), "keep", k + 2
    if kind == "swap":
        k = draw(st.integers(0, n - 2))
        return b"".join(lines[:k] + [lines[k + 1], lines[k]] + lines[k + 2:]), "keep", k + 1
    if kind == "forge":
        p = draw(st.integers(0, n))
        m = draw(st.integers(0, n - 1))
        ev = json.loads(lines[m])
        ev["reason"] = "forged"
        if ev.get("kind") == "label":
            ev["label"] = draw(st.sampled_from(["alpha", "beta", "excluded"]))
        ev["seq"] = draw(st.sampled_from([ev["seq"], p, p + 1]))
        if draw(st.booleans()) and p > 0:  # a careful forger also fixes the link to the line before
            ev["prev"] = json.loads(lines[p - 1])["hash"]
        forged = seal(ev).encode("ascii")  # its own hash is right: only the chain can tell
        return b"".join(lines[:p] + [forged] + lines[p:]), "keep", p + 1
    # cuts and rollbacks keep the first m complete lines (at an event boundary)
    m = draw(st.integers(1, n - 1))
    cut = b"".join(lines[:m])
    head = {"cut_head_kept": "keep", "cut_head_deleted": "delete", "cut_head_garbled": "garble",
            "cut_head_copied": "copy_last", "rollback_journal": "keep", "rollback_both": "copy_last"}[kind]
    # a cut inside a batch leaves a batch that was never finished: reported where that batch begins
    begin = None
    for i, raw in enumerate(lines[:m]):
        k = json.loads(raw)["kind"]
        begin = i + 1 if k == "batch_begin" else None if k == "batch_commit" else begin
    return cut, head, begin or m + 1


def place(target, lines, data: bytes, head: str, witness: bool) -> None:
    """Write the tampered journal with its head file and (optionally) the witness of the pristine one."""
    target.write_bytes(data)
    last = json.loads(lines[-1])
    hp = head_path(target)
    hp.unlink(missing_ok=True)
    if head in ("keep",):
        write_head(target, last["seq"], last["hash"])
    elif head == "garble":
        hp.write_bytes(b"\x00garbage{")
    elif head == "copy_last":
        rest = data.splitlines()
        ev = json.loads(rest[-1])
        write_head(target, ev["seq"], ev["hash"])
    jid = json.loads(lines[0])["hash"]
    wp = journal_witness.witness_path(target, jid)
    wp.unlink(missing_ok=True)
    if witness:
        journal_witness.write(target, jid, last["seq"], last["hash"])


def first_line(problems) -> int | None:
    lines = [p.line for p in problems if p.line is not None]
    return min(lines) if lines else None


def expected_state(lines: list[bytes], good: int):
    replay = Replay()
    for raw in lines[:good]:
        replay.apply(json.loads(raw))
    return replay.state()


@settings(max_examples=150)  # eleven kinds of damage: a dozen or more cases of each
@given(data=st.data())
def test_every_tamper_is_reported_by_verify_readers_and_writers(pristine, tmp_path_factory, data):
    kind = data.draw(st.sampled_from(KINDS))
    tampered, head, line = tamper(pristine, kind, data.draw)
    # only setting journal and head back together, or a copied head, needs the witness to be seen
    witness = kind in ("rollback_both", "cut_head_copied") or data.draw(st.booleans())
    target = tmp_path_factory.mktemp("t") / "basinmark-labels.jsonl"
    place(target, pristine, tampered, head, witness)
    probs = verify_journal(target)
    assert probs, kind
    if head in ("delete", "garble") and not witness:
        # nothing shows where the journal was cut: reported, without a line
        assert any(p.what == "head" for p in probs), probs
    else:
        assert first_line(probs) == line, (kind, probs)
    with LabelJournal.open(target, readonly=True) as r:
        assert r.problems and any("damaged" in w for w in r.warnings)
        good = r.integrity.good_lines
        mine = r.state()
    # labels as of the last good event: the untouched lines before the break, never a tampered one
    assert good == line - 1, (kind, good, line)
    want = expected_state(pristine, good)
    cols = ["run", "auto_label", "hand_label", "final_label", "labeler"]
    assert mine[cols].equals(want[cols]), kind
    before = target.read_bytes()
    with pytest.raises(JournalDamagedError):
        LabelJournal.open(target, labeler="intruder")
    assert target.read_bytes() == before  # no writer proceeds, nothing is rewritten
    assert not (target.parent / (target.name + ".lock")).exists()


def test_cut_with_head_deleted_then_label_is_refused(tmp_path):
    """Cut three labels off the end, delete the head, label once: refused, and verify keeps failing."""
    path = tmp_path / "basinmark-labels.jsonl"
    with LabelJournal.open(path, labeler="mira") as j:
        for i in range(6):
            j.record(f"r{i}", "alpha", content_hash=H, reason=f"look {i}")
    lines = path.read_bytes().splitlines(keepends=True)
    path.write_bytes(b"".join(lines[:-3]))
    head_path(path).unlink()
    with pytest.raises(JournalError, match="head file is missing"):
        LabelJournal.open(path, labeler="mira")
    assert path.read_bytes() == b"".join(lines[:-3]) and not head_path(path).exists()
    assert verify_journal(path) != []


def test_receipt_catches_a_rollback_with_no_witness(tmp_path, monkeypatch):
    from basinmark.core.journal_verify import verify_report

    path = tmp_path / "basinmark-labels.jsonl"
    with LabelJournal.open(path, labeler="mira") as j:
        for i in range(4):
            j.record(f"r{i}", "alpha", content_hash=H)
        line = journal_witness.receipt(j.header["hash"], j.last_seq, j.last_hash)
    old = path.read_bytes()
    old_head = head_path(path).read_bytes()
    with LabelJournal.open(path, labeler="mira") as j:
        j.record("r9", "beta", content_hash=H)
        later = journal_witness.receipt(j.header["hash"], j.last_seq, j.last_hash)
    assert verify_report(path, expect=journal_witness.parse_receipt(line))[0] == []  # still holds that event
    # set journal and head back together, and lose the witness (another account, say)
    path.write_bytes(old)
    head_path(path).write_bytes(old_head)
    monkeypatch.setenv("BASINMARK_STATE_DIR", str(tmp_path / "other-account"))
    assert verify_journal(path) == []  # from the files alone, this cannot be seen
    probs = verify_report(path, expect=journal_witness.parse_receipt(later))[0]
    assert [p.what for p in probs] == ["witness"] and probs[0].line == 6
    with pytest.raises(JournalError, match="not a basinmark receipt"):
        journal_witness.parse_receipt("events=3 hash=00")
    other = tmp_path / "other.jsonl"
    with LabelJournal.open(other, labeler="mira"):
        pass
    probs = verify_report(other, expect=journal_witness.parse_receipt(later))[0]
    assert [p.what for p in probs] == ["receipt"]


def test_recover_sets_aside_and_records_why(tmp_path):
    path = tmp_path / "basinmark-labels.jsonl"
    with LabelJournal.open(path, labeler="mira") as j:
        for i in range(5):
            j.record(f"r{i}", "alpha", content_hash=H, reason=f"look {i}")
    lines = path.read_bytes().splitlines(keepends=True)
    lines[3] = lines[3].replace(b"look 2", b"look 7")  # changed in place
    path.write_bytes(b"".join(lines))
    assert LabelJournal.recover.__doc__
    ev = LabelJournal.recover(path, by="chief", reason="a sync tool rewrote line 4")
    assert ev["kind"] == "recovered" and ev["labeler"] == "chief" and ev["kept_lines"] == 3
    assert ev["set_aside_lines"] == [4, 6] and ev["problem_count"] >= 1 and "line 4" in ev["problems"][0]
    side = path.parent / ev["set_aside_file"]
    assert side.read_bytes() == b"".join(lines[3:])  # nothing deleted, only moved aside
    assert verify_journal(path) == []
    with LabelJournal.open(path, labeler="mira") as j:
        assert j.final_label("r1") == "alpha" and j.final_label("r2") is None and j.problems == []
        j.record("r2", "alpha", content_hash=H, reason="again")
    assert LabelJournal.recover(path, by="chief") is None  # intact: nothing to do, nothing written


def test_recover_inside_a_batch_abandons_it(tmp_path):
    path = tmp_path / "basinmark-labels.jsonl"
    with LabelJournal.open(path, labeler="mira") as j:
        j.record_batch([{"run_id": f"r{i}", "label": "alpha", "content_hash": H} for i in range(6)])
    lines = path.read_bytes().splitlines(keepends=True)
    lines[4] = lines[4].replace(b'"alpha"', b'"beta"')
    path.write_bytes(b"".join(lines))
    with LabelJournal.open(path, readonly=True) as r:
        assert r.state().empty  # the batch is not whole: none of it counts
    ev = LabelJournal.recover(path, by="chief", reason="test")
    with LabelJournal.open(path, readonly=True) as r:
        kinds = [e["kind"] for e in r.events]
        assert kinds[-2:] == ["batch_abandoned", "recovered"] and r.state().empty and r.problems == []
    assert ev["kept_lines"] == 4 and verify_journal(path) == []


def test_verify_accepts_a_head_one_write_behind_after_a_crash(tmp_path):
    """A writer killed between the journal's fsync and the head update: verify passes with a note."""
    import os
    import socket

    from basinmark.core.journal_lock import lock_path
    from basinmark.core.journal_verify import verify_report

    path = tmp_path / "basinmark-labels.jsonl"
    with LabelJournal.open(path, labeler="mira") as j:
        j.record("r1", "alpha", content_hash=H)
        before = head_path(path).read_bytes()
        j.record_batch([{"run_id": f"r{i}", "label": "beta", "content_hash": H} for i in range(3)])
    head_path(path).write_bytes(before)  # the head update never happened
    assert [p.what for p in verify_journal(path)] == ["head"]  # with no crashed writer, that is a break
    # the crashed writer's lock: a pid that is not running on this host
    dead = 2 ** 22 + 12345
    while True:
        try:
            os.kill(dead, 0)
            dead += 1
        except ProcessLookupError:
            break
        except PermissionError:
            dead += 1
    lock_path(path).write_text(json.dumps({"owner": "mira", "host": socket.gethostname(), "pid": dead,
                                           "time": "2026-01-01T00:00:00.000Z", "token": "feed"}))
    probs, notes, _ = verify_report(path)
    assert probs == [] and any("one write by a writer that stopped" in n for n in notes)
    with LabelJournal.open(path, labeler="ines") as j:  # the next writer accepts it and records the broken lock
        assert j.final_label("r2") == "beta" and j.events[-1]["kind"] == "lock_broken"
    assert verify_journal(path) == []


def test_two_writes_past_the_head_are_not_a_crash(tmp_path):
    path = tmp_path / "basinmark-labels.jsonl"
    with LabelJournal.open(path, labeler="mira") as j:
        j.record("r1", "alpha", content_hash=H)
        before = head_path(path).read_bytes()
        j.record("r2", "alpha", content_hash=H)
        j.record("r3", "alpha", content_hash=H)
    head_path(path).write_bytes(before)
    probs = verify_journal(path)
    assert [p.what for p in probs] == ["head"] and probs[0].line == 3
    with LabelJournal.open(path, readonly=True) as r:
        assert r.final_label("r2") is None  # as of the last event the head vouches for


def test_copied_journal_elsewhere_is_not_a_rollback(tmp_path):
    """The witness belongs to a journal at its place: a copy that goes its own way is no rollback."""
    a = tmp_path / "a" / "basinmark-labels.jsonl"
    a.parent.mkdir()
    with LabelJournal.open(a, labeler="mira") as j:
        j.record("r1", "alpha", content_hash=H)
    b = tmp_path / "b" / "basinmark-labels.jsonl"
    shutil.copytree(a.parent, b.parent)
    with LabelJournal.open(b, labeler="mira") as j:
        j.record("r2", "alpha", content_hash=H)
    with LabelJournal.open(a, labeler="mira") as j:
        j.record("r3", "alpha", content_hash=H)
    assert verify_journal(a) == [] and verify_journal(b) == []
