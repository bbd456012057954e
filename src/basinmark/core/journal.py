"""The audited label journal: the only code that writes label files.

One append-only JSON Lines file per set (by default ``<set>/basinmark-labels.jsonl``).
The first line is a header event, then one event per change.  Every event carries its
sequence number, UTC time (RFC 3339), labeler, source, run id, the run's content hash,
the new label, the label it replaces, a reason, the previous event's hash and its own
hash (see :mod:`basinmark.core.journal_format`).  Current labels are a replay of the
events; nothing is ever edited in place, an undo is a new event.

Durability: every write is one ``os.write`` of whole lines on a descriptor opened with
``O_APPEND``, followed by ``fsync`` before the call returns.  A torn last line (a crash
mid-write) is found on open, copied to ``<journal>.torn-<UTC time>`` and cut from the
journal (the only change ever made to existing bytes, and only to bytes after the last
complete line), with a warning in :attr:`LabelJournal.warnings`.

Only one process writes a journal at a time (``<journal>.lock``, see
:mod:`basinmark.core.journal_lock`); read-only opens never take the lock.

What the hash chain can and cannot show: any edit, deletion, duplication, reordering or
insertion of lines is found by :func:`verify_journal`; cutting events off the end is found
through the head file ``<journal>.head``.  Someone who rewrites the whole file and the head
with freshly computed hashes cannot be caught from the files alone: note the head hash that
``basinmark verify`` prints somewhere else (a lab notebook) to pin the journal's state.
"""

from __future__ import annotations

import getpass
import glob
import os
import socket
import threading
from pathlib import Path
from typing import Iterable, Mapping, Sequence

import pandas as pd

from basinmark import __version__
from basinmark.core.journal_format import (BINARY, HEADER_KIND, SCHEMA_VERSION, JournalError, event_hash, line_hash,
                                           parse_line, read_head,
                                           seal, split_lines, utc_now, utc_stamp, write_head)
from basinmark.core.journal_lock import (JournalLockedError, acquire, describe, is_stale, lock_path, read_lock,
                                         release)
from basinmark.core.journal_replay import Replay
from basinmark.core.journal_verify import Problem, verify_journal
from basinmark.core.labels import HAND_SOURCES, SOURCES, LabelError, validate_label

__all__ = ["LabelJournal", "JournalError", "JournalLockedError", "verify_journal", "Problem", "default_labeler"]


