"""The audited label journal: the only code that writes label files.

One append-only JSON Lines file per set (by default ``<set>/basinmark-labels.jsonl``).
The first line is a header event, then one event per change.  Every event carries its
sequence number, UTC time (RFC 3339), labeler, source, run id, the run's content hash,
the new label, the label it replaces, a reason, the previous event's hash and its own
hash (see :mod:`basinmark.core.journal_format`).  Current labels are a replay of the
events; nothing is ever edited in place, an undo is a new event.

Durability: every write is one ``os.write`` of whole lines on a descriptor opened with
``O_APPEND``, followed by ``fsync`` before the call returns; then the head file (and the
witness outside the folder, :mod:`basinmark.core.journal_witness`) record the new end.  A batch
(automatic labels, an import) is one write between ``batch_begin`` and ``batch_commit`` and
counts only once the commit is on disk.  A write that fails is cut back to what was confirmed
before.

Trust: every open, read-only or not, checks header, lines, sequence, chain, batches, head and
witness (:mod:`basinmark.core.journal_check`).  What a crash leaves is accepted, and a writer sets
it aside while recording so: a torn last line is copied to ``<journal>.torn-<UTC time>`` and cut
(bytes after the last complete line only); an unfinished batch of a writer that stopped gets a
``batch_abandoned`` event; a lock left by a dead process on this host is broken (a
``lock_broken`` event).  Anything else is a break: readers show labels as of the last good event
and say so; writers refuse until :meth:`LabelJournal.recover` (``basinmark recover SET``) moves
the untrusted lines to ``<journal>.set-aside-<UTC time>`` and records what and why.

Only one process writes a journal at a time (``<journal>.lock``, see
:mod:`basinmark.core.journal_lock`); read-only opens never take the lock.

What can and cannot be shown: any edit, deletion, duplication, reordering or insertion of lines is
found by the chain; cutting events off the end, by the head file; setting journal and head back
together, by the witness (on this account, at this place) or by a receipt noted elsewhere
(``basinmark receipt SET``).  Someone who rewrites the whole file and the head with freshly computed
hashes, where no witness or receipt exists, cannot be caught from the files alone.
"""

from __future__ import annotations

import contextlib
import getpass
import glob
import hashlib
import os
import socket
import threading
from pathlib import Path
from typing import Iterable, Mapping, Sequence

import pandas as pd

from basinmark import __version__
from basinmark.core import journal_witness
from basinmark.core.journal_check import GONE, NOBODY, Integrity, Problem, check, note_damage
from basinmark.core.journal_format import (BINARY, HEADER_KIND, SCHEMA_VERSION, JournalError, read_head_state, seal,
                                           split_lines, utc_now, utc_stamp, write_head)
from basinmark.core.journal_lock import (JournalFileError, JournalLockedError, acquire, describe, is_stale,
                                         lock_path, read_lock, release)
from basinmark.core.journal_replay import Replay
from basinmark.core.journal_verify import Snapshot, integrity_of, read_snapshot, verify_journal
from basinmark.core.labels import (HAND_SOURCES, SOURCES, LabelError, check_labeler_name, check_reason,
                                   validate_label)

__all__ = ["LabelJournal", "JournalError", "JournalLockedError", "JournalDamagedError", "JournalFileError",
           "JournalWriteError", "verify_journal", "Problem", "default_labeler"]

_BATCH = object()  # placeholder for the begin's seq in a batch's label events, filled in when sealed


class JournalDamagedError(JournalError):
    """The journal failed its integrity check; nothing is written until ``basinmark recover``.

    ``integrity.problems`` lists each break with its line.
    """

    def __init__(self, path: str | Path, integrity: Integrity):
        self.path = Path(path)
        self.integrity = integrity
        self.problems = list(integrity.problems)
        super().__init__(integrity.summary(self.path))


