"""Batches are whole or absent; verify and readers see a consistent journal while a writer works
(issue 12, items 4 and 7).  Writers run in forked children (cheap: the modules are already loaded)
and are killed with SIGKILL at random moments."""

from __future__ import annotations

import json
import os
import random
import signal
import time

import pytest

from basinmark.core.journal import JournalError, LabelJournal, verify_journal
from basinmark.core.journal_verify import verify_report

pytestmark = pytest.mark.skipif(not hasattr(os, "fork") or not hasattr(signal, "SIGKILL"),
                                reason="needs fork and POSIX signals")
H = "cd" * 32


def _child(path, seed: int, wfd: int, singles: bool) -> None:
    """Write batches (and, with ``singles``, single labels) until killed; report each confirmed batch."""
    try:
        rng = random.Random(seed)
        j = LabelJournal.open(path, labeler=f"w{seed}")
        os.write(wfd, b"ready\n")
        k = 0
        while True:
            k += 1
            if singles:  # a person labelling quickly, with now and then a small import
                time.sleep(rng.uniform(0.0, 0.004))
                if rng.random() < 0.8:
                    j.record(f"s{seed}-{k}", "alpha", content_hash=H, reason="single")
                    continue
            n = rng.randint(1, 60 if singles else 600)
            evs = j.record_batch([{"run_id": f"b{seed}-{k}-{i}", "label": "beta", "content_hash": H}
                                  for i in range(n)], rules_hash="0f" * 32)
            if not singles:
                os.write(wfd, f"{evs[0]['batch']} {n}\n".encode())
    finally:
        os._exit(0)


def _spawn(path, seed: int, singles: bool = False):
    r, w = os.pipe()
    pid = os.fork()
    if pid == 0:
        os.close(r)
        _child(path, seed, w, singles)
    os.close(w)
    return pid, r


def _read_all(fd: int) -> str:
    out = b""
    while True:
        chunk = os.read(fd, 65536)
        if not chunk:
            break
        out += chunk
    os.close(fd)
    return out.decode()


def test_sigkill_during_batches_never_makes_an_unfinished_batch_live(tmp_path):
    rng = random.Random(20261202)
    kills = 0
    unconfirmed_seen = 0
    for group in range(10):
        path = tmp_path / f"g{group}" / "basinmark-labels.jsonl"
        path.parent.mkdir()
        for trial in range(10):
            seed = group * 10 + trial
            pid, fd = _spawn(path, seed)
            # wait for "ready", then let it write for a random moment and kill it
            buf = b""
            while b"ready\n" not in buf:
                buf += os.read(fd, 64)
            time.sleep(rng.uniform(0.0, 0.03))
            os.kill(pid, signal.SIGKILL)
            os.waitpid(pid, 0)
            kills += 1
            confirmed = {int(a): int(b) for a, b in (ln.split() for ln in (buf.decode() + _read_all(fd))
                                                      .split("\n") if ln and ln != "ready")}
            # the next writer breaks the dead writer's lock and sets an unfinished batch aside
            with LabelJournal.open(path, labeler="next") as j:
                assert j.problems == []
                state = j.state()
            on_disk = [json.loads(x) for x in path.read_bytes().splitlines()]
            committed = {ev["batch"]: ev["count"] for ev in on_disk if ev["kind"] == "batch_commit"}
            begun = {ev["seq"] for ev in on_disk if ev["kind"] == "batch_begin" and ev["labeler"] == f"w{seed}"
                     or ev["kind"] == "batch_begin" and ev.get("source") == "rule"}
            unconfirmed_seen += len(begun - set(committed))
            live = state[state["run"].str.startswith(f"b{seed}-")]
            by_batch = {}
            for ev in on_disk:
                if ev["kind"] == "label" and ev["run"].startswith(f"b{seed}-"):
                    by_batch.setdefault(ev["batch"], set()).add(ev["run"])
            live_runs = set(live["run"])
            for b, runs in by_batch.items():
                if b in committed:
                    assert runs <= live_runs, f"kill {kills}: committed batch {b} not live"
                else:
                    assert not runs & live_runs, f"kill {kills}: {len(runs & live_runs)} events of unfinished " \
                                                 f"batch {b} became live"
            for b, n in confirmed.items():  # every batch reported as saved is live, whole
                assert b in committed and committed[b] == n and len(by_batch[b]) == n
            assert verify_journal(path) == [], f"kill {kills}"
    assert kills == 100
    # how many kills landed inside a batch varies by machine; record it, do not require it
    print(f"{kills} kills, {unconfirmed_seen} unfinished batches set aside")


