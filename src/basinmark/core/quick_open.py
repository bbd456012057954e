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

The record also stands in for finding the runs (pairing 20,000 file names took 0.3 s of the 0.5 s before
the first run at 10,000 runs): it keeps the plan (which files make which run, what was left out and why) and
a digest of the names it was made from (:func:`basinmark.core.pairing.listing_digest`: the folders listed
again, names only, a tenth of the time).  When the digest matches, the recorded plan is the plan; a file added,
removed or renamed changes it, and the runs are then found again and the files compared as before (a set that
changed is opened the usual way, reading what is new).  Other files (the label journal, its lock) do not count.

The record is a cache file like the others (safe to delete; a damaged one is ignored).
"""

from __future__ import annotations

import hashlib
import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

from basinmark.core.manifest import load_layout
from basinmark.core.model import LoadFailure, Trajectory, TrajectorySet
from basinmark.core.pairing import RunSpec, listing_digest
from basinmark.core.sets import (SetPlan, cache_folder, discover, group_key, hash_files, open_plan, segment_groups,
                                 use_processes)

RECORD_VERSION = "3"  # 3: with the plan and its names' digest; 2: the segments' files (1: one whole-set snapshot)


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


def _plan_entry(plan: SetPlan) -> dict | None:
    """The plan as the record keeps it (file names as in ``files``); None when it does not know its listing."""
    if not plan.listing:
        return None

    def name(p: Path | None) -> str | None:
        return None if p is None else _name(plan, p)

    return {"runs": [[s.run_id, name(s.backward), name(s.forward), name(s.joined)] for s in plan.runs],
            "left_out": [[name(f.path), f.reason, f.line] for f in plan.left_out],
            "notes": list(plan.notes),
            "conventions": {kind: [s.run_id for s in specs] for kind, specs in plan.conventions.items()},
            "plain": bool(plan.plain), "listing": plan.listing}


def _recorded_plan(head: SetPlan, rec: dict) -> SetPlan | None:
    """The recorded plan when the set's folders list the same names as when it was made, else None."""
    entry = rec.get("plan")
    if not isinstance(entry, dict):
        return None
    try:
        listing = listing_digest(head.root, head.layout)
        if listing != entry["listing"]:
            return None  # a file was added, removed or renamed: the runs are found again
        base = head.root.resolve()  # names below the set folder: the listing's paths are resolved ones
        parents: dict[str, Path] = {}

        def path(name: str | None) -> Path | None:
            if name is None:
                return None
            folder, _, leaf = name.rpartition(os.sep)
            parent = parents.get(folder)
            if parent is None:
                parent = parents[folder] = (Path(folder) if os.path.isabs(folder) else base / folder) if folder \
                    else base
            # one part joined without parsing it again, as the listing does (20,000 paths are felt)
            return parent._make_child_relpath(leaf) if hasattr(parent, "_make_child_relpath") else parent / leaf

        runs = [RunSpec(rid, path(b), path(f), path(j)) for rid, b, f, j in entry["runs"]]
        by_id = {s.run_id: s for s in runs}
        conventions = {kind: [by_id[r] for r in ids] for kind, ids in entry["conventions"].items()}
        left = [LoadFailure(path(p), reason, line) for p, reason, line in entry["left_out"]]
        return SetPlan(head.root, head.layout, runs, [], left, [str(n) for n in entry["notes"]], conventions,
                       plain=bool(entry["plain"]), listing=listing)
    except (OSError, KeyError, TypeError, ValueError, AttributeError):
        return None  # a folder gone, or a record not as written: the runs are found again


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
        record = {"version": RECORD_VERSION, "key": key, "files": files, "plan": _plan_entry(plan)}
        tmp.write_text(json.dumps(record), encoding="utf-8")
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


def folder_change(recorded: dict, plan: SetPlan) -> str:
    """A sentence naming the runs added and removed since the record's plan was made ("" when none)."""
    try:
        before = [r[0] for r in recorded["plan"]["runs"]]
    except (KeyError, TypeError, IndexError):
        return ""
    now = [s.run_id for s in plan.runs]
    had, has = set(before), set(now)
    added = [r for r in now if r not in had]
    removed = [r for r in before if r not in has]

    def some(ids: list[str], verb: str) -> str:
        n = len(ids)
        return f"{n} run{'s' if n != 1 else ''} {verb} ({', '.join(ids[:3])}{', …' if n > 3 else ''})"

    parts = ([some(added, "added")] if added else []) + ([some(removed, "removed")] if removed else [])
    if not parts:
        return ""
    return (f"The set's folder changed since it was last opened: {' and '.join(parts)}; the runs were found again "
            "and what is new was read from its files.")


def quick_open(path: str | Path, *, on_run: Callable[[Trajectory], None] | None = None,
               progress=None, cancel: Callable[[], bool] | None = None,
               changes: list[str] | None = None) -> QuickOpen | None:
    """The set from its cache when every file has the size and time recorded with it, else None.

    None also when there is no record or a segment named by it is missing (the caller then opens the set the
    usual way).  The segment holding the set's first run is read first and its runs reach ``on_run`` at once;
    ``progress`` and ``cancel`` as for :func:`basinmark.core.sets.open_set`.  A segment found damaged while
    it is read is removed and its runs are read from their files (said in the set's warnings).

    The record's plan stands in for finding the runs when the set's folders list the same run files as when it
    was made; otherwise the runs are found again, and ``changes`` (a list, if given) gets a sentence naming the
    runs added and removed since (the quick open then usually gives None: a file's size or time differs)."""
    root = Path(path).expanduser()
    if not root.is_dir():
        discover(root)  # says what is wrong with the folder
    head = SetPlan(root, load_layout(root), [])
    rec = read_record(head)
    if rec is None:
        return None
    plan = _recorded_plan(head, rec)
    if plan is None:
        plan = discover(root)
        if changes is not None and (said := folder_change(rec, plan)):
            changes.append(said)
    if not plan.runs:
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
    hashes = hash_files(plan, processes=use_processes(plan))   # not in threads: the window is in use
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