class JournalWriteError(JournalError):
    """Events could not be written (``errno``, ``strerror`` from the file system); the message says what counts."""

    def __init__(self, path: str | Path, exc: OSError, message: str):
        self.path = Path(path)
        self.errno = exc.errno
        self.strerror = exc.strerror or str(exc)
        from basinmark.core.fs_errors import reason_and_advice

        super().__init__(f"{message}; {reason_and_advice(exc)[1]}")  # and what to do about it


def default_labeler() -> str:
    """The login name (``getpass.getuser()``), or ``unknown`` when the system cannot tell."""
    try:
        return getpass.getuser() or "unknown"
    except Exception:  # getuser raises various errors when no name is known
        return "unknown"


def _fsync_dir(path: Path) -> None:
    try:
        fd = os.open(path, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


class LabelJournal:
    """An open label journal.  Use :meth:`open`; close it (or use ``with``) to release the lock."""

    def __init__(self) -> None:  # use LabelJournal.open
        self.path: Path = Path()
        self.readonly = True
        self.labeler = ""
        self.set_id = ""
        self.header: dict | None = None
        self.warnings: list[str] = []
        self.allowed: list[str] | None = None
        self._replay = Replay()
        self._last_seq = -1
        self._last_hash = ""
        self._size = 0
        self._fd: int | None = None
        self._lock: dict | None = None
        self._mutex = threading.Lock()  # one write at a time within this process (GUI worker threads)
        self.integrity: Integrity | None = None
        self.problems: list[Problem] = []
        self._jid: str | None = None  # the header's hash: the journal's identity (for the witness)
        self._crashed = False  # a failed write could not be undone: keep the lock as a crash would
        self._head_lags = False
        self._witness_warned = False
        self._forced: str | None = None  # break_lock(force=True): why the person broke a live lock
        self._recovered: dict | None = None  # the event recover wrote

    # --- opening --------------------------------------------------------------------------
    @classmethod
    def open(cls, path: str | Path, *, set_id: str = "", labeler: str | None = None, readonly: bool = False,
             allowed: Sequence[str] | None = None) -> "LabelJournal":
        """Open (and for writing, create if missing) the journal at ``path``.

        Every open checks the whole journal first (:mod:`basinmark.core.journal_check`).  A damaged
        journal opens read-only with the labels as of its last good event (:attr:`problems` says what
        is wrong, :attr:`warnings` says it in a sentence); for writing it is refused with
        :class:`JournalDamagedError` until ``basinmark recover`` (:meth:`recover`) has set the damage
        aside.  Writing takes the lock (:class:`JournalLockedError` if a live process holds it; a lock
        whose process on this host is gone is broken and that is recorded).
        ``allowed``: if given, every new label must be one of these.
        """
        j = cls()
        j.path = Path(path)
        j.readonly = readonly
        j.labeler = labeler or default_labeler()
        j.set_id = set_id
        j.allowed = list(allowed) if allowed is not None else None
        if readonly:
            if not j.path.is_file():
                raise JournalError(f"there is no label journal at {j.path}")
            try:
                snap = read_snapshot(j.path)
            except OSError as exc:
                raise JournalFileError(j.path, "read the label journal", exc, outcome="nothing was read") from None
            j._load(snap, writer=False)
            return j
        return cls._open_writer(j, broken=None)

    @classmethod
    def _open_writer(cls, j: "LabelJournal", broken: dict | None, *, recover_reason: str | None = None):
        if not j.path.parent.is_dir():
            raise JournalError(f"cannot create the label journal {j.path}: the folder does not exist")
        j._lock, stale = acquire(j.path, j.labeler)
        broken = broken or stale
        try:
            j._open_for_writing(broken, recover_reason)
        except BaseException:
            if j._fd is not None:
                os.close(j._fd)
                j._fd = None
            release(j.path, j._lock)
            j._lock = None
            raise
        return j

    def _open_for_writing(self, broken: dict | None, recover_reason: str | None) -> None:
        created = not self.path.exists()
        try:
            self._fd = os.open(self.path, os.O_WRONLY | os.O_APPEND | os.O_CREAT | BINARY, 0o644)
        except OSError as exc:
            raise JournalFileError(self.path, "open the label journal for writing", exc) from None
        if created:
            _fsync_dir(self.path.parent)
        for stale in self.path.parent.glob(glob.escape(self.path.name) + ".head.tmp-*"):
            stale.unlink(missing_ok=True)  # left by a writer that died while updating the head; we hold the lock
        data = self.path.read_bytes()
        head, head_state = read_head_state(self.path)
        if not data and head_state == "missing":
            res = Integrity()  # a new journal (or one whose creation stopped before its header)
        else:
            snap = Snapshot(data, head, head_state, GONE if broken else NOBODY)
            res = integrity_of(self.path, snap)
        pending: list[dict] = []
        if res.broken:
            if recover_reason is None:
                raise JournalDamagedError(self.path, res)
            pending = self._set_aside_damage(data, res, head, head_state, recover_reason)
            data = self.path.read_bytes()
            res = check(*split_lines(data))  # the kept lines all passed the check: replay all of them
            res.problems.clear()
            res.notes.clear()
            res.good_lines = res.n_lines
        _, tail = split_lines(data)
        if tail:
            self._set_aside(tail, len(data) - len(tail))
        self._apply_checked(res, writer=True)
        self._size = len(data) - len(tail)
        bodies: list[dict] = []
        if self.header is None:
            bodies.append({"kind": HEADER_KIND, "schema": SCHEMA_VERSION, "set_id": self.set_id,
                           "created_by": self.labeler, "created_at": utc_now(), "host": socket.gethostname(),
                           "tool_version": __version__})
        if self._replay.pending_begin is not None:
            begin = self._replay.pending_begin
            held = len(self._replay.pending or [])
            why = ("its writer stopped before finishing it" if recover_reason is None
                   else "set aside by recover")
            bodies.append({"kind": "batch_abandoned", "source": "hand", "labeler": self.labeler, "batch": begin,
                           "events": held, "reason": f"an unfinished batch ({held} event(s)): {why}; none of it counts"})
            self.warnings.append(f"an unfinished batch in {self.path} (event {begin} on, {held} label event(s), "
                                 "left by a writer that stopped) was set aside: none of its labels count")
        if broken is not None:
            old = {k: v for k, v in broken.items() if k != "token"}
            bodies.append({"kind": "lock_broken", "source": "hand", "labeler": self.labeler, "old_lock": old,
                           "stale": is_stale(broken), "automatic": not self._forced,
                           "reason": self._forced or "its process is no longer running on this host"})
            if not self._forced:
                self.warnings.append(f"the lock of {self.path} was left by {describe(broken)}, which is no longer "
                                     "running; it was broken and that is recorded in the journal")
        bodies += pending
        if bodies:
            self._write(bodies)
        elif res.head_lag:  # cannot happen without a broken lock (an event is then written); kept for safety
            self._update_head(self._last_seq, self._last_hash)
        self._recovered = pending[0] if pending else None

    def _set_aside_damage(self, data: bytes, res: Integrity, head, head_state: str, reason: str) -> list[dict]:
        """recover: move every line from the first untrusted one to a side file, cut the journal there,
        and return the event that records what was set aside and why."""
        lines, tail = split_lines(data)
        keep = sum(len(x) + 1 for x in lines[: res.good_lines])
        aside = data[keep:]
        side = None
        if aside:
            side = Path(f"{self.path}.set-aside-{utc_stamp()}")
            self._move_end_to(side, aside, keep, "set aside the damaged part of")
        n_aside = len(lines) - res.good_lines
        self.warnings.append(
            (f"{n_aside} line(s) from line {res.good_lines + 1} on ({len(aside)} bytes) were moved to {side.name}"
             if side else "no line had to be set aside") + "; recorded as a 'recovered' event")
        witness = getattr(res, "witness", None)
        return [{"kind": "recovered", "source": "hand", "labeler": self.labeler, "reason": reason,
                 "problems": [str(p) for p in res.problems[:100]], "problem_count": len(res.problems),
                 "kept_lines": res.good_lines,
                 "set_aside_file": side.name if side else None,
                 "set_aside_lines": [res.good_lines + 1, len(lines) + (1 if tail else 0)] if aside else None,
                 "set_aside_bytes": len(aside),
                 "set_aside_sha256": hashlib.sha256(aside).hexdigest() if aside else None,
                 "head_was": list(head) if head is not None else head_state,
                 "witness_was": witness}]

    def _move_end_to(self, side: Path, data: bytes, keep: int, doing: str) -> None:
        """Copy ``data`` (the journal's end from byte ``keep``) whole into the new file ``side``, then cut
        the journal at ``keep``; on any failure the journal is left as it was and no half copy remains."""
        try:
            fd = os.open(side, os.O_WRONLY | os.O_CREAT | os.O_EXCL | BINARY, 0o644)
            try:
                view = memoryview(data)
                while view:  # a short write (a disk filling up) must not pass for a whole copy
                    view = view[os.write(fd, view):]
                os.fsync(fd)
            except OSError:
                os.close(fd)
                side.unlink(missing_ok=True)  # a half copy is no copy; the journal is left as it was
                raise
            os.close(fd)
            _fsync_dir(self.path.parent)
            os.truncate(self.path, keep)
            assert self._fd is not None
            os.fsync(self._fd)
        except OSError as exc:
            raise JournalFileError(self.path, doing, exc, outcome="the journal was not changed") from None

    def _set_aside(self, tail: bytes, keep: int) -> None:
        side = Path(f"{self.path}.torn-{utc_stamp()}")
        self._move_end_to(side, tail, keep, "set aside the incomplete last line of")
        self.warnings.append(f"the last line of {self.path} was incomplete ({len(tail)} bytes, probably a crash "
                             f"while writing); it was moved to {side.name} and left out")

    def _load(self, snap: Snapshot, *, writer: bool) -> None:
        res = integrity_of(self.path, snap)
        self._apply_checked(res, writer=writer)
        self._size = len(snap.data) - res.tail

    def _apply_checked(self, res: Integrity, *, writer: bool) -> None:
        """Replay the trusted lines of a checked journal and note what the check found."""
        self.integrity = res
        self.problems = list(res.problems)
        self.warnings += res.notes
        if res.broken:
            self.warnings.append(res.summary(self.path))
            note_damage(self.path, res)
        apply = self._replay.apply
        for i, ev in enumerate(res.events[: res.good_lines]):
            if ev is None:
                continue
            if i == 0 and ev.get("kind") == HEADER_KIND:
                self.header = ev
                self._jid = ev.get("hash") if isinstance(ev.get("hash"), str) else None
                theirs = ev.get("set_id", "")
                if self.set_id and theirs and theirs != self.set_id:
                    self.warnings.append(f"{self.path} was started for the set {theirs!r}, not {self.set_id!r} "
                                         "(a renamed folder, or another set's journal?)")
                self.set_id = theirs or self.set_id
                if isinstance(ev.get("schema"), int) and ev["schema"] > SCHEMA_VERSION:
                    msg = (f"{self.path} was written by a newer basinmark (schema {ev['schema']}, this one "
                           f"knows {SCHEMA_VERSION})")
                    if writer:
                        raise JournalError(msg + "; it is not safe to add labels with this version")
                    self.warnings.append(msg)
            apply(ev)
            seq = ev.get("seq")
            if isinstance(seq, int):
                self._last_seq = seq
                self._last_hash = ev.get("hash", "")

    # --- writing --------------------------------------------------------------------------
    def _require_writer(self) -> None:
        if self.readonly:
            raise JournalError(f"the label journal {self.path} was opened read-only")
        if self._fd is None:
            raise JournalError(f"the label journal {self.path} is closed")

    def _write(self, bodies: list[dict]) -> list[dict]:
        """Seal events (seq, time, prev, hash), write them in one write + one fsync, then apply them."""
        with self._mutex:
            return self._write_locked(bodies)

    def _write_locked(self, bodies: list[dict]) -> list[dict]:
        self._require_writer()
        assert self._fd is not None
        now = utc_now()
        seq, prev = self._last_seq, self._last_hash
        parts = []
        for ev in bodies:
            seq += 1
            if ev.get("kind") == "batch_begin":
                begin = seq
            elif ev.get("batch") is _BATCH:
                ev["batch"] = begin
            elif ev.get("kind") == "batch_commit":
                ev["batch"] = begin
            ev["seq"] = seq
            ev.setdefault("time", now)
            ev["prev"] = prev
            parts.append(seal(ev))
            prev = ev["hash"]
        data = "".join(parts).encode("ascii")
        size = os.fstat(self._fd).st_size
        if size != self._size:
            raise JournalError(f"the label journal {self.path} was changed on disk by another program "
                               f"({size} bytes instead of {self._size}); reopen it")
        view = memoryview(data)
        try:
            while view:
                n = os.write(self._fd, view)
                view = view[n:]
            os.fsync(self._fd)
        except OSError as exc:
            self._undo_failed_write(exc)
        self._size += len(data)
        self._last_seq, self._last_hash = seq, prev
        if self.header is None and bodies and bodies[0].get("kind") == HEADER_KIND:
            self.header = bodies[0]
            self._jid = bodies[0]["hash"]
        self._update_head(seq, prev)
        for ev in bodies:
            self._replay.apply(ev)
        return bodies

    def _undo_failed_write(self, exc: OSError) -> None:
        """A write or fsync failed: cut the journal back to what was confirmed before, then raise."""
        assert self._fd is not None
        why = exc.strerror or str(exc)
        try:
            os.ftruncate(self._fd, self._size)
            os.fsync(self._fd)
            undone = True
        except OSError:
            undone = False
        os.close(self._fd)
        self._fd = None
        if undone and self._size == 0 and self.header is None:
            # the journal was new and nothing of it was confirmed (its header could not be written): remove
            # the empty file, which readers would otherwise take for a damaged journal
            with contextlib.suppress(OSError):
                self.path.unlink()
        if undone:
            raise JournalWriteError(self.path, exc, f"the label(s) could not be saved to {self.path} ({why}); "
                                    "nothing of this change was recorded; reopen the journal to go on") from None
        # keep the lock: to the next writer, what was written is then the leftover of a writer that stopped
        # (an unfinished batch, or an incomplete line), which it sets aside without counting it
        self._crashed = True
        raise JournalWriteError(self.path, exc, f"the label(s) could not be saved to {self.path} ({why}) and the "
                                "unfinished part could not be removed; it does not count as saved (a single "
                                "label written whole may still show up); the lock stays until this program "
                                "ends, then the next writer sets the rest aside") from None

    def _update_head(self, seq: int, digest: str) -> None:
        try:
            write_head(self.path, seq, digest)
            self._head_lags = False
        except OSError as exc:  # the events are saved; only the end marker lags (retried at the next write)
            self._head_lags = True
            self.warnings.append(f"the head file of {self.path} could not be updated ({exc.strerror or exc}); "
                                 "it is tried again at the next write and on closing")
            return
        if self._jid:
            try:
                journal_witness.write(self.path, self._jid, seq, digest)
            except OSError as exc:
                if not self._witness_warned:
                    self._witness_warned = True
                    self.warnings.append(f"the witness of {self.path} in {journal_witness.state_dir()} could not "
                                         f"be updated ({exc.strerror or exc}); a rollback of the journal would "
                                         "not be noticed there")

    def _label_event(self, run_id: str, label: str, content_hash: str, reason: str, source: str,
                     labeler: str | None, pending: dict[str, str | None] | None = None) -> dict:
        if source not in SOURCES:
            raise JournalError(f"unknown label source {source!r}; one of {', '.join(SOURCES)}")
        if not isinstance(run_id, str) or not run_id.strip():
            raise JournalError("a run id must be non-empty text")
        if not isinstance(content_hash, str):
            raise JournalError(f"run {run_id}: the content hash must be text")
        reason = check_reason(reason)
        label = validate_label(label, self.allowed, reason=reason)
        who = check_labeler_name(labeler or self.labeler, person=source != "rule")
        replaces = (pending[run_id] if pending is not None and run_id in pending
                    else self._replay.track_label(run_id, source))
        return {"kind": "label", "source": source, "labeler": who, "run": run_id,
                "content_hash": content_hash, "label": label, "replaces": replaces, "reason": reason}

    def record(self, run_id: str, label: str, *, content_hash: str, reason: str = "", source: str = "hand",
               labeler: str | None = None) -> dict:
        """Append one label event; it is on disk (fsynced) when this returns.  Returns the event."""
        return self._write([self._label_event(run_id, label, content_hash, reason, source, labeler)])[0]

    def record_batch(self, entries: Iterable[Mapping], *, source: str = "rule", rules_hash: str | None = None,
                     tool_version: str | None = None, labeler: str | None = None) -> list[dict]:
        """Append many label events as one batch, in one write and one fsync (e.g. a whole set's automatic labels).

        The events sit between a ``batch_begin`` and a ``batch_commit`` event; a reader counts them
        only once the commit is on disk, so a batch is whole or absent.  Returns the label events.
        ``entries``: mappings with run_id, label, content_hash and optionally reason and labeler.  All are
        checked before anything is written.  Rule events are credited to ``rule:<rules hash>``
        unless ``labeler`` is given.
        """
        if source == "rule" and labeler is None:
            labeler = f"rule:{rules_hash[:12]}" if rules_hash else "rule"
        pending: dict[str, str | None] = {}
        bodies = []
        for i, e in enumerate(entries):
            try:
                ev = self._label_event(e["run_id"], e["label"], e["content_hash"], e.get("reason", ""), source,
                                       e.get("labeler") or labeler, pending)
            except KeyError as exc:
                raise JournalError(f"batch entry {i + 1} lacks {exc.args[0]!r}") from None
            except (JournalError, LabelError) as exc:
                raise type(exc)(f"batch entry {i + 1}: {exc}") from None
            if source == "rule":
                ev["rules_hash"] = rules_hash
                ev["tool_version"] = tool_version or __version__
            ev["batch"] = _BATCH
            pending[ev["run"]] = ev["label"]
            bodies.append(ev)
        if not bodies:
            return []
        begin = {"kind": "batch_begin", "source": source, "labeler": labeler or self.labeler, "count": len(bodies)}
        commit = {"kind": "batch_commit", "source": source, "labeler": labeler or self.labeler, "batch": _BATCH,
                  "count": len(bodies)}
        self._write([begin, *bodies, commit])
        return bodies

    def undo(self, run_id: str, *, reason: str = "", labeler: str | None = None) -> dict:
        """Append an undo event that takes back the run's latest label set by a person (hand, import or
        review), or its latest automatic label when no person has labeled it, and restores what was below."""
        reason = check_reason(reason)
        labeler = check_labeler_name(labeler or self.labeler)
        stack = self._replay.stacks.get(run_id) or []
        if not stack:
            raise JournalError(f"run {run_id} has no label to undo")
        people = [i for i, ev in enumerate(stack) if ev.get("source") in HAND_SOURCES]
        k = people[-1] if people else len(stack) - 1
        top = stack[k]
        before = self._replay.final_label(run_id)
        probe = Replay()
        probe.stacks[run_id] = stack[:k] + stack[k + 1:]
        return self._write([{"kind": "undo", "source": "hand", "undone_source": top.get("source"),
                             "labeler": labeler or self.labeler,
                             "run": run_id, "content_hash": top.get("content_hash", ""),
                             # "replaces": the label taken back (the undone event's own)
                             "label": probe.final_label(run_id), "replaces": top.get("label", before),
                             "undoes": top["seq"],
                             "reason": reason or ""}])[0]

    def adjudicate(self, run_id: str, label: str, *, content_hash: str, label_a: str | None,
                   label_b: str | None, reviewer: str | None = None, reason: str = "") -> dict:
        """Record a reviewer's decision between two labelers' labels (source ``review``)."""
        ev = self._label_event(run_id, label, content_hash, reason, "review", reviewer)
        ev["label_a"], ev["label_b"] = label_a, label_b
        ev["reviewer"] = ev["labeler"]
        return self._write([ev])[0]

    def review_decisions(self) -> set[tuple]:
        """``(run, label A, label B)`` of every review decision recorded (:meth:`adjudicate`), undone or not: the
        disagreements a reviewer has already looked at.  Kept as events are read and written, not searched for."""
        return set(self._replay.review_decisions)

    def note(self, run_id: str, text: str, *, labeler: str | None = None) -> dict:
        """Record ``text`` as the run's note (free text beside the labels, which it never changes); an empty
        text clears the note.  Audited like a label: hash-chained and fsynced when this returns."""
        if not isinstance(run_id, str) or not run_id.strip():
            raise JournalError("a run id must be non-empty text")
        text = check_reason(text, "note")
        who = check_labeler_name(labeler or self.labeler)
        return self._write([{"kind": "note", "source": "hand", "labeler": who, "run": run_id, "note": text}])[0]

    def notes(self) -> pd.DataFrame:
        """The current note of every run that has one (index: run; columns run, note, labeler, time)."""
        return self._replay.note_table()

    def run_note(self, run_id: str) -> str:
        """The run's current note ("" when none)."""
        ev = self._replay.notes.get(run_id)
        return ev["note"] if ev is not None else ""

    def review_complete(self, *, reviewer: str | None = None, reason: str = "",
                        summary: Mapping | None = None) -> dict:
        """Record that a review was finished (with an optional summary of plain values)."""
        reviewer = check_labeler_name(reviewer or self.labeler)
        reason = check_reason(reason)
        return self._write([{"kind": "review_complete", "source": "review", "labeler": reviewer or self.labeler,
                             "reviewer": reviewer or self.labeler, "reason": reason or "",
                             "summary": dict(summary or {})}])[0]

    @classmethod
    def break_lock(cls, path: str | Path, *, by: str | None = None, reason: str = "",
                   force: bool = False) -> dict:
        """Break the journal's lock and record that as an event; returns the event.

        A lock whose process on this host is gone is broken by any writer on its own (this is the same,
        with the person's name and reason).  A lock whose process still runs, or which was taken on
        another host, is only broken with ``force=True``.
        """
        path = Path(path)
        reason = check_reason(reason)
        if by is not None:
            by = check_labeler_name(by)
        holder = read_lock(path)
        if holder is None:
            raise JournalError(f"the label journal {path} is not locked")
        if not is_stale(holder):
            if not force:
                raise JournalError(f"the lock of {path} is held by {describe(holder)}, which may still be running "
                                   "(or runs on another host); break it only if you are sure that program is gone "
                                   "(force)")
            try:
                lock_path(path).unlink()
            except FileNotFoundError:
                pass
        j = cls()
        j.path, j.readonly, j.labeler = path, False, by or default_labeler()
        j._forced = reason or "broken on purpose"
        if is_stale(holder):
            j._forced = reason or "its process is no longer running on this host"
        with cls._open_writer(j, broken=holder):
            ev = next((e for e in reversed(j.events) if e.get("kind") == "lock_broken"), None)
            assert ev is not None
            return ev

    @classmethod
    def recover(cls, path: str | Path, *, by: str | None = None, reason: str = "") -> dict | None:
        """Set aside what a damaged journal cannot vouch for, and record it; returns the ``recovered`` event.

        Every line from the first untrusted one on is moved to ``<journal>.set-aside-<UTC time>``
        (nothing is deleted), the journal is cut there, and a ``recovered`` event records the problems,
        the lines and bytes set aside (with their SHA-256), the old head and witness, who and why.  The
        head and witness then record the new end.  None when the journal is intact (nothing to do).
        """
        reason = check_reason(reason)
        by = check_labeler_name(by) if by is not None else None
        j = cls()
        j.path, j.readonly, j.labeler = Path(path), False, by or default_labeler()
        if not j.path.is_file():
            raise JournalError(f"there is no label journal at {j.path}")
        with cls._open_writer(j, broken=None, recover_reason=reason or "recover"):
            return j._recovered

    # --- reading --------------------------------------------------------------------------
    def state(self, current_hashes: Mapping[str, str] | None = None, runs: Iterable[str] | None = None) -> pd.DataFrame:
        """Current labels, one row per labeled run (columns: see ``journal_replay.STATE_COLUMNS``); with ``runs``, only
        those of them that have labels (the window updates the rows of a hand label without replaying every run)."""
        return self._replay.state(current_hashes, runs)

    def history(self, run_id: str) -> pd.DataFrame:
        """Every label, undo and note event of one run, oldest first (a note's text is in ``reason``)."""
        return self._replay.history(run_id)

    def labels(self, which: str = "final") -> pd.DataFrame:
        """One label per run from ``final``, ``auto``, ``hand`` or a named labeler (index: run)."""
        return self._replay.side(which)

    def source_counts(self, names) -> dict[str, int]:
        """How many runs each of ``names`` (``final``, ``auto``, ``hand`` or a labeler, as :meth:`labels` takes them)
        labels: ``len(self.labels(name))`` for each, in one pass."""
        return self._replay.source_counts(names)

    def labelers(self) -> list[str]:
        return self._replay.labelers()

    def auto_event(self, run_id: str) -> dict | None:
        """The run's automatic label event in force after replay (undone events excluded), or None."""
        return self._replay.auto_event(run_id)

    def final_label(self, run_id: str) -> str | None:
        return self._replay.final_label(run_id)

    @property
    def events(self) -> list[dict]:
        """All events read or written, in order (do not modify)."""
        return self._replay.events

    @property
    def last_seq(self) -> int:
        return self._last_seq

    @property
    def last_hash(self) -> str:
        return self._last_hash

    @property
    def lock_holder(self) -> str | None:
        """Who holds the lock now (a sentence), or None if nobody does."""
        holder = read_lock(self.path)
        return None if holder is None else describe(holder)

    # --- closing --------------------------------------------------------------------------
    def close(self) -> None:
        if self._fd is not None:
            os.close(self._fd)
            self._fd = None
        if self._head_lags and not self._crashed:
            self._update_head(self._last_seq, self._last_hash)
        if self._lock is not None:
            if self._crashed or self._head_lags:
                # the files look like a crash's leftovers; the lock stays as a crash would leave it, so the
                # next writer (once this process has ended) accepts them as such
                self._lock = None
                return
            release(self.path, self._lock)
            self._lock = None

    def __enter__(self) -> "LabelJournal":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __del__(self) -> None:  # a forgotten journal still releases its lock
        try:
            self.close()
        except Exception:
            pass

    def __repr__(self) -> str:
        mode = "read-only" if self.readonly else "writing"
        return f"<LabelJournal {self.path} ({mode}), {self._last_seq + 1} events>"

