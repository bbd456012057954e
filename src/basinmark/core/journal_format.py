"""The on-disk form of label journal events: canonical JSON, event hashes, times, the head file.

One event per line.  An event's ``hash`` is the SHA-256 (FIPS 180-4) of its canonical
serialisation with the ``hash`` field left out: keys sorted, no whitespace, ASCII only
(``json.dumps(..., sort_keys=True, separators=(",", ":"), ensure_ascii=True)``).  The line
written to the file is the canonical serialisation of the whole event (``hash`` included),
so any change of a byte in a line is visible either as a different hash or as a line that is
not in canonical form.  Each event carries the previous event's hash in ``prev``.
"""

from __future__ import annotations

import hashlib
import json
import os
from datetime import datetime, timezone
from pathlib import Path

from basinmark.core.errors import BasinmarkError

SCHEMA_VERSION = 1
#: no newline translation on Windows (0 elsewhere)
BINARY = getattr(os, "O_BINARY", 0)
HEADER_KIND = "header"
#: a batch (automatic labels, an import) is written as batch_begin, its label events (each naming the
#: begin's seq in ``batch``) and batch_commit; only a committed batch counts.  batch_abandoned sets an
#: unfinished one aside; recovered records what ``basinmark recover`` set aside and why.
BATCH_KINDS = ("batch_begin", "batch_commit", "batch_abandoned")
#: ``note``: free text per run, kept beside the labels and never changing one (the latest note of a run is its note;
#: an empty note clears it)
KINDS = ("header", "label", "undo", "lock_broken", "review_complete", *BATCH_KINDS, "recovered", "note")


class JournalError(BasinmarkError):
    """The label journal cannot be opened, read or written as asked."""


# one encoder and decoder built once: json.dumps/json.loads rebuild them on every call when given
# options, which doubled the time to verify 100,000 events (bench/bench_journal.py)
_ENCODER = json.JSONEncoder(sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=False)
_DECODER = json.JSONDecoder()


def canonical(obj: dict) -> str:
    """The canonical serialisation: sorted keys, no whitespace, ASCII only."""
    return _ENCODER.encode(obj)


def parse_line(raw: bytes) -> dict | None:
    """The event on one line (a JSON object and nothing else), or None if the line is not one."""
    try:
        text = raw.decode("utf-8")
        obj, end = _DECODER.raw_decode(text)
    except (UnicodeDecodeError, ValueError):
        return None
    return obj if end == len(text) and isinstance(obj, dict) else None


def line_hash(raw: bytes, stored: object) -> str | None:
    """SHA-256 of a line's bytes with its top-level ``"hash":"..."`` member cut out, or None.

    For a line written by :func:`seal` this equals :func:`event_hash` of its event, without
    serialising the event again (the slow part of verifying).  When the result equals the
    stored hash, the rest of the line is byte for byte what was hashed when it was written.
    None when the shortcut does not apply (odd hash value, or a nested object before it);
    then compare :func:`canonical` and :func:`event_hash` instead.
    """
    if not isinstance(stored, str) or len(stored) != 64:
        return None
    item = b'"hash":"' + stored.encode("ascii", "replace") + b'"'
    idx = raw.find(item)
    if idx <= 0 or raw.find(b"{", 1, idx) != -1:
        return None
    end = idx + len(item)
    if raw[idx - 1:idx] == b",":
        body = raw[:idx - 1] + raw[end:]
    elif raw[end:end + 1] == b",":
        body = raw[:idx] + raw[end + 1:]
    else:
        body = raw[:idx] + raw[end:]
    return hashlib.sha256(body).hexdigest()


def event_hash(event: dict) -> str:
    """SHA-256 hex digest of the canonical serialisation of ``event`` without its ``hash`` field."""
    body = {k: v for k, v in event.items() if k != "hash"}
    return hashlib.sha256(canonical(body).encode("ascii")).hexdigest()


def seal(event: dict) -> str:
    """Set ``event['hash']`` and return the line to write (canonical, with a trailing newline)."""
    event.pop("hash", None)
    event["hash"] = event_hash(event)
    return canonical(event) + "\n"


def utc_now() -> str:
    """The current UTC time in RFC 3339 form with milliseconds and ``Z``."""
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%f")[:-3] + "Z"


def utc_stamp() -> str:
    """A compact UTC time usable in a file name (``20260102T030405.123456Z``)."""
    return datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%S.%fZ")


# --- the head file: the last event's seq and hash, kept beside the journal ----------------------
# A hash chain on its own cannot show that events were cut from its end; the head file
# records the last event written so that verify can.  It is replaced atomically after each
# write.  A crash between the journal's fsync and the head update leaves the head one write
# behind, which verify accepts (and the next writer brings up to date).

def head_path(journal: str | Path) -> Path:
    return Path(str(journal) + ".head")


def write_head(journal: str | Path, seq: int, digest: str) -> None:
    path = head_path(journal)
    tmp = Path(f"{path}.tmp-{os.getpid()}")
    data = canonical({"seq": seq, "hash": digest}) + "\n"
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC | BINARY, 0o644)
    try:
        try:
            view = memoryview(data.encode("ascii"))
            while view:
                view = view[os.write(fd, view):]
            os.fsync(fd)
        finally:
            os.close(fd)
        os.replace(tmp, path)
    except OSError:
        tmp.unlink(missing_ok=True)  # a half-written temporary head is no use to anyone (e.g. a full disk)
        raise


def read_head(journal: str | Path) -> tuple[int, str] | None:
    """The (seq, hash) in the head file, or None when it is missing or unreadable."""
    return read_head_state(journal)[0]


def read_head_state(journal: str | Path) -> tuple[tuple[int, str] | None, str]:
    """((seq, hash) or None, and ``ok``, ``missing`` or ``unreadable``)."""
    try:
        text = head_path(journal).read_text(encoding="ascii")
    except FileNotFoundError:
        return None, "missing"
    except (OSError, UnicodeDecodeError):
        return None, "unreadable"
    try:
        obj = json.loads(text)
        seq, digest = obj["seq"], obj["hash"]
    except (ValueError, KeyError, TypeError):
        return None, "unreadable"
    if not isinstance(seq, int) or isinstance(seq, bool) or not isinstance(digest, str):
        return None, "unreadable"
    return (seq, digest), "ok"


def split_lines(data: bytes) -> tuple[list[bytes], bytes]:
    """Complete lines (without their newline) and the torn tail after the last newline (maybe b"")."""
    cut = data.rfind(b"\n") + 1
    body, tail = data[:cut], data[cut:]
    lines = body.split(b"\n")[:-1] if body else []
    return lines, tail
