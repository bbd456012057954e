"""A set's parsed arrays cached in segments, so that reopening is near disk speed and a few changed files
cost only their segment.

The runs of a set are cut into *segments* of about :data:`SEGMENT_BYTES` of stored files each; where a
segment ends depends only on its runs' ids (a run id whose hash is a multiple of the segment length ends
one; :func:`segments`), so adding, removing or changing a run leaves the other segments as they were.
Each segment is one folder ``seg-<key>`` named by a hash of its runs' ids, file names and stored-bytes
SHA-256 and of the set's layout: a changed file changes the key of its segment only, which is then read
again from the files and written anew; the others are reused.

A segment holds ``positions.npy`` (float32, every run's frames × atoms rows one after another, so runs of
any size share it; memory-mapped read-only, each run a view), ``times.npy`` and ``energy_<kind>.npy``
(float64) and ``index.json``.  What is derived is not stored: times that are evenly spaced are kept as a
start and a step, and a total energy equal to potential + kinetic is computed again when read.  The index
starts with a line holding the SHA-256 of the rest, and it keeps a CRC-32 of every run's arrays: a segment
cut short, edited or otherwise damaged is found out when read, removed, said in a note and rebuilt from the
run files, never used (tests/test_set_cache.py).  Each run's content hash (of the decompressed content and
of how it was read, which binds the labels) is computed once when the run is parsed and kept here.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import shutil
import tempfile
import zlib
from pathlib import Path

import numpy as np

from basinmark.core.give_way import give_way
from basinmark.core.model import LoadFailure, SourceFile, Trajectory

SEGMENT_VERSION = "3"  # 3: segments with checksums; 2 was one snapshot per set plus one .npz per run
#: stored bytes of run files per segment, roughly: small enough that one changed file costs a fraction of a
#: second to read again, large enough that a 10,000-run set has some tens of segments, not thousands
SEGMENT_BYTES = 16 << 20
MAX_SEGMENT_RUNS = 256
_ENERGY_KEYS = ("potential", "kinetic", "total")
_INDEX = "index.json"


# --- which runs go together -------------------------------------------------------------------

def segment_length(mean_run_bytes: float) -> int:
    """Runs per segment on average: a power of two, so that small changes of the set's mean file size
    do not move every segment's end."""
    if mean_run_bytes <= 0:
        return MAX_SEGMENT_RUNS
    k = 2 ** round(math.log2(max(1.0, SEGMENT_BYTES / mean_run_bytes)))
    return int(min(MAX_SEGMENT_RUNS, max(1, k)))


def segments(run_ids: list[str], length: int) -> list[list[int]]:
    """Indices of ``run_ids`` cut into consecutive segments of ``length`` runs on average.

    A segment ends after a run whose id hashes to a multiple of ``length`` (or at 4 × ``length`` runs), so
    where segments end depends on the run ids alone: a run added or removed changes one segment."""
    out: list[list[int]] = []
    current: list[int] = []
    for i, rid in enumerate(run_ids):
        current.append(i)
        if zlib.crc32(rid.encode("utf-8", "surrogatepass")) % length == 0 or len(current) >= 4 * length:
            out.append(current)
            current = []
    if current:
        out.append(current)
    return out


def segment_key(fingerprint: str, specs, hashes: dict[Path, str]) -> str:
    """Name of the segment holding ``specs``: changes when any of their stored files (or the layout) does."""
    h = hashlib.sha256(f"segment {SEGMENT_VERSION}\n{fingerprint}\n".encode())
    for spec in specs:
        for role in ("backward", "forward", "joined"):
            path = getattr(spec, role)
            if path is not None:
                h.update(f"{spec.run_id}\t{role}\t{path.name}\t{hashes.get(path, '')}\n".encode("utf-8",
                                                                                                "surrogatepass"))
    return h.hexdigest()[:32]


def has_segments(folder: Path) -> bool:
    """Whether the cache folder holds any segment (when it holds none, a cold open need not hash files first)."""
    try:
        return any(p.name.startswith("seg-") for p in folder.iterdir())
    except OSError:
        return False


def cache_bytes(folder: Path) -> int:
    """Bytes on disk of every segment in the cache folder."""
    total = 0
    for entry in folder.glob("seg-*"):
        for f in entry.iterdir():
            try:
                total += f.stat().st_size
            except OSError:
                pass
    return total


# --- reading ----------------------------------------------------------------------------------

