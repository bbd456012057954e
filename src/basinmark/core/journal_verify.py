"""Verification of a label journal: header, JSON form, sequence, hash chain, head file, run data.

:func:`verify_journal` reads the file without taking the lock and returns a list of
:class:`Problem`; an empty list means the journal is intact (as far as the files can show,
see :mod:`basinmark.core.journal`).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Mapping

from basinmark.core.journal_format import (HEADER_KIND, KINDS, canonical, event_hash, head_path, line_hash,
                                           parse_line, read_head, split_lines)
from basinmark.core.journal_replay import Replay
from basinmark.core.labels import SOURCES

_REQUIRED = {
    "header": ("seq", "prev", "hash", "schema", "created_at"),
    "label": ("seq", "prev", "hash", "time", "labeler", "source", "run", "content_hash", "label", "replaces"),
    "undo": ("seq", "prev", "hash", "time", "labeler", "run", "undoes"),
    "lock_broken": ("seq", "prev", "hash", "time", "labeler"),
    "review_complete": ("seq", "prev", "hash", "time", "labeler"),
}


@dataclass(frozen=True)
class Problem:
    """One thing wrong with a journal: where (line, 1-based; event seq if known), what, and a sentence."""

    line: int | None
    event: int | None
    what: str  # short key: bad_json, not_canonical, bad_hash, bad_seq, bad_prev, header, torn, head, data_changed, ...
    message: str

    def __str__(self) -> str:
        where = f"line {self.line}" if self.line is not None else "journal"
        if self.event is not None:
            where += f" (event {self.event})"
        return f"{where}: {self.message}"


def verify_journal(path: str | Path, current_hashes: Mapping[str, str] | None = None) -> list[Problem]:
    """Check a journal file; with ``current_hashes`` (run -> content hash) also check the labeled runs' data."""
    path = Path(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        return [Problem(None, None, "unreadable", f"cannot read {path}: {exc.strerror or exc}")]
    lines, tail = split_lines(data)
    problems: list[Problem] = []
    add = problems.append
    replay = Replay()
    line_of: dict[int, int] = {}
    expect_seq: int | None = 0
    prev_ok: tuple[str, ...] | None = ("",)
    last_seq, last_hash = -1, ""
    for i, raw in enumerate(lines):
        n = i + 1
        ev = parse_line(raw)
        if ev is None:
            add(Problem(n, None, "bad_json", "this line is not a valid JSON object (damaged or edited)"))
            expect_seq, prev_ok = None, None
            continue
        seq = ev.get("seq")
        seq_i = seq if isinstance(seq, int) and not isinstance(seq, bool) else None
        kind = ev.get("kind")
        stored = ev.get("hash")
        computed = line_hash(raw, stored)
        if computed is None or computed != stored:
            # the slow, exact path for lines that do not pass the shortcut
            try:
                is_canon = raw == canonical(ev).encode("ascii")
            except (TypeError, ValueError, UnicodeEncodeError):
                is_canon = False
            if not is_canon:
                add(Problem(n, seq_i, "not_canonical", "this line is not written the way basinmark writes "
                            "events (edited by hand or by another program)"))
            try:
                computed = event_hash(ev)
            except (TypeError, ValueError):
                computed = ""
            if stored != computed:
                add(Problem(n, seq_i, "bad_hash", "the event's hash does not match its content: it was changed "
                            "after it was written"))
        if kind not in KINDS:
            add(Problem(n, seq_i, "bad_kind", f"unknown event kind {kind!r}"))
        else:
            missing = [k for k in _REQUIRED[kind] if k not in ev]
            if missing:
                add(Problem(n, seq_i, "missing_field", f"the event lacks {', '.join(missing)}"))
        if kind == "label" and (ev.get("source") not in SOURCES or not isinstance(ev.get("label"), str)
                                or not isinstance(ev.get("run"), str)):
            add(Problem(n, seq_i, "bad_field", "the label event's source, label or run is not valid"))
        if i == 0 and kind != HEADER_KIND:
            add(Problem(n, seq_i, "header", "the journal does not start with a header event"))
        elif i > 0 and kind == HEADER_KIND:
            add(Problem(n, seq_i, "header", "a second header in the middle of the journal"))
        if expect_seq is not None and seq_i != expect_seq:
            add(Problem(n, seq_i, "bad_seq", f"sequence number {seq!r} where {expect_seq} was expected "
                        "(an event was removed, repeated, moved or inserted)"))
        if prev_ok is not None and ev.get("prev") not in prev_ok:
            add(Problem(n, seq_i, "bad_prev", "this event does not follow the one before it (the previous "
                        "event's hash differs): events were removed, moved or inserted"))
        expect_seq = None if seq_i is None else seq_i + 1
        prev_ok = tuple(h for h in (stored, computed) if isinstance(h, str) and h)
        if seq_i is not None:
            line_of.setdefault(seq_i, n)
            last_seq, last_hash = seq_i, stored if isinstance(stored, str) else ""
        replay.apply(ev)
    if not lines and not tail:
        add(Problem(None, None, "header", "the journal is empty (no header)"))
    if tail:
        add(Problem(len(lines) + 1, None, "torn", f"the last line is incomplete ({len(tail)} bytes, probably a "
                    "crash while writing); opening the journal for writing sets it aside"))
    _check_head(path, lines, last_seq, last_hash, line_of, add)
    if current_hashes is not None:
        _check_data(replay, current_hashes, line_of, add)
    big = len(lines) + 2
    return sorted(problems, key=lambda p: big if p.line is None else p.line)


def _check_head(path: Path, lines: list, last_seq: int, last_hash: str, line_of: dict, add) -> None:
    if not lines:
        return
    head = read_head(path)
    if head is None:
        add(Problem(None, None, "head", f"the head file {head_path(path).name} is missing or unreadable, so "
                    "events cut from the end could not be noticed"))
        return
    seq, digest = head
    if seq > last_seq:
        add(Problem(len(lines) + 1, last_seq + 1, "head", f"the journal ends at event {last_seq} but its head "
                    f"file records event {seq}: events were removed from the end"))
    elif seq < last_seq:
        add(Problem(line_of.get(seq + 1), seq + 1, "head", f"{last_seq - seq} event(s) after the last one the "
                    "head file records: written by a program that stopped before finishing, or added by "
                    "another program (opening the journal for writing accepts them)"))
    elif digest != last_hash:
        # the last line is where the journal's end differs (an earlier event may carry the same number)
        add(Problem(len(lines), seq, "head", "the last event's hash differs from the one in the head "
                    "file: the end of the journal was changed"))


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
