"""A whole set's parsed arrays in one cache entry, so that reopening an unchanged set is near disk speed.

Measured on the bundled set (200 runs): per-run ``.npz`` entries cost ~0.5 ms each to open (zip and
header parsing dominate), a quarter of a second for the set; one entry of a few ``.npy`` arrays plus a
JSON index opens in a few milliseconds.  The entry is named by a hash of every source file's SHA-256,
the layout and the cache version, so any changed, added or removed file makes a new entry; the stored
bytes are hashed on every open (cheap: the key), while each run's content hash (of the decompressed
content and of how it was read, which binds the labels) is computed once when a run is parsed and kept here.  Positions are memory-mapped
read-only: stored once, shared by all runs as views, and paged in only when a run is looked at.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import tempfile
from pathlib import Path

import numpy as np

from basinmark.core.model import LoadFailure, SourceFile, Trajectory

SNAPSHOT_VERSION = "2"  # 2: content hashes of decompressed data and a reading digest per run
_ENERGY_KEYS = ("potential", "kinetic", "total")


def snapshot_key(fingerprint: str, plan_runs, hashes: dict[Path, str], failures) -> str:
    h = hashlib.sha256(f"snapshot {SNAPSHOT_VERSION}\n{fingerprint}\n".encode())
    for spec in plan_runs:
        for role in ("backward", "forward", "joined"):
            path = getattr(spec, role)
            if path is not None:
                h.update(f"{spec.run_id}\t{role}\t{path.name}\t{hashes.get(path, '')}\n".encode())
    for f in failures:
        h.update(f"failure\t{f.reason}\n".encode())
    return h.hexdigest()


def _rerooted(path: str, old_root: str, root: Path) -> Path:
    p = Path(path)
    return root / p if not p.is_absolute() else Path(path.replace(old_root, str(root), 1))


#: what a damaged entry can raise while it is read (anything else is a bug of ours and should show)
_DAMAGE = (OSError, ValueError, KeyError, TypeError, IndexError, AttributeError, EOFError)


class _Damaged(ValueError):
    """The entry's index does not describe its arrays."""


def load_snapshot(folder: Path, key: str, root: Path | None = None,
                  notes: list[str] | None = None) -> tuple[dict[str, Trajectory], list[LoadFailure]] | None:
    """The entry ``key``, with file paths re-rooted at ``root`` (a set may have been moved or copied since).

    None when there is no such entry.  A damaged entry (unreadable index, arrays that do not match it)
    is removed so that it is rebuilt, and ``notes`` (if given) gets a sentence saying so; it never makes
    opening the set fail.
    """
    entry = folder / f"set-{key}"
    if not entry.is_dir():
        return None
    try:
        return _read_snapshot(entry, root)
    except _DAMAGE as exc:
        shutil.rmtree(entry, ignore_errors=True)
        if notes is not None:
            why = (f"{exc.args[0]!r} is missing" if isinstance(exc, KeyError) and exc.args
                   else str(exc).splitlines()[0][:120] if str(exc) else type(exc).__name__)
            notes.append(f"the cache entry {entry} was damaged ({why}); it was ignored and removed, and the "
                         "set was read from its files (the cache is rebuilt; it is always safe to delete)")
        return None


def _read_snapshot(entry: Path, root: Path | None) -> tuple[dict[str, Trajectory], list[LoadFailure]]:
    index = json.loads((entry / "index.json").read_text(encoding="utf-8"))
    if not isinstance(index, dict) or index.get("version") != SNAPSHOT_VERSION:
        raise _Damaged("the index is not one of this version")
    positions = np.load(entry / "positions.npy", mmap_mode="r")
    times = np.load(entry / "times.npy")
    energies = {k: np.load(entry / f"energy_{k}.npy") for k in index["energy_keys"]}
    total = positions.shape[0]
    if positions.ndim != 3 or positions.shape[2] != 3 or times.shape != (total,) or any(
            e.shape != (total,) for e in energies.values()):
        raise _Damaged("the arrays do not match each other")
    old_root = index.get("root", "")
    root = Path(root) if root is not None else Path(old_root or ".")
    runs: dict[str, Trajectory] = {}
    for r in index["runs"]:
        a, b = r["start"], r["stop"]
        if not (isinstance(a, int) and isinstance(b, int) and 0 <= a < b <= total):
            raise _Damaged(f"run {r.get('run_id')!r} points outside the arrays")
        numbers = np.asarray(r["numbers"])
        if numbers.shape != (positions.shape[1],):
            raise _Damaged(f"run {r.get('run_id')!r} has a wrong number of atoms")
        ens = {k: energies[k][a:b] for k in r["energies"]}
        sources = tuple(SourceFile(_rerooted(p, old_root, root), sha, role) for p, sha, role in r["sources"])
        runs[r["run_id"]] = Trajectory(r["run_id"], numbers, positions[a:b], times[a:b], ens,
                                       sources=sources, problems=list(r["problems"]),
                                       metadata={"file_keys": list(r.get("file_keys", []))},
                                       reading=str(r.get("reading", "")))
    failures = [LoadFailure(_rerooted(f["path"], old_root, root),
                            f["reason"].replace(old_root, str(root)) if old_root else f["reason"], f["line"])
                for f in index["failures"]]
    return runs, failures