def _rerooted(path: str, old_root: str, root: Path) -> Path:
    p = Path(path)
    return root / p if not p.is_absolute() else Path(path.replace(old_root, str(root), 1))


#: what a damaged entry can raise while it is read (anything else is a bug of ours and should show)
_DAMAGE = (OSError, ValueError, KeyError, TypeError, IndexError, AttributeError, EOFError)


class _Damaged(ValueError):
    """The entry's index does not describe its arrays, or a checksum does not match."""


def load_segment(folder: Path, key: str, root: Path | None = None, notes: list[str] | None = None,
                 verify: bool = True) -> tuple[list[Trajectory], list[tuple[str, LoadFailure]]] | None:
    """The segment ``key`` as (runs in order, [(run id, failure)]), file paths re-rooted at ``root`` (a set
    may have been moved or copied since).

    None when there is no such segment.  A damaged one (index edited or cut short, arrays that do not match
    it or their checksums) is removed so that it is rebuilt, and ``notes`` gets a sentence saying so; it never
    makes opening the set fail and its data are never used.
    """
    entry = folder / f"seg-{key}"
    if not entry.is_dir():
        return None
    try:
        return _read_segment(entry, root, verify)
    except _DAMAGE as exc:
        shutil.rmtree(entry, ignore_errors=True)
        if notes is not None:
            why = (f"{exc.args[0]!r} is missing" if isinstance(exc, KeyError) and exc.args
                   else str(exc).splitlines()[0][:120] if str(exc) else type(exc).__name__)
            notes.append(f"the cache entry {entry} was damaged ({why}); it was ignored and removed, and its runs "
                         "were read from their files (the cache is rebuilt; it is always safe to delete)")
        return None


def read_index(entry: Path) -> dict:
    """The segment's index after checking the digest on its first line (raises :class:`_Damaged`)."""
    raw = (entry / _INDEX).read_bytes()
    head, sep, body = raw.partition(b"\n")
    if not sep or not head.startswith(b"sha256 ") or head[7:].decode("ascii", "replace") != hashlib.sha256(
            body).hexdigest():
        raise _Damaged("its index does not match its checksum (cut short or edited)")
    index = json.loads(body.decode("utf-8"))
    if not isinstance(index, dict) or index.get("version") != SEGMENT_VERSION:
        raise _Damaged("the index is not one of this version")
    return index


def write_index(entry: Path, index: dict) -> None:
    body = json.dumps(index).encode("utf-8")
    (entry / _INDEX).write_bytes(b"sha256 " + hashlib.sha256(body).hexdigest().encode() + b"\n" + body)


def _crc(*arrays: np.ndarray) -> int:
    c = 0
    for a in arrays:
        c = zlib.crc32(memoryview(np.ascontiguousarray(a)).cast("B"), c)
    return c


def _read_segment(entry: Path, root: Path | None, verify: bool, index: dict | None = None):
    index = read_index(entry) if index is None else index
    positions = np.load(entry / "positions.npy", mmap_mode="r")
    times = np.load(entry / "times.npy", mmap_mode="r")
    energies = {k: np.load(entry / f"energy_{k}.npy", mmap_mode="r") for k in index["energy_keys"]}
    rows, frames = positions.shape[0], energies[next(iter(energies))].shape[0] if energies else None
    if positions.ndim != 2 or positions.shape[1] != 3 or times.ndim != 1 or any(
            e.shape != (frames,) for e in energies.values()):
        raise _Damaged("the arrays do not match each other")
    old_root = index.get("root", "")
    root = Path(root) if root is not None else Path(old_root or ".")
    runs: list[Trajectory] = []
    for r in index["runs"]:
        # a segment is ~160 ms of Python at 128 runs, read beside the window: it waits while the window is busy
        give_way()
        a, b = r["rows"]
        f0, f1 = r["frames"]
        numbers = np.asarray(r["numbers"], dtype=np.int16)
        n_atoms = numbers.size
        if not (isinstance(a, int) and isinstance(b, int) and 0 <= a < b <= rows and n_atoms
                and (b - a) == (f1 - f0) * n_atoms and (frames is None or 0 <= f0 < f1 <= frames)):
            raise _Damaged(f"run {r.get('run_id')!r} points outside the arrays")
        pos = positions[a:b].reshape(f1 - f0, n_atoms, 3)
        kind, *t = r["times"]
        if kind == "step":
            tt = t[0] + t[1] * np.arange(f1 - f0, dtype=np.float64)
        else:
            ta, tb = t
            if not (0 <= ta < tb <= times.shape[0] and tb - ta == f1 - f0):
                raise _Damaged(f"run {r.get('run_id')!r} points outside the arrays")
            tt = times[ta:tb]
        ens = {k: energies[k][f0:f1] for k in r["energies"]}
        if verify and _crc(pos, tt, *(ens[k] for k in sorted(ens))) != r["crc"]:
            raise _Damaged(f"the arrays of run {r['run_id']!r} do not match their checksum")
        sources = tuple(SourceFile(_rerooted(p, old_root, root), sha, role) for p, sha, role, *_ in r["sources"])
        runs.append(Trajectory(r["run_id"], numbers, pos, np.asarray(tt), ens, sources=sources,
                               problems=list(r["problems"]), metadata={"file_keys": list(r.get("file_keys", []))},
                               reading=str(r.get("reading", ""))))
    failures = [(f["run_id"], LoadFailure(_rerooted(f["path"], old_root, root),
                                          f["reason"].replace(old_root, str(root)) if old_root else f["reason"],
                                          f["line"]))
                for f in index["failures"]]
    return runs, failures


