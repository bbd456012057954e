"""Opening a cached set at once: a quick check of its files' sizes and modification times, the full check after.

The set cache (:mod:`basinmark.core.set_cache`) names each segment by the SHA-256 of its runs' stored files,
so an ordinary reopen hashes every file before it can read a segment (1.4-2.7 s at 10,000 runs).  Beside the
segments we keep a small record of what the files looked like when they were cached: for each file its size,
modification time (ns) and SHA-256.  :func:`quick_open` compares sizes and times only (a ``stat`` per file)
and, when they all match, takes the recorded hashes as the files' and reads the segments they name: the one
holding the set's first run first (its runs reach ``on_run`` at once), then the others.

A file rewritten with the same size and time passes that check, so the window then runs :func:`full_check`
in the background: it hashes every file (as a normal open would) and names each file whose content is not
the content the cache was made from.  The record is (re)written by :func:`full_check` whenever every segment
of the files as they are now exists, so the next open can be quick.

The record is a cache file like the others (safe to delete; a damaged one is ignored).
"""

from __future__ import annotations

import hashlib
import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from basinmark.core.model import Trajectory, TrajectorySet
from basinmark.core.sets import SetPlan, group_key, cache_folder, discover, hash_files, open_plan, segment_groups

RECORD_VERSION = "2"  # 2: the segments' files (1 named one whole-set snapshot)


def record_path(plan: SetPlan) -> Path:
    """Where the quick-check record of this set (and this way of reading it) lives."""
    tag = hashlib.sha256(f"quick {RECORD_VERSION}\n{plan.layout.fingerprint}\n".encode()).hexdigest()[:16]
    return cache_folder(plan.root) / f"quick-{tag}.json"


def _files(plan: SetPlan) -> list[Path]:
    return [p for spec in plan.runs for p in spec.files]


def _named(plan: SetPlan) -> list[tuple[Path, str]]:
    """Every file of the plan with its name: the path below the set folder, else the whole path.

    Cut from the path's text (what ``Path.relative_to`` gives, which cost a quarter of a quick open's time
    before its first run at 2,000 runs, measured)."""
    prefix = str(plan.root).rstrip(os.sep) + os.sep
    cut = len(prefix)
    return [(p, s[cut:] if (s := str(p)).startswith(prefix) else s) for p in _files(plan)]


def _name(plan: SetPlan, path: Path) -> str:
    prefix = str(plan.root).rstrip(os.sep) + os.sep
    s = str(path)
    return s[len(prefix):] if s.startswith(prefix) else s


def file_stats(plan: SetPlan, named: list[tuple[Path, str]] | None = None) -> dict[str, tuple[int, int]] | None:
    """(size, modification time in ns) of every file of the plan, by name; None when one cannot be read."""
    out = {}
    try:
        for p, name in (_named(plan) if named is None else named):
            st = os.stat(p)
            out[name] = (st.st_size, st.st_mtime_ns)
    except OSError:
        return None
    return out