def store_snapshot(folder: Path, key: str, runs: dict[str, Trajectory], failures: list[LoadFailure],
                   root: Path | None = None) -> None:
    """Write the entry atomically (a temporary folder renamed into place); never raises on I/O trouble."""
    trajs = list(runs.values())
    if not trajs:
        return
    if len({t.n_atoms for t in trajs}) != 1:
        return  # runs of different sizes cannot share one positions array; per-run entries serve
    tmp = None
    try:
        folder.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(dir=folder, prefix=".tmp-set-"))
        stops = np.cumsum([t.n_frames for t in trajs])
        starts = stops - np.array([t.n_frames for t in trajs])
        _save_parts(tmp / "positions.npy", [t.positions for t in trajs], "<f4")
        _save_parts(tmp / "times.npy", [t.times for t in trajs], "<f8")
        keys = [k for k in _ENERGY_KEYS if any(k in t.energies for t in trajs)]
        for k in keys:
            _save_parts(tmp / f"energy_{k}.npy",
                        [t.energies.get(k, np.full(t.n_frames, np.nan)) for t in trajs], "<f8")
        base = str(Path(root)) if root is not None else ""

        def rel(path: Path) -> str:
            try:
                return str(Path(path).relative_to(base)) if base else str(path)
            except ValueError:
                return str(path)

        index = {
            "version": SNAPSHOT_VERSION,
            "root": base,
            "energy_keys": keys,
            "runs": [{"run_id": t.run_id, "start": int(a), "stop": int(b), "numbers": t.numbers.tolist(),
                      "energies": [k for k in keys if k in t.energies],
                      "sources": [[rel(s.path), s.sha256, s.role] for s in t.sources],
                      "problems": list(t.problems), "file_keys": list(t.metadata.get("file_keys", [])),
                      "reading": t.reading}
                     for t, a, b in zip(trajs, starts, stops)],
            "failures": [{"path": rel(f.path), "reason": f.reason, "line": f.line} for f in failures],
        }
        (tmp / "index.json").write_text(json.dumps(index), encoding="utf-8")
        final = folder / f"set-{key}"
        if final.exists():
            return  # another process wrote it first (the temporary folder goes in `finally`)
        os.replace(tmp, final)
        tmp = None
        _prune(folder, keep=final)
    except OSError:
        pass  # no cache is no failure (e.g. another process wrote the same entry first)
    finally:
        if tmp is not None:
            shutil.rmtree(tmp, ignore_errors=True)


def _save_parts(path: Path, parts: list[np.ndarray], dtype: str) -> None:
    """Write the concatenation of ``parts`` as one ``.npy`` file without building it in memory
    (the whole set's positions would otherwise be held twice while the entry is written)."""
    shape = (sum(p.shape[0] for p in parts),) + tuple(parts[0].shape[1:])
    with open(path, "wb") as fh:
        np.lib.format.write_array_header_1_0(fh, {"descr": dtype, "fortran_order": False, "shape": shape})
        for part in parts:
            fh.write(np.ascontiguousarray(part, dtype=dtype).tobytes())


def _prune(folder: Path, keep: Path, max_entries: int = 3) -> None:
    """Keep the newest few set entries; older snapshots of a set that has since changed are dropped."""
    entries = sorted((p for p in folder.glob("set-*") if p.is_dir() and p != keep),
                     key=lambda p: p.stat().st_mtime, reverse=True)
    for old in entries[max_entries - 1:]:
        shutil.rmtree(old, ignore_errors=True)