def _safe_event_hash(event: dict) -> str:
    try:
        return event_hash(event)
    except (TypeError, ValueError):
        return ""


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

    # --- opening --------------------------------------------------------------------------
    @classmethod
    def open(cls, path: str | Path, *, set_id: str = "", labeler: str | None = None, readonly: bool = False,
             allowed: Sequence[str] | None = None) -> "LabelJournal":
        """Open (and for writing, create if missing) the journal at ``path``.

        Writing takes the lock (:class:`JournalLockedError` if another process holds it).
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
            j._load(j.path.read_bytes(), writer=False)
            return j
        if not j.path.parent.is_dir():
            raise JournalError(f"cannot create the label journal {j.path}: the folder does not exist")
        j._lock = acquire(j.path, j.labeler)
        try:
            j._open_for_writing()
        except BaseException:
            release(j.path, j._lock)
            j._lock = None
            raise
        return j

    def _open_for_writing(self) -> None:
        created = not self.path.exists()
        self._fd = os.open(self.path, os.O_WRONLY | os.O_APPEND | os.O_CREAT | BINARY, 0o644)
        if created:
            _fsync_dir(self.path.parent)
        for stale in self.path.parent.glob(glob.escape(self.path.name) + ".head.tmp-*"):
            stale.unlink(missing_ok=True)  # left by a writer that died while updating the head; we hold the lock
        data = self.path.read_bytes()
        _, tail = split_lines(data)
        if tail:
            self._set_aside(tail, len(data) - len(tail))
        self._load(data[: len(data) - len(tail)], writer=True)
        if self.header is None:
            self._write([{"kind": HEADER_KIND, "schema": SCHEMA_VERSION, "set_id": self.set_id,
                          "created_by": self.labeler, "created_at": utc_now(), "host": socket.gethostname(),
                          "tool_version": __version__}])
        else:
            head = read_head(self.path)
            if head is not None and (head[0] > self._last_seq or (head[0] == self._last_seq
                                                                  and head[1] != self._last_hash)):
                raise JournalError(f"{self.path} ends at event {self._last_seq} but its head file records event "
                                   f"{head[0]} with another hash: events were removed or changed at the end; "
                                   "labels cannot be added until this is resolved (run 'basinmark verify')")
            if head is None or head[0] < self._last_seq:
                behind = "missing" if head is None else f"behind by {self._last_seq - head[0]} event(s)"
                self.warnings.append(f"the head file of {self.path} was {behind} (a writer stopped before "
                                     "updating it); it now records the last event")
                write_head(self.path, self._last_seq, self._last_hash)

    def _set_aside(self, tail: bytes, keep: int) -> None:
        side = Path(f"{self.path}.torn-{utc_stamp()}")
        fd = os.open(side, os.O_WRONLY | os.O_CREAT | os.O_EXCL | BINARY, 0o644)
        try:
            os.write(fd, tail)
            os.fsync(fd)
        finally:
            os.close(fd)
        _fsync_dir(self.path.parent)
        os.truncate(self.path, keep)
        assert self._fd is not None
        os.fsync(self._fd)
        self.warnings.append(f"the last line of {self.path} was incomplete ({len(tail)} bytes, probably a crash "
                             f"while writing); it was moved to {side.name} and left out")

    def _load(self, data: bytes, *, writer: bool) -> None:
        lines, tail = split_lines(data)
        if tail:
            self.warnings.append(f"the last line of {self.path} is incomplete ({len(tail)} bytes, probably a "
                                 "crash while writing); it is left out (opening for writing sets it aside)")
        prev = ""
        apply = self._replay.apply
        for i, raw in enumerate(lines):
            ev = parse_line(raw)
            if ev is None:
                msg = f"{self.path}, line {i + 1} is not a valid journal event"
                if writer:
                    raise JournalError(f"{msg}; labels cannot be added until the journal is repaired "
                                       "(run 'basinmark verify' for details)")
                self.warnings.append(msg + "; skipped")
                continue
            stored = ev.get("hash")
            if line_hash(raw, stored) != stored and _safe_event_hash(ev) != stored:
                msg = (f"{self.path}, line {i + 1}: the event's hash does not match its content (it was changed "
                       "after it was written)")
                if writer:
                    raise JournalError(f"{msg}; labels cannot be added to it: run 'basinmark verify' for details, "
                                       "then restore the journal from a copy, or move it aside (keep it as evidence) "
                                       "and start a new one")
                self.warnings.append(msg + "; run 'basinmark verify' for details")
            if writer and (ev.get("seq") != self._last_seq + 1 or ev.get("prev", "") != prev):
                raise JournalError(f"{self.path}, line {i + 1}: the chain of events is broken (sequence or previous hash does "
                                   "not follow); labels cannot be added until the journal is repaired "
                                   "(run 'basinmark verify' for details)")
            if i == 0:
                where = f"{self.path}, line 1"
                if ev.get("kind") != HEADER_KIND:
                    if writer:
                        raise JournalError(f"{where}: the journal does not start with a header")
                    self.warnings.append(f"{where}: the journal does not start with a header")
                else:
                    self.header = ev
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
            prev = ev.get("hash", "")
            seq = ev.get("seq")
            self._last_seq = seq if isinstance(seq, int) else self._last_seq + 1
            self._last_hash = prev
        self._size = len(data) - len(tail)

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
            # nothing of this call counts as saved; a partial line is set aside by the next open
            os.close(self._fd)
            self._fd = None
            raise JournalError(f"the label(s) could not be saved to {self.path} ({exc.strerror or exc}); "
                               "nothing of this change was recorded; reopen the journal to go on") from None
        self._size += len(data)
        self._last_seq, self._last_hash = seq, prev
        try:
            write_head(self.path, seq, prev)
        except OSError as exc:  # the events are saved; only the end marker lags (verify will say so)
            self.warnings.append(f"the head file of {self.path} could not be updated ({exc.strerror or exc})")
        for ev in bodies:
            self._replay.apply(ev)
        return bodies

    def _label_event(self, run_id: str, label: str, content_hash: str, reason: str, source: str,
                     labeler: str | None, pending: dict[str, str | None] | None = None) -> dict:
        if source not in SOURCES:
            raise JournalError(f"unknown label source {source!r}; one of {', '.join(SOURCES)}")
        if not isinstance(run_id, str) or not run_id.strip():
            raise JournalError("a run id must be non-empty text")
        if not isinstance(content_hash, str):
            raise JournalError(f"run {run_id}: the content hash must be text")
        reason = "" if reason is None else str(reason)
        label = validate_label(label, self.allowed, reason=reason)
        replaces = (pending[run_id] if pending is not None and run_id in pending
                    else self._replay.track_label(run_id, source))
        return {"kind": "label", "source": source, "labeler": labeler or self.labeler, "run": run_id,
                "content_hash": content_hash, "label": label, "replaces": replaces, "reason": reason}

    def record(self, run_id: str, label: str, *, content_hash: str, reason: str = "", source: str = "hand",
               labeler: str | None = None) -> dict:
        """Append one label event; it is on disk (fsynced) when this returns.  Returns the event."""
        return self._write([self._label_event(run_id, label, content_hash, reason, source, labeler)])[0]

    def record_batch(self, entries: Iterable[Mapping], *, source: str = "rule", rules_hash: str | None = None,
                     tool_version: str | None = None, labeler: str | None = None) -> list[dict]:
        """Append many label events in one write and one fsync (e.g. a whole set's automatic labels).

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
            pending[ev["run"]] = ev["label"]
            bodies.append(ev)
        return self._write(bodies) if bodies else []

    def undo(self, run_id: str, *, reason: str = "", labeler: str | None = None) -> dict:
        """Append an undo event that takes back the run's latest label set by a person (hand, import or
        review), or its latest automatic label when no person has labelled it, and restores what was below."""
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
        ev["reviewer"] = reviewer or self.labeler
        return self._write([ev])[0]

    def review_complete(self, *, reviewer: str | None = None, reason: str = "",
                        summary: Mapping | None = None) -> dict:
        """Record that a review was finished (with an optional summary of plain values)."""
        return self._write([{"kind": "review_complete", "source": "review", "labeler": reviewer or self.labeler,
                             "reviewer": reviewer or self.labeler, "reason": reason or "",
                             "summary": dict(summary or {})}])[0]

    @classmethod
    def break_lock(cls, path: str | Path, *, by: str | None = None, reason: str = "",
                   force: bool = False) -> dict:
        """Remove a stale lock (its process is gone) and record that as an event; returns the event.

        A lock whose process still runs, or which was taken on another host, is only broken with
        ``force=True``.
        """
        path = Path(path)
        holder = read_lock(path)
        if holder is None:
            raise JournalError(f"the label journal {path} is not locked")
        if not force and not is_stale(holder):
            raise JournalError(f"the lock of {path} is held by {describe(holder)}, which may still be running "
                               "(or runs on another host); break it only if you are sure that program is gone "
                               "(force)")
        try:
            lock_path(path).unlink()
        except FileNotFoundError:
            pass
        with cls.open(path, labeler=by) as j:
            old = {k: v for k, v in holder.items() if k != "token"}
            return j._write([{"kind": "lock_broken", "source": "hand", "labeler": j.labeler,
                              "old_lock": old, "stale": is_stale(holder), "reason": reason or ""}])[0]

    # --- reading --------------------------------------------------------------------------
    def state(self, current_hashes: Mapping[str, str] | None = None) -> pd.DataFrame:
        """Current labels, one row per labeled run (columns: see ``journal_replay.STATE_COLUMNS``)."""
        return self._replay.state(current_hashes)

    def history(self, run_id: str) -> pd.DataFrame:
        """Every label and undo event of one run, oldest first."""
        return self._replay.history(run_id)

    def labels(self, which: str = "final") -> pd.DataFrame:
        """One label per run from ``final``, ``auto``, ``hand`` or a named labeler (index: run)."""
        return self._replay.side(which)

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
        if self._lock is not None:
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

