"""Open a folder of runs as a :class:`~basinmark.core.model.TrajectorySet`.

Finds the runs (halves by the layout's patterns, or already-joined files), reads
them in parallel, joins each backward half (time-reversed, negative times) and
forward half into one run sharing the t = 0 frame, and keeps a cache of the
joined arrays keyed by the source files' SHA-256 so that reopening a set costs
little more than hashing its files.  Failures are collected, never fatal.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import threading
import warnings
from collections import Counter
from contextvars import ContextVar
from concurrent.futures import ProcessPoolExecutor, ThreadPoolExecutor, as_completed, wait
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Callable, Iterator

import numpy as np

from basinmark.core.content_hash import content_sha256, reading_digest
from basinmark.core.errors import BasinmarkError, SetError, TrajectoryFileError
from basinmark.core.manifest import SetLayout, load_layout
from basinmark.core.model import LoadFailure, SourceFile, Trajectory, TrajectorySet
from basinmark.core.pairing import RunSpec, describe, find_by_names, find_by_patterns
from basinmark.core.process_context import lower_priority, worker_context
from basinmark.core.set_cache import (cached_runs, find_run, has_segments, load_segment, prune, segment_key,
                                      segment_length, segments, store_segment)

JOURNAL_NAME = "basinmark-labels.jsonl"
RULES_NAME = "basins.toml"
CACHE_NAME = ".basinmark-cache"
#: first frames of the two halves must agree this well (Å) to be the same transition-state point
TS_MATCH_TOLERANCE = 1e-3

Progress = Callable[[int, int, "str | None"], None]


def journal_path(root: str | Path) -> Path:
    """Default location of a set's label journal."""
    return Path(root) / JOURNAL_NAME


def rules_path(root: str | Path) -> Path:
    """Default location of a set's rules file."""
    return Path(root) / RULES_NAME


@dataclass
class SetPlan:
    root: Path
    layout: SetLayout
    runs: list[RunSpec]
    failures: list[LoadFailure] = field(default_factory=list)
    left_out: list[LoadFailure] = field(default_factory=list)  # files found but not runs, with the reason
    notes: list[str] = field(default_factory=list)  # how the runs were found, one sentence per convention
    conventions: dict = field(default_factory=dict)  # convention -> runs found by it (see pairing.describe)
    plain: bool = True  # the set follows this project's own naming or the manifest's patterns
    listing: str = ""  # digest of the names that can make runs (pairing.listing_digest)


def discover(root: str | Path) -> SetPlan:
    """Find the runs of a set folder without reading them (see :mod:`basinmark.core.pairing`)."""
    root = Path(root).expanduser()
    if not root.exists():
        raise SetError(f"{root}: no such folder")
    if not root.is_dir():
        raise SetError(f"{root}: not a folder (a set is a folder of run files)")
    layout = load_layout(root)
    if layout.patterns_given:
        pairing = find_by_patterns(root, layout)
    else:
        pairing = find_by_names(root, layout.folders)
    return SetPlan(root, layout, pairing.runs, [], pairing.left_out, pairing.notes, pairing.conventions,
                   plain=pairing.plain, listing=pairing.listing)


# --- reading and joining ---------------------------------------------------------------------