def read_record(plan: SetPlan) -> dict | None:
    try:
        rec = json.loads(record_path(plan).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(rec, dict) or rec.get("version") != RECORD_VERSION or not isinstance(rec.get("files"), dict) \
            or not isinstance(rec.get("key"), str):
        return None
    if not all(isinstance(v, list) and len(v) == 3 and isinstance(v[0], int) and isinstance(v[1], int)
               and isinstance(v[2], str) for v in rec["files"].values()):
        return None
    return rec


def write_record(plan: SetPlan, key: str, stats: dict[str, tuple[int, int]], hashes: dict[Path, str]) -> bool:
    """Record the files (size, time, SHA-256) the segments (named together ``key``) were made from; False when
    not written."""
    files = {}
    for p in _files(plan):
        name = _name(plan, p)
        if name not in stats or p not in hashes:
            return False
        files[name] = [stats[name][0], stats[name][1], hashes[p]]
    path = record_path(plan)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_suffix(".tmp")
        tmp.write_text(json.dumps({"version": RECORD_VERSION, "key": key, "files": files}), encoding="utf-8")
        os.replace(tmp, path)
    except OSError:
        return False  # no record is no failure: the next open hashes every file first
    return True


def set_key(plan: SetPlan, hashes: dict[Path, str]) -> str:
    """One name for the cached segments of the files with these stored-bytes hashes (in the set's order)."""
    h = hashlib.sha256(f"segments {RECORD_VERSION}\n".encode())
    for group in segment_groups(plan):
        h.update(group_key(plan, group, hashes).encode() + b"\n")
    return h.hexdigest()


def _all_cached(plan: SetPlan, hashes: dict[Path, str]) -> bool:
    """Whether every segment of the files with these hashes is in the cache (a folder each: one ``stat``)."""
    folder = cache_folder(plan.root)
    return all((folder / f"seg-{group_key(plan, g, hashes)}").is_dir() for g in segment_groups(plan))


@dataclass
class QuickOpen:
    """A set opened from its cache after the quick check, and what the full check compares against."""

    tset: TrajectorySet
    plan: SetPlan
    key: str
    record: dict


def quick_open(path: str | Path, *, on_run: Callable[[Trajectory], None] | None = None,
               progress=None, cancel: Callable[[], bool] | None = None) -> QuickOpen | None:
    """The set from its cache when every file has the size and time recorded with it, else None.

    None also when there is no record or a segment named by it is missing (the caller then opens the set the
    usual way).  The segment holding the set's first run is read first and its runs reach ``on_run`` at once;
    ``progress`` and ``cancel`` as for :func:`basinmark.core.sets.open_set`.  A segment found damaged while
    it is read is removed and its runs are read from their files (said in the set's warnings)."""
    plan = discover(path)
    if not plan.runs:
        return None
    rec = read_record(plan)
    if rec is None:
        return None
    named = _named(plan)
    stats = file_stats(plan, named)
    files = rec["files"]
    if stats is None or len(stats) != len(files):
        return None
    for name, (size, mtime) in stats.items():
        got = files.get(name)
        if got is None or got[0] != size or got[1] != mtime:
            return None
    hashes = {p: files[name][2] for p, name in named}
    if not _all_cached(plan, hashes):
        return None
    tset = open_plan(plan, known_hashes=hashes, on_run=on_run, progress=progress, cancel=cancel)
    tset.metadata["opened_by_quick_check"] = True
    return QuickOpen(tset, plan, rec["key"], rec)


@dataclass
class FullCheck:
    """What the full check found: files whose content differs from the cache shown (empty when none)."""

    changed: list[str] = field(default_factory=list)
    checked: int = 0
    recorded: bool = False

    def describe(self) -> str:
        """A plain sentence for the window ("" when nothing changed)."""
        if not self.changed:
            return ""
        n = len(self.changed)
        names = ", ".join(self.changed[:3]) + (" …" if n > 3 else "")
        return (f"{n} file{'s' if n != 1 else ''} of this set changed since it was cached although size and time "
                f"did not ({names}): what was shown came from the cache, so the set is read again from its files.")


def full_check(path_or_plan: str | Path | SetPlan, shown: QuickOpen | None = None,
               cancel: Callable[[], bool] | None = None) -> FullCheck:
    """Hash every file; name those whose content is not the one ``shown`` was made from; record the files.

    ``shown``: the quick open to check (None after an ordinary open: nothing to compare, only the record is
    written so that the next open can be quick).  The record is written only when every segment of the files
    as they are now exists and no file moved while it was hashed."""
    plan = shown.plan if shown is not None else (
        path_or_plan if isinstance(path_or_plan, SetPlan) else discover(path_or_plan))
    out = FullCheck(checked=len(_files(plan)))
    before = file_stats(plan)
    if before is None or (cancel is not None and cancel()):
        return out
    hashes = hash_files(plan)
    if shown is not None:
        recorded = shown.record["files"]
        out.changed = sorted(name for p in _files(plan)
                             if (name := _name(plan, p)) in recorded and recorded[name][2] != hashes.get(p))
    if out.changed:
        record_path(plan).unlink(missing_ok=True)  # it vouches for content that is gone: the next open hashes
        return out
    after = file_stats(plan)
    if after != before:
        return out
    if _all_cached(plan, hashes):
        out.recorded = write_record(plan, set_key(plan, hashes), before, hashes)
    return out
