"""The integrity check every reader and writer of a label journal runs before it trusts it.

:func:`check` looks at the journal's bytes (its complete lines and any torn tail), the head file,
who holds the lock and, when there is one, the witness kept outside the set's folder
(:mod:`basinmark.core.journal_witness`).  It returns an :class:`Integrity`:

- ``problems``: breaks that only a person can settle (``basinmark recover``), each at its line;
- ``notes``: what a crash leaves and is accepted as such (a torn last line; the events of one
  write past the head, written by a process that is gone or still at work; an unfinished batch
  of such a process);
- ``good_lines``: how many leading lines are trusted; readers replay only those, so labels are
  shown as of the last good event.

What counts as a crash (and nothing else is accepted without ``recover``):

- a torn last line (a write cut short) while the head records the last complete event;
- exactly one write past the head (one event, or one batch from its ``batch_begin`` on, finished
  or not) while the lock is held by a process that is gone (a crash) or still at work (a reader
  looking while a writer writes).  A journal of only its header with no head file is the same
  case (a crash straight after creating it).

A missing or unreadable head file on a journal with more than its header, events past the head
with nobody holding the lock, a head that names an event the journal does not have or one with
another hash, and every broken link of the chain are breaks.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from basinmark.core.journal_format import (HEADER_KIND, KINDS, canonical, event_hash, line_hash,
                                           parse_line)
from basinmark.core.labels import SOURCES

# writer evidence: who holds the lock while the files are read
NOBODY, ACTIVE, GONE = "nobody", "active", "gone"

_REQUIRED = {
    "header": ("seq", "prev", "hash", "schema", "created_at"),
    "label": ("seq", "prev", "hash", "time", "labeler", "source", "run", "content_hash", "label", "replaces"),
    "undo": ("seq", "prev", "hash", "time", "labeler", "run", "undoes"),
    "lock_broken": ("seq", "prev", "hash", "time", "labeler"),
    "review_complete": ("seq", "prev", "hash", "time", "labeler"),
    "batch_begin": ("seq", "prev", "hash", "time", "labeler", "count"),
    "batch_commit": ("seq", "prev", "hash", "time", "batch", "count"),
    "batch_abandoned": ("seq", "prev", "hash", "time", "batch"),
    "recovered": ("seq", "prev", "hash", "time", "labeler"),
    "note": ("seq", "prev", "hash", "time", "labeler", "run", "note"),
}


@dataclass(frozen=True)
class Problem:
    """One thing wrong with a journal: where (line, 1-based; event seq if known), what, and a sentence."""

    line: int | None
    event: int | None
    what: str  # short key: bad_json, not_canonical, bad_hash, bad_seq, bad_prev, inserted, repeated, header,
    #            batch, head, witness, data_changed, run_missing, ...
    message: str

    def __str__(self) -> str:
        if self.line is None:
            return self.message if self.event is None else f"event {self.event}: {self.message}"
        where = f"line {self.line}"
        if self.event is not None:
            where += f" (event {self.event})"
        return f"{where}: {self.message}"


@dataclass
class Integrity:
    """What :func:`check` found (see the module text)."""

    problems: list[Problem] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    events: list[dict | None] = field(default_factory=list)  # parsed event per complete line (None: not JSON)
    good_lines: int = 0
    n_lines: int = 0
    tail: int = 0  # bytes of a torn last line
    last_seq: int = -1  # the last event of the whole chain (as read)
    last_hash: str = ""
    open_batch: int | None = None  # line index (0-based) of an unfinished batch's begin at the end, if accepted
    head_lag: bool = False  # events past the head accepted as one crashed or running write
    witness: dict | None = None  # the witness compared with, if any
    journal_id: str | None = None  # the header's hash

    @property
    def broken(self) -> bool:
        return bool(self.problems)

    @property
    def good_seq(self) -> int:
        """The sequence number of the last trusted event (-1: none)."""
        for ev in reversed(self.events[: self.good_lines]):
            if ev is not None and isinstance(ev.get("seq"), int):
                return ev["seq"]
        return -1

    def summary(self, path) -> str:
        """One paragraph for people: what is broken, where, and what to do."""
        shown = "; ".join(str(p) for p in self.problems[:5])
        more = f"; and {len(self.problems) - 5} more" if len(self.problems) > 5 else ""
        good = self.good_seq
        asof = (f"labels are shown as of event {good} (line {self.good_lines})" if good >= 0
                else "no event of it can be trusted, so no labels are shown")
        return (f"the label journal {path} is damaged: {shown}{more}. {asof.capitalize()}; nothing more is written "
                "to it until you run 'basinmark recover SET', which sets aside what cannot be trusted and records "
                "why ('basinmark verify SET' lists every problem)")


def _int(v) -> int | None:
    return v if isinstance(v, int) and not isinstance(v, bool) else None


def check(lines: list[bytes], tail: bytes = b"", *, head: tuple[int, str] | None = None, head_state: str = "ok",
          writer: str = NOBODY, witness: dict | None = None) -> Integrity:
    """Check a journal's complete ``lines`` (and torn ``tail``) against its head and witness.

    ``head_state``: ``ok``, ``missing`` or ``unreadable`` (then ``head`` is None); ``writer``: who holds
    the lock (:data:`NOBODY`, :data:`ACTIVE`, :data:`GONE`); ``witness``: ``{"seq", "hash", "time",
    "where"}`` recorded outside the folder, or None.
    """
    res = Integrity(n_lines=len(lines), tail=len(tail))
    problems = res.problems
    add = problems.append
    events = res.events
    line_of: dict[int, int] = {}
    # the chain as accepted so far: (line index, seq, acceptable hashes) of the last two events
    last: tuple[int, int | None, tuple[str, ...]] | None = (-1, -1, ("",))  # before the first line
    before: tuple[int, int | None, tuple[str, ...]] | None = None
    batch: tuple[int, int | None, int] | None = None  # (begin line, begin seq, members so far)
    last_followed = True  # whether the line before followed its own predecessor
    for i, raw in enumerate(lines):
        n = i + 1
        ev = parse_line(raw)
        events.append(ev)
        if ev is None:
            add(Problem(n, None, "bad_json", "this line is not a valid JSON object (damaged or edited)"))
            before, last, last_followed = last, None, False
            continue
        seq = _int(ev.get("seq"))
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
                add(Problem(n, seq, "not_canonical", "this line is not written the way basinmark writes events "
                            "(edited by hand or by another program)"))
            try:
                computed = event_hash(ev)
            except (TypeError, ValueError):
                computed = ""
            if stored != computed:
                add(Problem(n, seq, "bad_hash", "the event's hash does not match its content: it was changed "
                            "after it was written"))
        if kind not in KINDS:
            add(Problem(n, seq, "bad_kind", f"unknown event kind {kind!r}"))
        else:
            missing = [k for k in _REQUIRED[kind] if k not in ev]
            if missing:
                add(Problem(n, seq, "missing_field", f"the event lacks {', '.join(missing)}"))
        if kind == "label" and (ev.get("source") not in SOURCES or not isinstance(ev.get("label"), str)
                                or not isinstance(ev.get("run"), str)):
            add(Problem(n, seq, "bad_field", "the label event's source, label or run is not valid"))
        if kind == "note" and (not isinstance(ev.get("run"), str) or not isinstance(ev.get("note"), str)):
            add(Problem(n, seq, "bad_field", "the note event's run or text is not valid"))
        if i == 0 and kind != HEADER_KIND:
            add(Problem(n, seq, "header", "the journal does not start with a header event"))
        elif i > 0 and kind == HEADER_KIND:
            add(Problem(n, seq, "header", "a second header in the middle of the journal"))
        if computed == stored and isinstance(stored, str):
            hashes: tuple[str, ...] = (stored,)
        else:
            hashes = tuple(h for h in (stored, computed) if isinstance(h, str) and h)
        prev = ev.get("prev")
        followed, pred = True, last
        if last is not None:
            want_seq = None if last[1] is None else last[1] + 1
            want_prev = last[2]
            follows = (want_seq is None or seq == want_seq) and prev in want_prev
            if not follows:
                followed = False
                if i and raw == lines[i - 1]:
                    add(Problem(n, seq, "repeated", "this line repeats the one before it (a duplicated event)"))
                elif (last_followed and before is not None and before[0] == i - 2 and before[1] is not None
                      and seq == before[1] + 1 and prev in before[2] and not _next_follows(lines, i, last)
                      and not _is_head(events[i - 1], head, i + 1 == len(lines))):
                    # the event two lines up is followed by this one: the line between is the intruder
                    add(Problem(n - 1, _int(events[i - 1].get("seq")) if events[i - 1] else None, "inserted",
                                "this event was inserted: the events before and after it follow each other "
                                "without it"))
                    pred, followed = before, True
                elif want_seq is not None and seq != want_seq:
                    add(Problem(n, seq, "bad_seq", f"sequence number {ev.get('seq')!r} where {want_seq} was "
                                "expected (an event was removed, repeated, moved or inserted)"))
                else:
                    add(Problem(n, seq, "bad_prev", "this event does not follow the one before it (the previous "
                                "event's hash differs): events were removed, moved or inserted"))
        before, last, last_followed = pred, (i, seq, hashes), followed
        if seq is not None:
            line_of.setdefault(seq, i)
            res.last_seq, res.last_hash = seq, stored if isinstance(stored, str) else ""
        if batch is not None or kind != "label" or "batch" in ev:  # (skipped for plain labels: speed)
            batch = _check_batch(ev, kind, n, seq, batch, add)
    if not lines and not tail:
        add(Problem(None, None, "header", "the journal is empty (no header)"))
    bad = [p.line for p in problems if p.line is not None]
    res.good_lines = min(bad) - 1 if bad else len(lines)
    _judge_end(res, lines, batch, head, head_state, writer, line_of)
    if witness is not None:
        res.witness = {k: v for k, v in witness.items() if k != "where"}
        check_witness(res, witness, line_of)
    res.good_lines = max(0, min(res.good_lines, len(lines)))
    problems.sort(key=lambda p: len(lines) + 2 if p.line is None else p.line)
    return res


def _is_head(ev: dict | None, head: tuple[int, str] | None, at_end: bool) -> bool:
    """Whether ``ev``, the second-last line, is the event the head file records while the last line competes
    with it for the same place: then the last line, not ``ev``, is the one added (nothing follows to decide)."""
    return at_end and head is not None and ev is not None and ev.get("hash") == head[1]


def _next_follows(lines: list[bytes], i: int, last: tuple) -> bool:
    """Whether line i+1 follows ``last`` (line i-1): then line i, not line i-1, is the one out of place."""
    if i + 1 >= len(lines) or last[1] is None:
        return False
    nxt = parse_line(lines[i + 1])
    return nxt is not None and _int(nxt.get("seq")) == last[1] + 1 and nxt.get("prev") in last[2]


def _check_batch(ev: dict, kind, n: int, seq: int | None, batch, add):
    """Batch structure: begin, its members (``batch`` = begin's seq), then commit or abandoned."""
    if batch is not None and kind == "label" and ev.get("batch") == batch[1]:
        return batch[0], batch[1], batch[2] + 1
    if kind == "batch_begin":
        if batch is not None:
            add(Problem(n, seq, "batch", f"a batch begins inside the unfinished batch of line {batch[0] + 1}"))
        return n - 1, seq, 0
    if kind in ("batch_commit", "batch_abandoned"):
        if batch is None or ev.get("batch") != batch[1]:
            add(Problem(n, seq, "batch", f"a {kind.replace('_', ' ')} event for batch {ev.get('batch')!r}, "
                        "which is not the batch under way"))
            return None
        if kind == "batch_commit" and ev.get("count") != batch[2]:
            add(Problem(n, seq, "batch", f"the batch is committed with {ev.get('count')!r} events but "
                        f"{batch[2]} follow its beginning (line {batch[0] + 1})"))
        return None
    if batch is not None:
        add(Problem(n, seq, "batch", f"an event that does not belong to the unfinished batch of line "
                    f"{batch[0] + 1} (the batch's end is missing)"))
        return None
    if kind == "label" and ev.get("batch") is not None:
        add(Problem(n, seq, "batch", "a batch event outside any batch (its beginning is missing)"))
    return None


def _units_after(events: list[dict | None], start: int, end: int) -> int | None:
    """How many writes lines ``start:end`` form (a single event, or a batch from its begin), None if odd."""
    units, i = 0, start
    while i < end:
        ev = events[i]
        if ev is None:
            return None
        units += 1
        if ev.get("kind") == "batch_begin":
            i += 1
            while i < end and (events[i] or {}).get("kind") not in ("batch_commit", "batch_abandoned"):
                i += 1
        i += 1
    return units


def _judge_end(res: Integrity, lines, batch, head, head_state: str, writer: str, line_of: dict) -> None:
    problems, add = res.problems, res.problems.append
    n = len(lines)
    if not n:
        return
    crash_ok = writer in (ACTIVE, GONE)
    who = "a writer that is still at work" if writer == ACTIVE else "a writer that stopped (its process is gone)"
    if head is None:
        if n == 1 and crash_ok:
            res.notes.append(f"the head file is {head_state}; the journal holds only its header, written by {who}")
            res.head_lag = True
        else:
            add(Problem(None, None, "head", f"the head file is {head_state}, so events cut from the end could not "
                        "be noticed (a crash never leaves it so; deleted or damaged by hand?)"))
        _judge_batch(res, batch, crash_ok, who, start=0)
        return
    seq, digest = head
    if seq > res.last_seq:
        add(Problem(n + 1, res.last_seq + 1, "head", f"the journal ends at event {res.last_seq} but its head file "
                    f"records event {seq}: events were removed from the end"))
        _judge_batch(res, batch, crash_ok, who, start=n)
        return
    at = line_of.get(seq)
    if at is None or at >= n:
        add(Problem(None, seq, "head", f"the head file records event {seq}, which the journal does not hold"))
        return
    got = res.events[at].get("hash") if res.events[at] else None
    if got != digest:
        # where the journal's recorded end differs (an earlier event may carry the same number)
        line = n if seq == res.last_seq else at + 1
        add(Problem(line, seq, "head", "this event's hash differs from the one in the head file: the journal was "
                    "changed at or before this point (or the head file was edited)"))
        res.good_lines = min(res.good_lines, line - 1)
        return
    if at < n - 1:
        units = _units_after(res.events, at + 1, n)
        if crash_ok and units == 1:
            res.head_lag = True
            res.notes.append(f"{n - 1 - at} event(s) after the last one the head file records: one write by {who}")
        else:
            add(Problem(at + 2, seq + 1, "head", f"{n - 1 - at} event(s) after the last one the head file records "
                        f"(event {seq}), and no writer crashed or is at work: added by another program, or the "
                        "head file was set back"))
            res.good_lines = min(res.good_lines, at + 1)
    _judge_batch(res, batch, crash_ok, who, start=at + 1)
    if res.tail and not problems:
        res.notes.append(f"the last line is incomplete ({res.tail} bytes, a write cut short); it is left out "
                         "(the next writer sets it aside)")


def _judge_batch(res: Integrity, batch, crash_ok: bool, who: str, start: int) -> None:
    """An unfinished batch at the end: a crash (or a write under way) only if it begins past the head."""
    if batch is None:
        return
    begin, bseq, members = batch
    if crash_ok and begin >= start and not res.problems:
        res.open_batch = begin
        res.notes.append(f"an unfinished batch (line {begin + 1} on, {members} event(s) so far) by {who}; it is not "
                         "counted and the next writer sets it aside")
        return
    res.problems.append(Problem(begin + 1, bseq, "batch", f"a batch that was never finished ({members} event(s) "
                                "and no end); its events are not counted"))
    res.good_lines = min(res.good_lines, begin)


def check_witness(res: Integrity, witness: dict, line_of: dict) -> None:
    seq, digest = witness.get("seq"), witness.get("hash")
    if not isinstance(seq, int):
        return
    where = f"{witness.get('where', 'the witness')} (written {witness.get('time', '?')})"
    n = res.n_lines
    if seq > res.last_seq:
        res.problems.append(Problem(n + 1, res.last_seq + 1, "witness", f"the journal ends at event {res.last_seq} "
                                    f"but {where} records event {seq}: events were removed from the end, or the "
                                    "journal (and its head file) were set back to an older copy"))
        return
    at = line_of.get(seq)
    got = res.events[at].get("hash") if at is not None and res.events[at] else None
    if got != digest:
        line = None if at is None else at + 1
        res.problems.append(Problem(line, seq, "witness", f"event {seq} differs from what {where} records: the "
                                    "journal was rewritten at or before this event"))
        if line is not None:
            res.good_lines = min(res.good_lines, line - 1)


# --- damage seen by readers in this process (the command line prints it once more at the end) ----------
_SEEN: dict[str, str] = {}


def note_damage(path, integrity: Integrity) -> None:
    _SEEN[str(path)] = integrity.summary(path)


def take_damage_reports() -> dict[str, str]:
    """Journal path -> paragraph for every damaged journal opened since the last call (and forget them)."""
    out = dict(_SEEN)
    _SEEN.clear()
    return out