def _want(spec, stored: dict[Path, str]) -> tuple:
    """What identifies a cached run: its id and each file's name and stored-bytes SHA-256, in role order."""
    return (spec.run_id,) + tuple((p.name, stored.get(p, "")) for r in ("backward", "forward", "joined")
                                  if (p := getattr(spec, r)) is not None)


def cached_runs(folder: Path) -> dict[tuple, tuple[Path, dict, dict]]:
    """Every run the cache folder holds, by (run id, (file name, stored-bytes SHA-256) per file), with its
    segment folder, that segment's index and its entry there.  Each index is read (and checked) once; a
    damaged one is skipped (an open of the set removes and rebuilds it)."""
    table: dict[tuple, tuple[Path, dict, dict]] = {}
    try:
        entries = [p for p in folder.iterdir() if p.name.startswith("seg-")]
    except OSError:
        return table
    for entry in entries:
        try:
            index = read_index(entry)
            for r in index["runs"]:
                table[(r["run_id"],) + tuple((Path(s[0]).name, s[3]) for s in r["sources"])] = (entry, index, r)
        except _DAMAGE:
            continue
    return table


def find_run(folder: Path, spec, stored: dict[Path, str], root: Path | None = None,
             table: dict | None = None) -> Trajectory | None:
    """One run from whichever segment holds it with these stored-bytes hashes (checked), or None.

    ``table``: :func:`cached_runs` of the folder, made once by a caller looking up many runs (without it every
    segment's index is read for this one run)."""
    hit = (cached_runs(folder) if table is None else table).get(_want(spec, stored))
    if hit is None:
        return None
    entry, index, r = hit
    try:
        runs, _ = _read_segment(entry, root, True, dict(index, runs=[r], failures=[]))
    except _DAMAGE:
        return None
    return runs[0]


# --- writing ----------------------------------------------------------------------------------

def _even_step(t: np.ndarray) -> tuple[float, float] | None:
    """``(start, step)`` when the times are exactly start + step × i (then nothing else is stored)."""
    n = t.size
    if n < 2:
        return (float(t[0]), 0.0) if n else None
    step = float((t[-1] - t[0]) / (n - 1))
    if np.array_equal(float(t[0]) + step * np.arange(n, dtype=np.float64), t):
        return float(t[0]), step
    return None