def test_failed_batch_write_says_nothing_was_recorded_and_a_retry_records_once(tmp_path, monkeypatch):
    path = tmp_path / "basinmark-labels.jsonl"
    j = LabelJournal.open(path, labeler="mira")
    j.record("r0", "alpha", content_hash=H)
    real_write = os.write

    def part_then_fail(fd, data):
        if fd == j._fd and len(data) > 2000:
            real_write(fd, bytes(data[: len(data) * 56 // 100]))  # 112 of 200 events, say
            raise OSError(28, "No space left on device")
        return real_write(fd, data)
    monkeypatch.setattr(os, "write", part_then_fail)
    entries = [{"run_id": f"r{i}", "label": "beta", "content_hash": H} for i in range(200)]
    with pytest.raises(JournalError, match="nothing of this change was recorded"):
        j.record_batch(entries, source="import", labeler="mira")
    monkeypatch.undo()
    j.close()
    with LabelJournal.open(path, labeler="mira") as j2:  # the message was true: nothing of it is there
        assert j2.final_label("r5") is None and j2.warnings == []
        j2.record_batch(entries, source="import", labeler="mira")  # retried after the error
    with LabelJournal.open(path, readonly=True) as r:
        assert len(r.history("r5")) == 1 and r.final_label("r5") == "beta"
    assert verify_journal(path) == []


def test_unfinished_batch_without_a_crashed_writer_is_a_break(tmp_path):
    path = tmp_path / "basinmark-labels.jsonl"
    with LabelJournal.open(path, labeler="mira") as j:
        j.record("r0", "alpha", content_hash=H)
        j.record_batch([{"run_id": f"r{i}", "label": "beta", "content_hash": H} for i in range(5)])
    lines = path.read_bytes().splitlines(keepends=True)
    path.write_bytes(b"".join(lines[:-1]))  # the commit line removed, head left as it was
    probs = verify_journal(path)
    assert probs and min(p.line for p in probs if p.line) == 3  # where the unfinished batch begins
    with LabelJournal.open(path, readonly=True) as r:
        assert r.final_label("r1") is None and r.final_label("r0") == "alpha"
    with pytest.raises(JournalError, match="damaged"):
        LabelJournal.open(path, labeler="mira")


def test_verify_while_a_writer_labels_reports_nothing(tmp_path):
    """50 verifications (and read-only opens) while another process writes: no false report."""
    path = tmp_path / "basinmark-labels.jsonl"
    with LabelJournal.open(path, labeler="mira") as j:
        j.record("r0", "alpha", content_hash=H)
    pid, fd = _spawn(path, 7, singles=True)
    try:
        buf = b""
        while b"ready\n" not in buf:
            buf += os.read(fd, 64)
        false = []
        seen = set()
        for _ in range(50):
            probs, notes, res = verify_report(path)
            if probs:
                false.append([str(p) for p in probs])
            seen.add(res.n_lines)
            with LabelJournal.open(path, readonly=True) as r:
                if r.problems:
                    false.append([str(p) for p in r.problems])
            time.sleep(0.01)
        assert false == []
        assert len(seen) >= 3  # the writer really was writing meanwhile (how fast depends on the disk)
    finally:
        os.kill(pid, signal.SIGKILL)
        os.waitpid(pid, 0)
        _read_all(fd)


def test_head_that_cannot_be_updated_is_retried_and_never_repaired_silently(tmp_path, monkeypatch):
    """The events are saved but the head cannot be replaced (a full disk, say): the writer says so, tries
    again at the next write and on closing; if it still cannot, it leaves the lock as a crash would, so the
    next writer accepts the one write past the head only once this program has ended."""
    import basinmark.core.journal as jmod
    from basinmark.core.journal_format import read_head
    from basinmark.core.journal_lock import lock_path

    path = tmp_path / "basinmark-labels.jsonl"
    j = LabelJournal.open(path, labeler="mira")
    j.record("r0", "alpha", content_hash=H)
    real = jmod.write_head

    def full(*a, **k):
        raise OSError(28, "No space left on device")
    monkeypatch.setattr(jmod, "write_head", full)
    j.record("r1", "alpha", content_hash=H)
    assert any("head file" in w and "No space" in w for w in j.warnings)
    monkeypatch.setattr(jmod, "write_head", real)
    j.record("r2", "alpha", content_hash=H)  # retried with the next write
    assert read_head(path)[0] == j.last_seq
    monkeypatch.setattr(jmod, "write_head", full)
    j.record("r3", "alpha", content_hash=H)
    j.close()
    assert lock_path(path).exists()  # kept: the files look like a crash's leftovers until this process ends
    with LabelJournal.open(path, readonly=True) as r:  # a reader sees a writer at work, not damage
        assert r.problems == [] and r.final_label("r3") == "alpha"