def _sha256_file(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def pick_key(info: dict, candidates) -> tuple[str | None, np.ndarray | None]:
    """The first of ``candidates`` the file carries, compared without case: ``(key as written, values)``."""
    by_lower = {k.lower(): k for k in info}
    for key in candidates:
        k = key if key in info else by_lower.get(key.lower())
        if k is not None:
            return k, np.asarray(info[k], dtype=np.float64)
    return None, None


def _kinetic_from_momenta(block) -> np.ndarray | None:
    """Kinetic energy (eV) per frame from per-atom momenta in ase's units, as ase computes it:
    ½ Σ p·p / m (``Atoms.get_kinetic_energy``); masses from the file, else ase's standard atomic masses."""
    p = block.arrays.get("momenta")
    if p is None or p.ndim != 3 or p.shape[-1] != 3:
        return None
    from ase.data import atomic_masses

    masses = block.arrays.get("masses")
    m = np.asarray(masses, dtype=np.float64) if masses is not None else atomic_masses[block.numbers][None, :]
    return 0.5 * np.einsum("fai,fai->f", p, p / m[..., None]) if m.ndim == 2 else None


@dataclass
class _Half:
    numbers: np.ndarray
    positions: np.ndarray
    times: np.ndarray | None
    energies: dict
    problems: list
    keys: list = field(default_factory=list)  # numeric comment keys the file carries
    recipe: dict = field(default_factory=dict)  # which key gave which value (part of the run's reading hash)
    content_sha256: str = ""  # of the decompressed file, from the reader's own pass ("" when it gave none)
    stored_sha256: str = ""  # of the file as stored (the cache key), from the same pass


def _read_half(path: Path, layout: SetLayout) -> _Half:
    from basinmark.core.io import read_frames

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # partial reads are reported through block.warnings
        block = read_frames(path, dtype=np.float32, comment_format=layout.comment_format)
    positions = block.positions
    if layout.length_factor != 1.0:
        positions = positions * np.float32(layout.length_factor)
    time_key, times = pick_key(block.info, layout.keys["time"])
    recipe: dict = {"time_key": time_key}
    if layout.comment_format is not None:
        recipe["comment_format"] = [layout.comment_format.pattern, list(layout.comment_format.factors)]
    if time_key is not None:
        recipe["time_factor"] = layout.time_factor
    if times is not None:
        if np.isnan(times).any():
            bad = int(np.flatnonzero(np.isnan(times))[0])
            line = int(block.frame_lines[bad]) if block.frame_lines.size else 0
            raise TrajectoryFileError(path, f"frame {bad + 1} has no time although others do",
                                      line or None)  # 0: the reader had no line numbers (ase fallback)
        times = times * layout.time_factor
    energies = {}
    for role in ("potential", "kinetic", "total"):
        key, values = pick_key(block.info, layout.keys[role])
        if values is not None:
            energies[role] = values * layout.energy_factor
            recipe[f"{role}_key"] = key
            recipe["energy_factor"] = layout.energy_factor
    if "kinetic" not in energies:
        kinetic = _kinetic_from_momenta(block)
        if kinetic is not None:
            energies["kinetic"] = kinetic
            recipe["kinetic_key"] = "(momenta)"
    return _Half(block.numbers, positions, times, energies, list(block.warnings), sorted(block.info), recipe,
                 getattr(block, "content_sha256", ""), block.sha256)


def no_energy_note(keys) -> str:
    """Said when a run carries no energies: which keys its files do carry, and where to name the right ones."""
    carried = ", ".join(k for k in keys) or "none"
    return (f"no energy key found, so no energy check is made (numeric comment keys in the files: {carried}; "
            "name the energy keys under [keys] in basinmark-set.toml)")


def _oldest_first(half: _Half) -> bool:
    """A backward half whose times are all ≤ 0 and rise towards 0: stored from its far end to the TS."""
    t = half.times
    if t is None or t.size < 2:
        return False
    step = float(np.max(np.abs(np.diff(t)))) or 1.0
    return bool(t[-1] > t[0] and np.all(t <= 0.5 * step) and abs(t[-1]) <= 0.5 * step)


def _half_times(half: _Half, layout: SetLayout, path: Path, backward: bool) -> np.ndarray:
    n = half.positions.shape[0]
    if half.times is None:
        if layout.step_fs is None:
            half.problems.append(f"{path.name} has no time key; 1 fs per frame assumed "
                                 f"({_NO_TIME_ADVICE.format(', '.join(layout.keys['time']))})")
            step = 1.0
        else:
            step = layout.step_fs
        t = np.arange(n) * step
        half.recipe["step_fs"] = step
    else:
        t = half.times - half.times[0]  # elapsed from the transition state
    if backward:
        mode = layout.backward_time
        if mode == "auto":
            mode = "signed" if (half.times is not None and n > 1 and half.times[-1] < half.times[0]) else "elapsed"
        half.recipe["backward_time"] = mode
        t = -np.abs(t) if mode == "elapsed" else t
        if n > 1 and not np.all(np.diff(t) < 0):
            raise TrajectoryFileError(path, "backward half: times do not move steadily away from t = 0")
    elif n > 1 and not np.all(np.diff(t) > 0):
        bad = int(np.flatnonzero(np.diff(t) <= 0)[0]) + 1
        raise TrajectoryFileError(path, f"times are not increasing at frame {bad + 1}")
    return t


def _reading(layout: SetLayout, **halves: _Half) -> str:
    """Digest of how the run's files were read (folded into its content hash; see core/content_hash.py).

    Any new manifest setting that changes the values read from a file must add itself to ``_Half.recipe``."""
    return reading_digest({"length_factor": layout.length_factor, **{k: h.recipe for k, h in halves.items()}})


def _join(spec: RunSpec, layout: SetLayout, stored: dict | None = None) -> Trajectory:
    """The run of ``spec``; ``stored`` (if given) gets each file's stored-bytes SHA-256 from the reader's pass."""
    sha = content_sha256  # of the decompressed content: re-compressing a file keeps its labels
    problems: list[str] = []
    if spec.joined is not None:
        half = _read_half(spec.joined, layout)
        if stored is not None and half.stored_sha256:
            stored[spec.joined] = half.stored_sha256
        times = half.times
        if times is None:
            step = layout.step_fs or 1.0
            if layout.step_fs is None:
                problems.append(f"{spec.joined.name} has no time key; 1 fs per frame from t = 0 assumed "
                                f"({_NO_TIME_ADVICE.format(', '.join(layout.keys['time']))})")
            times = np.arange(half.positions.shape[0]) * step
            half.recipe["step_fs"] = step
        if half.positions.shape[0] > 1 and not np.all(np.diff(times) > 0):
            raise TrajectoryFileError(spec.joined, "times are not increasing (a joined run must run from "
                                                   "negative to positive times)")
        if times.size and times[0] > 0:
            problems.append(f"{spec.joined.name}: no frame at or before t = 0 (times {times[0]:g} to "
                            f"{times[-1]:g} fs), so the run has no backward half and the transition state is "
                            "taken to be its first frame; a joined run should span negative to positive times")
        elif times.size > 1 and float(np.min(np.abs(times))) > 0.5 * float(np.max(np.diff(times))):
            problems.append(f"{spec.joined.name}: t = 0 is not among the times; the frame nearest to it is "
                            "taken as the transition state")
        sources = (SourceFile(spec.joined, half.content_sha256 or sha(spec.joined), "joined"),)
        if not half.energies:
            problems.append(no_energy_note(half.keys))
        return Trajectory(spec.run_id, half.numbers, half.positions, times, half.energies,
                          sources=sources, problems=problems + half.problems, metadata={"file_keys": half.keys},
                          reading=_reading(layout, joined=half))
    bwd = _read_half(spec.backward, layout)
    fwd = _read_half(spec.forward, layout)
    if stored is not None:
        stored.update({p: h.stored_sha256 for p, h in ((spec.backward, bwd), (spec.forward, fwd)) if h.stored_sha256})
    if not np.array_equal(bwd.numbers, fwd.numbers):
        if bwd.numbers.size != fwd.numbers.size:
            why = f"{bwd.numbers.size} atoms in the backward half, {fwd.numbers.size} in the forward half"
        else:
            i = int(np.flatnonzero(bwd.numbers != fwd.numbers)[0])
            why = f"atom {i + 1} is element {bwd.numbers[i]} in the backward half, {fwd.numbers[i]} forward"
        raise TrajectoryFileError(spec.forward, f"the halves of run {spec.run_id} do not match: {why}")
    if _oldest_first(bwd):
        # times rising to t = 0 at the end: the file lists the backward half from its far end to the TS;
        # turn it round so that, like every half, it starts at the transition state
        bwd.positions = bwd.positions[::-1]
        bwd.times = bwd.times[::-1]
        bwd.energies = {k: v[::-1] for k, v in bwd.energies.items()}
        problems.append(f"{spec.backward.name} lists the backward half from its far end to the transition "
                        "state (times rise to 0); read in reverse")
    tb = _half_times(bwd, layout, spec.backward, backward=True)
    tf = _half_times(fwd, layout, spec.forward, backward=False)
    gap = float(np.max(np.abs(bwd.positions[0] - fwd.positions[0])))
    if gap > TS_MATCH_TOLERANCE:
        problems.append(f"the halves start {gap:.3g} Å apart (not the same transition-state point)")
    positions = np.empty((bwd.positions.shape[0] + fwd.positions.shape[0] - 1,) + fwd.positions.shape[1:],
                         dtype=np.float32)
    nb = bwd.positions.shape[0] - 1
    positions[:nb] = bwd.positions[:0:-1]
    positions[nb:] = fwd.positions
    del bwd.positions, fwd.positions  # the halves' arrays go as soon as the joined one exists
    times = np.concatenate([tb[:0:-1], tf])
    energies = {}
    for key in sorted(set(bwd.energies) ^ set(fwd.energies)):
        has, lacks = ("backward", "forward") if key in bwd.energies else ("forward", "backward")
        problems.append(f"{key} energy only in the {has} half (the {lacks} half has none), so the run "
                        f"carries no {key} energy and its energy check is incomplete")
    for key in set(bwd.energies) & set(fwd.energies):
        energies[key] = np.concatenate([bwd.energies[key][:0:-1], fwd.energies[key]])
    # the reader hashed the decompressed content as it read it: no second decompression just to hash
    sources = (SourceFile(spec.backward, bwd.content_sha256 or sha(spec.backward), "backward"),
               SourceFile(spec.forward, fwd.content_sha256 or sha(spec.forward), "forward"))
    keys = sorted(set(bwd.keys) | set(fwd.keys))
    if not bwd.energies and not fwd.energies:
        problems.append(no_energy_note(keys))
    return Trajectory(spec.run_id, bwd.numbers, positions, times, energies, sources=sources,
                      metadata={"file_keys": keys}, reading=_reading(layout, backward=bwd, forward=fwd),
                      problems=problems + bwd.problems + fwd.problems)


# --- cache -------------------------------------------------------------------------------------

def cache_folder(root: Path) -> Path:
    """Where a set's parsed runs are cached (:mod:`basinmark.core.set_cache`): ``.basinmark-cache`` in the set
    folder, or under ``$XDG_CACHE_HOME/basinmark`` (``~/.cache/basinmark``) when the set folder is not
    writable.  Safe to delete at any time."""
    root = Path(root)
    if os.access(root, os.W_OK):
        return root / CACHE_NAME
    base = Path(os.environ.get("XDG_CACHE_HOME", Path.home() / ".cache"))
    return base / "basinmark" / hashlib.sha256(str(root.resolve()).encode()).hexdigest()[:16]


# --- the public entry points -------------------------------------------------------------------

def _parse_or_fail(spec: RunSpec, layout: SetLayout) -> tuple[Trajectory | LoadFailure, dict[Path, str]]:
    """The run (or a :class:`LoadFailure` made where the error happens: in a worker process too, our errors'
    own arguments do not survive the trip back through pickle, a LoadFailure does), and the stored-bytes
    SHA-256 of each file the reader finished (its own pass: no file is hashed twice)."""
    stored: dict[Path, str] = {}
    try:
        return _join(spec, layout, stored), stored
    except Exception as exc:  # collected, never fatal for the set
        return _failure(spec, exc), stored


def _failure(spec: RunSpec, exc: Exception) -> LoadFailure:
    if isinstance(exc, TrajectoryFileError):
        return LoadFailure(exc.path, str(exc), exc.line)
    path = spec.files[0] if spec.files else Path(spec.run_id)
    if isinstance(exc, BasinmarkError):
        return LoadFailure(path, f"{path}: {exc}")
    if isinstance(exc, MemoryError):  # e.g. while joining the halves: name the files and their sizes
        sizes = ", ".join(f"{p.name} {p.stat().st_size / 1e6:.1f} MB" for p in spec.files if p.exists())
        return LoadFailure(path, f"{path}: there is not enough memory to load run {spec.run_id} ({sizes} on "
                                 "disk); close other programs, open the set on a machine with more memory, or "
                                 "split the run into shorter files")
    return LoadFailure(path, f"{path}: could not be read ({type(exc).__name__}: {exc})")


#: below this mean file size one loader thread is fastest (measured: 400 files of 7 kB load in 0.33 s on one
#: thread, 0.47 s on two, 0.74 s on eight, the many small numpy calls contending for the GIL); above it,
#: decompression and large array work release the GIL (32 files of 1.5 MB: 0.48 s on one, 0.32 s on two)
PARALLEL_FROM_BYTES = 256 * 1024

#: from this much stored data on, runs are parsed in a pool of processes, one per core (parsing is mostly
#: Python and numpy calls that hold the GIL, so threads gain little; processes scale with the cores).
#: Below it, starting the processes costs more than they save.  Measured on 2 cores at load average 12 (runs
#: of 12 atoms x 2 x 400 frames, 135 kB gzipped per run, no cache): 5.4 MB: threads 1.3 s, processes 5.3 s;
#: 16 MB: 4.1 s against 5.3 s; 41 MB: 10.5 s against 6.8 s; the pool's start (a forkserver importing the
#: readers, then the workers) is most of its cost on a small set.  bench/bench_scale.py times a large set.
PROCESSES_FROM_BYTES = 24 * 1024 * 1024


def cores() -> int:
    """The cores this process may run on (the affinity mask where the system has one)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return os.cpu_count() or 1


def _workers(workers: int | None, plan: SetPlan | None = None) -> int:
    if workers:
        return workers
    if plan is not None:
        sizes = [p.stat().st_size for spec in plan.runs[:50] for p in spec.files if p.exists()]
        if sizes and sum(sizes) / len(sizes) < PARALLEL_FROM_BYTES:
            return 1
    return min(4, os.cpu_count() or 2)


def _stored_bytes(plan: SetPlan, sample: int = 50) -> float:
    """The set's stored size, estimated from its first ``sample`` runs (a stat per file of those only)."""
    if not plan.runs:
        return 0.0
    head = plan.runs[:sample]
    size = 0
    for spec in head:
        for p in spec.files:
            try:
                size += p.stat().st_size
            except OSError:
                pass
    return size * len(plan.runs) / len(head)


def use_processes(plan: SetPlan, workers: int | None = None, processes: bool | None = None) -> bool:
    """Whether :func:`iter_runs` parses in a process pool: asked for, or (by default) a set large enough
    to pay for starting one process per core on a machine with more than one core."""
    if processes is not None:
        return processes
    if workers == 1 or cores() < 2 or len(plan.runs) < 2:
        return False
    return _stored_bytes(plan) >= PROCESSES_FROM_BYTES


def _new_pool(n_workers: int) -> ProcessPoolExecutor:
    """A process pool of our workers (:mod:`basinmark.core.process_context`: the readers preloaded, never the
    caller's script, a lower priority than the caller)."""
    return ProcessPoolExecutor(max_workers=n_workers, mp_context=worker_context(),
                               initializer=lower_priority, initargs=(os.getpid(),))


def hash_files(plan: SetPlan, workers: int | None = None, processes: bool = False) -> dict[Path, str]:
    """SHA-256 of every file of the plan (files that cannot be read are left out), in parallel: in threads, or
    with ``processes`` in worker processes.

    Threads hash as fast (hashlib lets go of Python's lock on large buffers) and start at once, but they take the
    lock back after every read and every buffer, and in the window every call from Qt into Python then waits for
    it: a repaint of the run table took 30-51 ms against 7 ms while the background check of 10,000 runs hashed in
    two threads (measured).  Work done while the window is in use (:func:`basinmark.core.quick_open.full_check`)
    asks for processes on a large set; a load, which the window waits for anyway, keeps the threads' quicker
    start (about 0.5 s for a pool)."""
    paths = [p for spec in plan.runs for p in spec.files]
    n = min(_workers(workers), os.cpu_count() or 2)
    if paths and processes:
        return _hash_in_processes(paths, max(1, n))
    chunks = [paths[i::n] for i in range(n)]  # one task per thread: tiny files cost more in hand-offs
    with ThreadPoolExecutor(max_workers=n, thread_name_prefix="basinmark-hash") as pool:
        parts = list(pool.map(lambda chunk: [(p, _safe_sha256(p)) for p in chunk], chunks))
    return {p: d for part in parts for p, d in part if d is not None}


def _hash_in_processes(paths: list[Path], n_workers: int) -> dict[Path, str]:
    """:func:`hash_files` in a pool of ``n_workers`` worker processes (paths sent as text: cheaper to send)."""
    text = [str(p) for p in paths]
    per = max(1, min(512, -(-len(text) // (4 * n_workers))))   # a few tasks per worker: even ends, few hand-offs
    pool = _new_pool(n_workers)
    try:
        parts = list(pool.map(_hash_paths, [text[i:i + per] for i in range(0, len(text), per)]))
    finally:
        pool.shutdown(wait=True, cancel_futures=True)
    return {p: d for p, d in zip(paths, (d for part in parts for d in part)) if d is not None}


def _hash_paths(paths: list[str]) -> list[str | None]:
    """In a worker: the SHA-256 of each file, None where it cannot be read."""
    return [_safe_sha256(Path(p)) for p in paths]


def _safe_sha256(path: Path) -> str | None:
    try:
        return _sha256_file(path)
    except OSError:
        return None  # reported when the file is read


def _parsed(plan: SetPlan, specs: list[RunSpec], workers: int | None, cancel: Callable[[], bool] | None,
            processes: bool | None, work=None) -> Iterator[tuple[RunSpec, Trajectory | LoadFailure, dict[Path, str]]]:
    """Parse ``specs`` in parallel, yielding ``(spec, run or failure, stored-bytes hashes)`` as each is ready.

    Large sets are parsed in a pool of processes (one per core, or ``workers``; several runs per task, see
    :func:`_tasks`), small ones in threads; ``processes`` forces either (see :func:`use_processes`).
    Cancelling drops the runs not yet started and waits only for those under way; the pool never outlives the
    iteration.  ``work(spec, layout)`` replaces :func:`_parse_or_fail` in the worker processes (tests).
    """
    part = plan if len(specs) == len(plan.runs) else replace(plan, runs=specs)
    if use_processes(part, workers, processes):
        yield from _in_processes(plan.layout, specs, workers or cores(), cancel, work)
        return
    with ThreadPoolExecutor(max_workers=_workers(workers, part), thread_name_prefix="basinmark-load") as pool:
        futures = {pool.submit(_parse_or_fail, spec, plan.layout): spec for spec in specs}
        try:
            for fut in as_completed(futures):
                spec = futures[fut]
                try:
                    result, stored = fut.result()
                except Exception as exc:  # never expected in a thread: _parse_or_fail catches everything
                    result, stored = _failure(spec, exc), {}
                yield spec, result, stored
                if cancel is not None and cancel():
                    break
        finally:
            pool.shutdown(wait=True, cancel_futures=True)


# --- the process pool ---------------------------------------------------------------------------

#: at most this many runs per task of the process pool.  One task per run cost the parent process about 1 ms of
#: CPU per run in hand-offs (futures, wake-ups, the layout pickled with every task) on a 2-core machine where the
#: workers need both cores (measured on 3,000 runs of 12 atoms x 2 x 400 frames: one run per task 8.7 s, 16 per
#: task 6.9 s, the workers' own time 6.6 s); 16 runs are about 70 ms of work, so progress still moves in small
#: steps and a cancel waits for little more than the tasks under way
BATCH_RUNS = 16
#: ... and at least this many tasks per worker, so that the last tasks do not leave a core idle for long
TASKS_PER_WORKER = 8
#: after this many pool failures (a worker killed) the rest is read one run per task by a single worker
MAX_POOL_BREAKS = 3


def _tasks(specs: list[RunSpec], workers: int) -> list[list[RunSpec]]:
    """``specs`` cut into the pool's tasks, in order: one run per worker first (the first runs come back soon
    after the pool starts), then tasks doubling in size up to :data:`BATCH_RUNS` runs (fewer on small sets)."""
    n = len(specs)
    size = max(1, min(BATCH_RUNS, n // (workers * TASKS_PER_WORKER)))
    tasks: list[list[RunSpec]] = []
    i, step = 0, 1
    while i < n:
        for _ in range(workers):
            if i >= n:
                break
            tasks.append(specs[i:i + step])
            i += step
        step = min(size, 2 * step)
    return tasks


def _parse_batch(specs: list[RunSpec], layout: SetLayout, work=None) -> list:
    """One task of the process pool: each run read on its own (a failure is that run's alone)."""
    work = work or _parse_or_fail
    return [work(spec, layout) for spec in specs]


def _stopped_worker(spec: RunSpec) -> LoadFailure:
    path = spec.files[0] if spec.files else Path(spec.run_id)
    return LoadFailure(path, f"{path}: the process reading run {spec.run_id} stopped before it finished (it was "
                             "killed, perhaps by the system for lack of memory); the run was tried again on its "
                             "own and stopped it again, so it is left out — check its files' size and content")


class _Cancelled(Exception):
    pass


def _ready() -> bool:
    return True


#: at most this many runs are read by the calling process itself while the pool starts
LOCAL_RUNS_MAX = 256
#: ... and this many in a load started within :func:`beside_a_window`
WINDOW_LOCAL_RUNS = 1
_local_runs: ContextVar[int | None] = ContextVar("basinmark_local_runs", default=None)


@contextlib.contextmanager
def beside_a_window():
    """Loads started in this block (in this thread) leave the parsing to the pool once the first run is read here.

    For a process that also draws a window: parsing in one of its threads holds Python's lock, and every call from
    Qt into Python waits for it, so the window's first paints came slowly while the pool started (the longest gap of
    a cold open of 10,000 runs, at its start: 197-221 ms reading up to :data:`LOCAL_RUNS_MAX` runs here, 87-121 ms
    reading one, measured twice each).  The first run still comes at once, and the load takes as long."""
    token = _local_runs.set(WINDOW_LOCAL_RUNS)
    try:
        yield
    finally:
        _local_runs.reset(token)


def _start_pool(layout: SetLayout, specs: list[RunSpec], n_workers: int, cancel) -> Iterator:
    """Start the process pool in a helper thread and read the first runs here meanwhile, yielding each; returns
    ``(pool, the runs left for the pool)``.  Raises _Cancelled.

    The pool's first worker waits for the forkserver to import the readers (0.47 s measured at 10,000 runs, on
    the way to the window's first rows); this process would sit idle that long.  It reads at least the first
    run, and more until a worker has answered (at most :data:`LOCAL_RUNS_MAX`; see :func:`beside_a_window`)."""
    box: dict = {}

    def start() -> None:
        try:
            box["pool"] = _new_pool(n_workers)
            box["pool"].submit(_ready).result()
        except BaseException as exc:  # handed to the caller's thread below
            box["error"] = exc

    thread = threading.Thread(target=start, name="basinmark-pool-start", daemon=True)
    thread.start()
    i = 0
    cap = _local_runs.get()
    limit = min(LOCAL_RUNS_MAX if cap is None else cap, len(specs) - 1)
    try:
        while i < limit and (i == 0 or thread.is_alive()):
            spec = specs[i]
            i += 1
            result, stored = _parse_or_fail(spec, layout)
            yield spec, result, stored
            if cancel is not None and cancel():
                raise _Cancelled
        thread.join()
    except BaseException:  # cancelled, or the caller stopped iterating: the pool goes too
        thread.join()
        if "pool" in box:
            box["pool"].shutdown(wait=True, cancel_futures=True)
        raise
    if "error" in box:
        if "pool" in box:
            box["pool"].shutdown(wait=True, cancel_futures=True)
        raise box["error"]
    return box["pool"], specs[i:]


def _pool_pass(layout: SetLayout, tasks: list[list[RunSpec]], n_workers: int, cancel, work, out: list,
               pool=None) -> Iterator:
    """Run ``tasks`` in one process pool (``pool``, or a new one), yielding each run as its task comes back; the
    tasks left unfinished when a worker process died are appended to ``out`` in the order they were given.
    Raises _Cancelled."""
    if pool is None:
        pool = _new_pool(n_workers)
    try:
        futures = [pool.submit(_parse_batch, task, layout, work) for task in tasks]
        index = {fut: i for i, fut in enumerate(futures)}
        taken: set[int] = set()
        broken = False
        for fut in as_completed(futures):
            i = index[fut]
            try:
                results = fut.result()
            except BrokenProcessPool:
                broken = True
                break
            except Exception as exc:  # the task could not be sent or its results not returned (e.g. pickling)
                results = [(_failure(spec, exc), {}) for spec in tasks[i]]
            taken.add(i)
            for spec, (result, stored) in zip(tasks[i], results):
                yield spec, result, stored
                if cancel is not None and cancel():
                    raise _Cancelled
        if broken:
            wait(futures)  # every task is settled once the pool has noticed the dead worker
            for i, fut in enumerate(futures):
                if i in taken:
                    continue
                if fut.exception() is None:  # finished before the worker died
                    for spec, (result, stored) in zip(tasks[i], fut.result()):
                        yield spec, result, stored
                else:
                    out.append(tasks[i])
    finally:
        pool.shutdown(wait=True, cancel_futures=True)


def _in_processes(layout: SetLayout, specs: list[RunSpec], n_workers: int, cancel, work) -> Iterator:
    """The runs of ``specs`` parsed in a process pool, several per task, yielded as each task comes back.

    A worker process that dies (killed for lack of memory, say) breaks the pool: the tasks not yet started go to
    a new pool, while the runs of those that may have been under way (the first unfinished ones: a pool starts
    its tasks in order) are read again one at a time by a single worker, so the run that kills its worker again
    is known and fails alone, with a plain message, and its batch-mates load.  The first runs are read in this
    process while the pool starts (:func:`_start_pool`)."""
    breaks = 0
    try:
        pool, specs = yield from _start_pool(layout, specs, n_workers, cancel)
        tasks = _tasks(specs, n_workers)
        if not tasks:
            pool.shutdown(wait=True)
        while tasks:
            left: list[list[RunSpec]] = []
            if breaks < MAX_POOL_BREAKS:
                yield from _pool_pass(layout, tasks, n_workers, cancel, work, left, pool)
                pool = None
                if not left:
                    return
                breaks += 1
                under_way = 2 * n_workers + 1  # running, plus those already queued for the workers
                suspects, tasks = left[:under_way], left[under_way:]
            else:
                suspects, tasks = tasks, []
            singles = [[spec] for task in suspects for spec in task]
            while singles:
                again: list[list[RunSpec]] = []
                yield from _pool_pass(layout, singles, 1, cancel, work, again)
                if again:  # one worker takes its tasks in order: the first unfinished one killed it
                    yield again[0][0], _stopped_worker(again[0][0]), {}
                singles = again[1:]
    except _Cancelled:
        return


def iter_runs(plan: SetPlan, *, use_cache: bool = True, workers: int | None = None,
              cancel: Callable[[], bool] | None = None, hashes: dict[Path, str] | None = None,
              processes: bool | None = None) -> Iterator[tuple[RunSpec, Trajectory | LoadFailure]]:
    """Load the runs of a plan in parallel, yielding each as soon as it is ready (any order).

    With ``use_cache`` a run whose files are unchanged (their stored bytes hash as ``hashes`` says, or as
    hashed here) is taken from the set's cache (for a few runs of a large set); the others are parsed, in a
    process pool for large sets (see :func:`use_processes`).  Cancelling drops the runs not yet started.
    """
    todo = list(plan.runs)
    folder = cache_folder(plan.root)
    table = cached_runs(folder) if use_cache else {}  # every segment's index read once, not once per run
    if table:
        root = plan.root.resolve()
        todo = []
        for spec in plan.runs:
            stored = {p: (hashes or {}).get(p) or _safe_sha256(p) or "" for p in spec.files}
            hit = find_run(folder, spec, stored, root, table)
            if hit is None:
                todo.append(spec)
                continue
            yield spec, hit
            if cancel is not None and cancel():
                return
    for spec, result, _stored in _parsed(plan, todo, workers, cancel, processes):
        yield spec, result


def _single_frame(traj: Trajectory) -> LoadFailure | None:
    """A file of one frame found as a joined run is a single geometry (a transition state, a minimum), not a run."""
    if traj.n_frames != 1 or len(traj.sources) != 1:
        return None
    path = traj.sources[0].path
    return LoadFailure(path, f"{path}: one frame only, a single geometry (such as a transition state or a "
                             "minimum), not a run")


def _sort_out(runs: dict[str, Trajectory], warnings_: list[str]) -> tuple[dict[str, Trajectory], list[LoadFailure]]:
    """Leave out single-frame files and runs whose atoms differ from the set's (the atom list most runs share).

    Rules number atoms for the whole set, so a run of other atoms cannot be classified by them.  When no atom
    list is shared by more than half of the runs there is no telling which runs belong: all are kept, and the
    odd ones are named instead.
    """
    left: list[LoadFailure] = []
    kept = {}
    for rid, t in runs.items():
        single = _single_frame(t)
        if single is not None:
            left.append(single)
        else:
            kept[rid] = t
    if len(kept) < 2:
        return kept, left
    counts = Counter(t.numbers.tobytes() for t in kept.values())
    common, n_common = counts.most_common(1)[0]
    ref = next(t for t in kept.values() if t.numbers.tobytes() == common)
    odd = [t for t in kept.values() if not np.array_equal(t.numbers, ref.numbers)]
    if not odd:
        return kept, left

    def why(t: Trajectory) -> str:
        return (f"{t.n_atoms} atoms against {ref.n_atoms}" if t.n_atoms != ref.n_atoms
                else "the same number of atoms in another order or of other elements")

    if n_common * 2 > len(kept):
        for t in odd:
            del kept[t.run_id]
            files = ", ".join(str(s.path) for s in t.sources) or t.run_id
            left.append(LoadFailure(t.sources[0].path if t.sources else Path(t.run_id),
                                    f"{files}: other atoms than the set's runs ({why(t)}, e.g. run {ref.run_id}), "
                                    "so not a run of this set"))
        return kept, left
    first = next(iter(kept.values()))
    others = [t for t in kept.values() if not np.array_equal(t.numbers, first.numbers)]
    for t in others:
        msg = (f"atoms differ from the set's first run {first.run_id} ({why(t)}): atom numbers in rules mean "
               "other atoms here")
        if msg not in t.problems:
            t.problems.append(msg)
    names = [t.run_id for t in others]
    warnings_.append(f"{len(names)} run(s) have other atoms than {first.run_id} ({', '.join(names[:5])}"
                     f"{', ...' if len(names) > 5 else ''}) and no atom list is shared by most runs; their "
                     "classification uses the same atom numbers and may be meaningless")
    return kept, left


def _energy_warning(runs: dict[str, Trajectory]) -> list[str]:
    """One set-level sentence when no run carries energies, naming the keys the files do carry."""
    if not runs or any(t.energies for t in runs.values()):
        return []
    keys = sorted({k for t in runs.values() for k in t.metadata.get("file_keys", [])})
    return [f"none of the {len(runs)} runs carries energies: " + no_energy_note(keys)]


_NO_TIME_ADVICE = ("looked for the keys {}; state [time] step_fs, name the time key under [keys], or describe "
                   "free-form comment lines under [comment] in basinmark-set.toml")


def _time_warning(runs: dict[str, Trajectory]) -> list[str]:
    """One set-level sentence when runs carry no time and 1 fs per frame was assumed (times may all be off)."""
    assumed = [t.run_id for t in runs.values() if any("has no time key; 1 fs per frame" in p for p in t.problems)]
    if not assumed:
        return []
    return [f"{len(assumed)} of {len(runs)} runs carry no time in their files, so 1 fs per frame was assumed for "
            f"them ({', '.join(assumed[:5])}{', ...' if len(assumed) > 5 else ''}); every time, dwell and commit "
            "time of these runs is only as right as that guess — state [time] step_fs, or describe the comment "
            "lines under [comment] in basinmark-set.toml (docs/set-manifest.md)"]


def _finish(plan: SetPlan, runs: dict[str, Trajectory], failures: list[LoadFailure]) -> TrajectorySet:
    warnings_: list[str] = []
    runs, left = _sort_out(runs, warnings_)
    tset = TrajectorySet(plan.root, runs, failures, metadata=_metadata(plan))
    tset.left_out = list(plan.left_out) + left
    tset.notes = describe(plan.conventions, keep=set(runs)) if plan.conventions else list(plan.notes)
    tset.warnings.extend(warnings_ + _energy_warning(runs) + _time_warning(runs))
    return tset


def _metadata(plan: SetPlan) -> dict:
    meta = {"name": plan.layout.name, "pairing_plain": plan.plain}
    if plan.layout.tst is not None:
        meta["tst"] = dict(plan.layout.tst)
    return meta


def open_set(path: str | Path, *, progress: Progress | None = None, use_cache: bool = True,
             workers: int | None = None, cancel: Callable[[], bool] | None = None,
             on_run: Callable[[Trajectory], None] | None = None, processes: bool | None = None) -> TrajectorySet:
    """Open a set folder: every run that loads, plus a list of what failed and why.

    ``progress(done, total, run_id)`` is called after each run (after each cached segment of runs, with
    ``run_id`` None); ``cancel()`` returning True stops loading (the set then holds what was loaded, and says
    so in ``warnings``); ``on_run(traj)`` sees each run as soon as it is ready.  Large sets are parsed on
    every core in a process pool; ``processes`` forces it on or off (see :func:`use_processes`).

    With ``use_cache`` the runs are cached in segments (:mod:`basinmark.core.set_cache`): the segments whose
    files are unchanged (SHA-256 of the stored bytes) are read from the cache, the others from the files and
    written to the cache as soon as all their runs are in.  With no segment cached yet, files are not hashed
    up front: the reader hashes each as it reads it.
    """
    return open_plan(discover(path), progress=progress, use_cache=use_cache, workers=workers, cancel=cancel,
                     on_run=on_run, processes=processes)


def segment_groups(plan: SetPlan) -> list[list[int]]:
    """The plan's runs (indices in its order) cut into the cache's segments (see :func:`set_cache.segments`)."""
    total = len(plan.runs)
    if not total:
        return []
    return segments([s.run_id for s in plan.runs], segment_length(_stored_bytes(plan) / total))


def open_plan(plan: SetPlan, *, progress: Progress | None = None, use_cache: bool = True,
              workers: int | None = None, cancel: Callable[[], bool] | None = None,
              on_run: Callable[[Trajectory], None] | None = None, processes: bool | None = None,
              known_hashes: dict[Path, str] | None = None) -> TrajectorySet:
    """:func:`open_set` of a plan already found.

    ``known_hashes``: the stored-bytes SHA-256 of every file, already known (the quick check's record, see
    :mod:`basinmark.core.quick_open`): the files are then not hashed before the cached segments are read.
    The segment holding the
    plan's first run is read before the others and its runs reach ``on_run`` at once: the window shows the
    first run of its table without waiting for the rest of the set.
    """
    total = len(plan.runs)
    if progress:
        progress(0, total, None)
    root = plan.root.resolve()
    loaded: dict[str, Trajectory] = {}
    failed: dict[str, LoadFailure] = {}
    cache_notes: list[str] = []
    groups = [list(range(total))] if total else []
    folder = None
    hashes: dict[Path, str] = {}
    todo = groups
    done = 0
    cancelled = False

    def take(traj: Trajectory) -> None:
        loaded[traj.run_id] = traj
        if on_run and _single_frame(traj) is None:
            on_run(traj)

    if use_cache and total:
        folder = cache_folder(plan.root)
        groups = segment_groups(plan)
        todo = groups
        if known_hashes is not None or has_segments(folder):
            hashes = dict(known_hashes) if known_hashes is not None else hash_files(plan, workers)
            todo = []
            for group, hit in zip(groups, _load_segments(plan, groups, hashes, folder, root, cache_notes)):
                if hit is None:
                    todo.append(group)
                    continue
                runs_hit, failures_hit = hit
                for traj in runs_hit:
                    take(traj)
                failed.update(failures_hit)
                done += len(group)
                if progress:
                    progress(done, total, None)
                if cancel is not None and cancel():
                    cancelled = True
                    break
    if not cancelled and todo:
        specs = [plan.runs[i] for g in todo for i in g]
        group_of = {plan.runs[i].run_id: k for k, g in enumerate(todo) for i in g}
        waiting = [len(g) for g in todo]
        stored: dict[Path, str] = {}
        for spec, result, stored_now in _parsed(plan, specs, workers, cancel, processes):
            done += 1
            stored.update(stored_now)
            if isinstance(result, LoadFailure):
                failed[spec.run_id] = result
            else:
                take(result)
            if progress:
                progress(done, total, spec.run_id)
            k = group_of[spec.run_id]
            waiting[k] -= 1
            if folder is not None and waiting[k] == 0:
                _store_group(plan, todo[k], loaded, failed, stored, hashes, folder, root)
    runs = {s.run_id: loaded[s.run_id] for s in plan.runs if s.run_id in loaded}
    failures = list(plan.failures) + [failed[s.run_id] for s in plan.runs if s.run_id in failed]
    if folder is not None and done == total:
        prune(folder, keep={f"seg-{group_key(plan, g, hashes)}" for g in groups})
    tset = _finish(plan, runs, failures)
    tset.warnings.extend(cache_notes)
    if done < total:
        tset.warnings.append(f"loading was cancelled after {done} of {total} runs")
    if total == 0:
        tset.warnings.append(f"{plan.root}: no run files found (expected halves named like run-0001.bwd.xyz.gz and "
                             "run-0001.fwd.xyz.gz, run_1_backward.xyz and run_1_forward.xyz, or run1/bwd.xyz and "
                             "run1/fwd.xyz, or joined run-0001.xyz; basinmark-set.toml can name other patterns, "
                             "see docs/set-manifest.md)")
    return tset


def group_key(plan: SetPlan, group: list[int], hashes: dict[Path, str]) -> str:
    """Name of the cache segment of the runs ``group`` (indices into the plan) with these stored-bytes hashes."""
    return segment_key(plan.layout.fingerprint, [plan.runs[i] for i in group], hashes)


def _load_segments(plan: SetPlan, groups: list[list[int]], hashes: dict[Path, str], folder: Path, root: Path,
                   notes: list[str]) -> Iterator:
    """Each group's cached segment (or None), in order: the first alone (it holds the plan's first run, which
    the window shows first), then the others on every core (the checksums and the reading of the memory-mapped
    arrays release the GIL)."""
    def one(group):
        key = group_key(plan, group, hashes)
        hit = load_segment(folder, key, root, notes)
        if hit is None:
            return None
        runs, failures = hit
        ids = [t.run_id for t in runs] + [rid for rid, _ in failures]
        if sorted(ids) != sorted(plan.runs[i].run_id for i in group):  # the key names these runs: never expected
            return None
        return runs, failures

    if not groups:
        return
    yield one(groups[0])
    if len(groups) > 1:
        with ThreadPoolExecutor(max_workers=cores(), thread_name_prefix="basinmark-cache") as pool:
            yield from pool.map(one, groups[1:])


def _store_group(plan: SetPlan, group: list[int], loaded: dict, failed: dict, stored: dict[Path, str],
                 hashes: dict[Path, str], folder: Path, root: Path) -> None:
    """Write one segment whose runs are all in, keyed by the stored-bytes hashes of the very bytes parsed."""
    specs = [plan.runs[i] for i in group]
    for spec in specs:
        for p in spec.files:
            if p not in stored:  # a file whose reading failed: hashed here (or '' when unreadable)
                stored[p] = _safe_sha256(p) or ""
    key = segment_key(plan.layout.fingerprint, specs, stored)
    for p in (p for spec in specs for p in spec.files):
        hashes[p] = stored[p]  # what the segment was written under (pruning keeps it)
    store_segment(folder, key, [loaded[s.run_id] for s in specs if s.run_id in loaded],
                  [(s.run_id, failed[s.run_id]) for s in specs if s.run_id in failed], stored, root)
