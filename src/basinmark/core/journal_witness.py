"""A witness of each journal's head kept outside the set's folder, and receipts to paste elsewhere.

The head file sits beside the journal, so whoever can set the journal back to an older copy can
set the head back with it.  Each writer therefore also records the head (event number, hash,
time) in the user's state folder: ``$BASINMARK_STATE_DIR`` if set, else
``$XDG_STATE_HOME/basinmark``, else ``~/.local/state/basinmark``; one small JSON file per journal,
named after the journal's identity (its header's hash) and where it lies.  Readers and
``verify`` compare the journal with it: a witness that names an event the journal no longer
holds, or one with another hash, shows the journal was cut or set back.  A witness behind the
journal is normal (another account, or another computer, wrote since; or a crash between the
head and the witness).

A receipt is the same record as one line of text (``basinmark receipt SET``) to paste into a lab
notebook; ``basinmark verify SET --expect RECEIPT`` checks the journal against it.

Not caught: a copy moved to another folder has no witness there; a journal rewritten on another
account or computer is only compared with that account's witness; someone who can write the
state folder as well as the set can set both back (a receipt on paper cannot be set back).
"""

from __future__ import annotations

import hashlib
import json
import os
import re
from pathlib import Path

from basinmark.core.journal_format import BINARY, JournalError, canonical, parse_line, utc_now

ENV = "BASINMARK_STATE_DIR"
RECEIPT_PREFIX = "basinmark-receipt"


def state_dir() -> Path:
    """The folder that holds the witnesses (see the module text)."""
    if os.environ.get(ENV):
        return Path(os.environ[ENV]).expanduser()
    base = os.environ.get("XDG_STATE_HOME") or str(Path.home() / ".local" / "state")
    return Path(base).expanduser() / "basinmark"


def journal_id(lines: list[bytes]) -> str | None:
    """The journal's identity: its header event's hash (None when the first line is not one)."""
    if not lines:
        return None
    ev = parse_line(lines[0])
    digest = ev.get("hash") if ev else None
    return digest if isinstance(digest, str) and re.fullmatch(r"[0-9a-f]{64}", digest) else None


def witness_path(journal: str | Path, jid: str) -> Path:
    where = os.path.realpath(os.path.abspath(journal))
    key = hashlib.sha256(f"{jid}\n{where}".encode("utf-8", "surrogateescape")).hexdigest()[:32]
    return state_dir() / "witness" / f"{key}.json"


def read(journal: str | Path, jid: str) -> dict | None:
    """The witness of this journal at this place, or None (none yet, or unreadable)."""
    path = witness_path(journal, jid)
    try:
        obj = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(obj, dict) or not isinstance(obj.get("seq"), int) or not isinstance(obj.get("hash"), str):
        return None
    obj["where"] = f"the witness {path}"
    return obj


def read_for(journal: str | Path, lines: list[bytes]) -> dict | None:
    jid = journal_id(lines)
    return None if jid is None else read(journal, jid)


def write(journal: str | Path, jid: str, seq: int, digest: str) -> None:
    """Record the head in the witness (atomic replace).  Raises OSError when the state folder is unusable."""
    path = witness_path(journal, jid)
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(f"{path}.tmp-{os.getpid()}")
    data = canonical({"journal": os.path.realpath(os.path.abspath(journal)), "id": jid, "seq": seq,
                      "hash": digest, "time": utc_now()}) + "\n"
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC | BINARY, 0o644)
    try:
        try:
            view = memoryview(data.encode("utf-8"))
            while view:  # a short write (a disk filling up) must not leave a cut witness
                view = view[os.write(fd, view):]
        finally:
            os.close(fd)
        os.replace(tmp, path)
    except OSError:
        tmp.unlink(missing_ok=True)
        raise


# --- receipts ------------------------------------------------------------------------------------
def receipt(jid: str, seq: int, digest: str, when: str | None = None) -> str:
    """One line: prefix, journal id (16 hex), number of events, last event's hash, UTC time."""
    return f"{RECEIPT_PREFIX} id={jid[:16]} events={seq + 1} hash={digest} time={when or utc_now()}"


_RECEIPT = re.compile(rf"^\s*{RECEIPT_PREFIX} id=([0-9a-f]{{16}}) events=(\d+) hash=([0-9a-f]{{64}}) "
                      r"time=(\S+)\s*$")


def parse_receipt(text: str) -> dict:
    """The receipt's fields as a witness record (``seq``, ``hash``, ``time``, ``id``); JournalError if malformed."""
    m = _RECEIPT.match(text)
    if not m:
        raise JournalError(f"not a basinmark receipt: {text.strip()[:120]!r} (expected a line like "
                           f"'{RECEIPT_PREFIX} id=<16 hex> events=<n> hash=<64 hex> time=<UTC time>', as printed by "
                           "'basinmark receipt SET')")
    events = int(m.group(2))
    if events < 1:
        raise JournalError("a receipt names at least one event (the header)")
    return {"id": m.group(1), "seq": events - 1, "hash": m.group(3), "time": m.group(4),
            "where": f"the receipt of {m.group(4)}"}