def store_segment(folder: Path, key: str, runs: list[Trajectory], failures: list[tuple[str, LoadFailure]],
                  stored: dict[Path, str], root: Path | None = None) -> int:
    """Write the segment atomically (a temporary folder renamed into place); never raises on I/O trouble.

    ``stored`` gives each source file's stored-bytes SHA-256 (kept so that one run can be found again).
    Returns the bytes written (0 when nothing was)."""
    tmp = None
    try:
        folder.mkdir(parents=True, exist_ok=True)
        final = folder / f"seg-{key}"
        if final.exists():
            return 0
        tmp = Path(tempfile.mkdtemp(dir=folder, prefix=".tmp-seg-"))
        stored_ens = [_stored_energies(t) for t in runs]  # once per run: each compares arrays
        keys = [k for k in _ENERGY_KEYS if any(k in ens for ens in stored_ens)]
        base = str(Path(root)) if root is not None else ""
        prefix = base.rstrip(os.sep) + os.sep

        # plain strings, not pathlib: a segment of 128 runs asks this for 256 files (pathlib's relative_to and
        # stat were a fifth of the parent's cost of writing the cache, measured with cProfile)
        def rel(path: Path) -> str:
            text = os.fspath(path)
            if base and text.startswith(prefix):
                return text[len(prefix):]
            return text

        def stat(path: Path) -> list[int]:
            try:
                st = os.stat(path)
                return [st.st_size, st.st_mtime_ns]
            except OSError:
                return [-1, -1]

        entries, time_parts, row, frame, t_at = [], [], 0, 0, 0
        for t, ens in zip(runs, stored_ens):
            step = _even_step(t.times)
            if step is None:
                times_ref = ["array", t_at, t_at + t.n_frames]
                time_parts.append(t.times)
                t_at += t.n_frames
            else:
                times_ref = ["step", *step]
            rows = t.n_frames * t.n_atoms
            tt = (step[0] + step[1] * np.arange(t.n_frames, dtype=np.float64)) if step else t.times
            entries.append({
                "run_id": t.run_id, "rows": [row, row + rows], "frames": [frame, frame + t.n_frames],
                "numbers": t.numbers.tolist(), "times": times_ref, "energies": sorted(ens),
                "crc": _crc(np.asarray(t.positions, dtype="<f4"), np.asarray(tt, dtype="<f8"),
                            *(np.asarray(ens[k], dtype="<f8") for k in sorted(ens))),
                "sources": [[rel(s.path), s.sha256, s.role, stored.get(s.path, ""), *stat(s.path)]
                            for s in t.sources],
                "problems": list(t.problems), "file_keys": list(t.metadata.get("file_keys", [])),
                "reading": t.reading})
            row += rows
            frame += t.n_frames
        _save_parts(tmp / "positions.npy", [np.asarray(t.positions).reshape(-1, 3) for t in runs], "<f4", (0, 3))
        _save_parts(tmp / "times.npy", time_parts, "<f8", (0,))
        for k in keys:
            _save_parts(tmp / f"energy_{k}.npy",
                        [ens.get(k, np.full(t.n_frames, np.nan)) for t, ens in zip(runs, stored_ens)], "<f8", (0,))
        index = {"version": SEGMENT_VERSION, "root": base, "energy_keys": keys, "runs": entries,
                 "failures": [{"run_id": rid, "path": rel(f.path), "reason": f.reason, "line": f.line}
                              for rid, f in failures]}
        write_index(tmp, index)
        size = sum(p.stat().st_size for p in tmp.iterdir())
        os.replace(tmp, final)
        tmp = None
        return size
    except OSError:
        return 0  # no cache is no failure (e.g. a full disk, or another process wrote the same entry first)
    finally:
        if tmp is not None:
            shutil.rmtree(tmp, ignore_errors=True)


def _stored_energies(t: Trajectory) -> dict[str, np.ndarray]:
    """The energies worth storing: a total that is exactly potential + kinetic is made again when read."""
    ens = dict(t.energies)
    total = ens.get("total")
    if total is not None and {"potential", "kinetic"} <= ens.keys() and np.array_equal(
            total, ens["potential"] + ens["kinetic"], equal_nan=True):
        del ens["total"]
    return ens


def _save_parts(path: Path, parts: list[np.ndarray], dtype: str, empty: tuple) -> None:
    """Write the concatenation of ``parts`` as one ``.npy`` file without building it in memory
    (the set's positions would otherwise be held twice while the entry is written)."""
    shape = ((sum(p.shape[0] for p in parts),) + tuple(parts[0].shape[1:])) if parts else empty
    with open(path, "wb") as fh:
        np.lib.format.write_array_header_1_0(fh, {"descr": dtype, "fortran_order": False, "shape": shape})
        for part in parts:
            fh.write(memoryview(np.ascontiguousarray(part, dtype=dtype)).cast("B"))


def prune(folder: Path, keep: set[str]) -> None:
    """Remove segments not in ``keep`` (names ``seg-<key>``), and what older versions of the cache left there
    (one ``set-<hash>`` snapshot folder per set and one ``.npz`` per run)."""
    try:
        items = list(folder.iterdir())
    except OSError:
        return
    for p in items:
        if p.name.startswith("seg-") and p.name not in keep or p.name.startswith("set-") and p.is_dir():
            shutil.rmtree(p, ignore_errors=True)
        elif p.suffix == ".npz" and p.is_file():
            p.unlink(missing_ok=True)
