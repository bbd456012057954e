"""Verification of a label journal: header, JSON form, sequence, hash chain, batches, head file, witness,
run data.

:func:`verify_journal` reads a consistent snapshot of the files without taking the lock (see
:func:`read_snapshot`) and returns a list of :class:`Problem`; an empty list means the journal is
intact as far as the files (and the witness, when there is one) can show, see
:mod:`basinmark.core.journal`.  What a crash leaves (a torn last line, one write past the head by a
writer that is gone or still at work) is not a problem: :func:`verify_report` lists it as a note.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path
from typing import Mapping

from basinmark.core import journal_witness
from basinmark.core.journal_check import Integrity, Problem, check, check_witness
from basinmark.core.journal_format import read_head_state, split_lines
from basinmark.core.journal_lock import holder_state, read_lock
from basinmark.core.journal_replay import Replay

__all__ = ["Problem", "Snapshot", "read_snapshot", "verify_journal", "verify_report"]


@dataclass
class Snapshot:
    """The journal's bytes with the head and lock as they were while those bytes were read."""

    data: bytes
    head: tuple[int, str] | None
    head_state: str
    writer: str  # journal_check.NOBODY / ACTIVE / GONE
    witness: dict | None | str = "unread"  # read before the journal, so it is never ahead of it


def read_snapshot(path: str | Path, tries: int = 100) -> Snapshot:
    """Read head, journal, lock and head again, until the snapshot is one a single moment could show.

    A writer appends and fsyncs, then replaces the head, and releases the lock only after that.  So
    the journal read before the second head holds at most one write past it; when it also holds the
    event that head names, journal and second head belong together, and the lock (read between
    them) shows whether a writer was at it.  Otherwise (the head moved on past what was read) read
    again.  Raises OSError when the journal cannot be read.
    """
    path = Path(path)
    with open(path, "rb") as fh:  # the header line never changes: it names the witness
        first = fh.readline()
    witness = journal_witness.read_for(path, [first.rstrip(b"\n")]) if first.endswith(b"\n") else None
    for attempt in range(tries):
        head1 = read_head_state(path)
        data = path.read_bytes()
        holder = read_lock(path)
        head2 = read_head_state(path)
        if head1 == head2 or (head2[0] is not None and head2[0][0] < data.count(b"\n")):
            break
        time.sleep(0.001 * min(attempt + 1, 10))
    return Snapshot(data, head2[0], head2[1], holder_state(holder), witness)


def _witness_for(path: Path, lines: list[bytes]) -> dict | None:
    return journal_witness.read_for(path, lines)


def integrity_of(path: str | Path, snap: Snapshot, *, expect: dict | None = None,
                 use_witness: bool = True) -> Integrity:
    """Check a snapshot (and, when given, a receipt's ``expect`` instead of / besides the witness)."""
    lines, tail = split_lines(snap.data)
    if not use_witness:
        witness = None
    elif snap.witness == "unread":
        witness = _witness_for(Path(path), lines)
    else:
        witness = snap.witness
    res = check(lines, tail, head=snap.head, head_state=snap.head_state, writer=snap.writer, witness=witness)
    res.journal_id = journal_witness.journal_id(lines)
    if expect is not None:
        jid = res.journal_id or ""
        if expect.get("id") and not jid.startswith(expect["id"]):
            res.problems.append(Problem(1, 0, "receipt", f"the receipt is for another journal (id {expect['id']}, "
                                        f"this one is {jid[:16] or 'without a header'}): the journal was replaced, "
                                        "or it is the wrong one"))
        else:
            check_witness(res, expect, {ev.get("seq"): i for i, ev in reversed(list(enumerate(res.events)))
                                        if ev is not None and isinstance(ev.get("seq"), int)})
        res.problems.sort(key=lambda p: len(lines) + 2 if p.line is None else p.line)
    return res


def verify_report(path: str | Path, current_hashes: Mapping[str, str] | None = None, *,
                  expect: dict | None = None) -> tuple[list[Problem], list[str], Integrity | None]:
    """(problems, notes about accepted crash leftovers, the integrity check or None if unreadable)."""
    path = Path(path)
    try:
        snap = read_snapshot(path)
    except OSError as exc:
        return [Problem(None, None, "unreadable", f"cannot read {path}: {exc.strerror or exc}")], [], None
    res = integrity_of(path, snap, expect=expect)
    problems = list(res.problems)
    if current_hashes is not None:
        replay = Replay()
        line_of: dict[int, int] = {}
        for i, ev in enumerate(res.events[: res.good_lines]):
            if ev is not None:
                replay.apply(ev)
                if isinstance(ev.get("seq"), int):
                    line_of.setdefault(ev["seq"], i + 1)
        _check_data(replay, current_hashes, line_of, problems.append)
    big = res.n_lines + 2
    return sorted(problems, key=lambda p: big if p.line is None else p.line), res.notes, res


def verify_journal(path: str | Path, current_hashes: Mapping[str, str] | None = None) -> list[Problem]:
    """Check a journal file; with ``current_hashes`` (run -> content hash) also check the labeled runs' data."""
    return verify_report(path, current_hashes)[0]


def _check_data(replay: Replay, current: Mapping[str, str], line_of: dict, add) -> None:
    for run in replay.stacks:
        ev = replay.final_event(run)
        if ev is None:
            continue
        seq = ev.get("seq") if isinstance(ev.get("seq"), int) else None
        line = line_of.get(seq) if seq is not None else None
        if run not in current:
            add(Problem(line, seq, "run_missing", f"run {run} is labeled {ev.get('label')!r} but is not in the "
                        "set any more (or could not be loaded)"))
        elif ev.get("content_hash") != current[run]:
            old, new = str(ev.get("content_hash"))[:12], str(current[run])[:12]
            add(Problem(line, seq, "data_changed", f"run {run}: data changed since labeled {ev.get('label')!r} "
                        f"(content hash {old}... then, {new}... now); look at it again"))
