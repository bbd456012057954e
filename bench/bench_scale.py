"""Opening large generated sets, each time against references measured in the same run.

Sets (synthetic coordinates made with numpy, not the demo dynamics; gzipped backward/forward halves):

* 2,000 runs of 12 atoms x 400 frames per half (always);
* 10,000 runs of 12 atoms x 400 frames (``--large``: about 1.4 GB of files; 30 minutes on a busy 2-core machine);
* 200 runs of 1,000 atoms x 400 frames (``--big-atoms``: about 6 GB of files).

For each set, every timing in a fresh process:

* reference A, "decompress + hash": zlib decompression + SHA-256 of every file, spread over the same cores
  (a process per core) -- the floor for reading the files at all;
* reference B, "ase loop": the obvious ``ase.io.read(path, index=":")`` per file in one process, timed on a
  few files and scaled up to all of them;
* cold open without the cache (``open_set(use_cache=False)``);
* first open, writing the cache (the cache folder removed before);
* reopen from the cache;
* ``basinmark summary SET`` with a label for every run in the journal (opening the set from the cache included;
  printed also as the time beyond opening the set from the cache in the same process, imports excluded).

Each is printed in seconds and as a ratio against both references; the cache's size on disk is printed
against the float32 coordinates it holds.  Targets (issue 14): cold open <= 1.5 x reference A; first open
<= 1.2 x cold open; cache <= 1.2 x the float32 coordinates; summary <= 1 s beyond opening the set.  The
machine's load average is printed with the numbers: on a shared machine they move with it.

    .venv/bin/python bench/bench_scale.py [--runs N] [--large] [--big-atoms] [--keep DIR] [--workers W]
"""

from __future__ import annotations

import argparse
import gzip
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

SMALL = ["C"] * 6 + ["H"] * 4 + ["O"] * 2  # 12 atoms of an invented framework
N_BODIES = 16  # distinct pre-compressed bodies; each file gets its own first frame (so its own hash)


def _frame_text(elements: list[str], pos: np.ndarray, t: float, e_pot: float) -> str:
    head = f"{len(elements)}\nProperties=species:S:1:pos:R:3 time={t:.2f} epot={e_pot:.5f} ekin=1.00000\n"
    return head + "".join(f"{el} {x:12.6f} {y:12.6f} {z:12.6f}\n" for el, (x, y, z) in zip(elements, pos))


def _body(rng: np.random.Generator, elements: list[str], start: np.ndarray, frames: int) -> str:
    walk = start + np.cumsum(rng.normal(0.0, 0.02, size=(frames, len(elements), 3)), axis=0)
    return "".join(_frame_text(elements, walk[i], float(i + 1), -0.01 * i) for i in range(frames - 1))


def generate(root: Path, runs: int, frames: int, atoms: int = 12, seed: int = 3) -> int:
    """Write ``runs`` pairs of gzipped halves under ``root/runs``; returns the bytes written.

    Each file is two gzip members (allowed by the format and read as one stream): a first frame
    of its own (the run's transition-state geometry) and one of a few shared pre-compressed bodies.
    """
    rng = np.random.default_rng(seed)
    elements = SMALL if atoms == 12 else (SMALL * (atoms // 12 + 1))[:atoms]
    base = rng.normal(0.0, 1.5 * max(1.0, (atoms / 12) ** (1 / 3)), size=(atoms, 3))
    n_bodies = N_BODIES if atoms <= 100 else 4
    bodies = [gzip.compress(_body(rng, elements, base, frames).encode(), compresslevel=6) for _ in range(n_bodies)]
    folder = root / "runs"
    folder.mkdir(parents=True)
    total = 0
    for i in range(runs):
        ts = base + rng.normal(0.0, 0.05, size=base.shape)
        first = gzip.compress(_frame_text(elements, ts, 0.0, 0.0).encode(), compresslevel=6)
        for half, k in (("bwd", 2 * i), ("fwd", 2 * i + 1)):
            data = first + bodies[k % n_bodies]
            (folder / f"run-{i + 1:05d}.{half}.xyz.gz").write_bytes(data)
            total += len(data)
    return total


REFERENCE = r"""
import gzip, hashlib, os, sys, time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

def work(paths):
    for p in paths:
        raw = Path(p).read_bytes()
        hashlib.sha256(gzip.decompress(raw)).hexdigest()
    return len(paths)

if __name__ == "__main__":
    files = sorted(str(p) for p in Path(sys.argv[1]).rglob("*.gz"))
    n = int(sys.argv[2])
    t0 = time.perf_counter()
    with ProcessPoolExecutor(n) as pool:
        sum(pool.map(work, [files[i::n] for i in range(n)]))
    print(time.perf_counter() - t0)
"""

ASE_LOOP = r"""
import sys, time
from pathlib import Path
import ase.io
files = sorted(Path(sys.argv[1]).rglob("*.gz"))
k = int(sys.argv[2])
step = max(1, len(files) // k)
subset = files[::step][:k]
t0 = time.perf_counter()
for p in subset:
    ase.io.read(p, index=":")
print((time.perf_counter() - t0) / len(subset) * len(files))
"""

OPEN = r"""
import sys, time
from basinmark.core.sets import open_set
t0 = time.perf_counter()
tset = open_set(sys.argv[1], use_cache=sys.argv[2] == "1", workers=int(sys.argv[3]) or None)
dt = time.perf_counter() - t0
coords = sum(t.positions.size * 4 for t in tset.runs.values())
print(dt, len(tset), len(tset.failures), coords)
"""

LABEL = r"""
import sys
from basinmark.core.journal import LabelJournal
from basinmark.core.sets import journal_path, open_set
tset = open_set(sys.argv[1])
path = journal_path(tset.root)
for p in (path, path.with_name(path.name + ".head"), path.with_name(path.name + ".lock")):
    p.unlink(missing_ok=True)
with LabelJournal.open(path, labeler="bench") as j:
    j.record_batch([{"run_id": rid, "label": ("amber", "teal")[i % 3 == 0], "content_hash": h}
                    for i, (rid, h) in enumerate(tset.content_hashes().items())], source="hand", labeler="bench")
"""

SUMMARY = r"""
import sys, time, io, contextlib
from basinmark.cli import build_parser, main
from basinmark.core.sets import open_set
build_parser()  # the command modules imported before the clock starts
t0 = time.perf_counter()
open_set(sys.argv[1])
t_open = time.perf_counter() - t0
t0 = time.perf_counter()
with contextlib.redirect_stdout(io.StringIO()):
    code = main(["summary", sys.argv[1], "--quiet", "--no-tst"])
print(time.perf_counter() - t0, t_open, code)
"""


def _child(code: str, *args: str) -> list[str]:
    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[1] / "src"))
    out = subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True, env=env)
    if out.returncode:
        raise SystemExit(out.stderr)
    return out.stdout.split()


def load() -> str:
    return " ".join(f"{x:.1f}" for x in os.getloadavg())


def cores() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:
        return os.cpu_count() or 1


def cache_bytes(root: Path) -> int:
    return sum(f.stat().st_size for f in (root / ".basinmark-cache").rglob("*") if f.is_file())


def bench_set(root: Path, runs: int, frames: int, atoms: int, workers: int, ase_files: int) -> None:
    if not (root / "runs").is_dir():
        t0 = time.perf_counter()
        size = generate(root, runs, frames, atoms)
        print(f"generated {runs} runs ({2 * runs} gzipped halves, {atoms} atoms x {frames} frames, "
              f"{size / 1e6:.0f} MB) in {time.perf_counter() - t0:.1f} s")
    # the journal goes with its head and lock files (a head left behind makes a new journal look cut short)
    for p in (root / ".basinmark-cache", root / "basinmark-labels.jsonl", root / "basinmark-labels.jsonl.head",
              root / "basinmark-labels.jsonl.lock"):
        shutil.rmtree(p, ignore_errors=True) if p.is_dir() else p.unlink(missing_ok=True)
    n = cores()
    print(f"--- {runs} runs x {atoms} atoms x {frames} frames per half; cores: {n}; load average {load()}")
    ref = float(_child(REFERENCE, str(root), str(n))[0])
    print(f"reference A, zlib decompression + SHA-256 over {n} processes: {ref:7.2f} s   load {load()}")
    ase_t = float(_child(ASE_LOOP, str(root), str(ase_files))[0])
    print(f"reference B, ase.io.read loop in one process ({ase_files} files timed, scaled): {ase_t:7.2f} s   "
          f"load {load()}")

    def line(name: str, t: float, extra: str = "") -> None:
        print(f"{name:<34} {t:7.2f} s = {t / ref:5.2f} x A, {t / ase_t:6.3f} x B{extra}   load {load()}")

    w = str(workers)
    cold, n_runs, fails, coords = _child(OPEN, str(root), "0", w)
    cold = float(cold)
    line(f"cold open, no cache ({n_runs} runs)", cold, " (target <= 1.5 x A)")
    first = float(_child(OPEN, str(root), "1", w)[0])
    line("first open, writing the cache", first, f", {first / cold:.2f} x cold open (target <= 1.2)")
    size = cache_bytes(root)
    print(f"cache on disk: {size / 1e6:.0f} MB = {size / int(coords):.3f} x the float32 coordinates "
          f"({int(coords) / 1e6:.0f} MB; target <= 1.2)")
    again = float(_child(OPEN, str(root), "1", w)[0])
    line("reopen from the cache", again)
    _child(LABEL, str(root))
    summ, t_open, _code = _child(SUMMARY, str(root))
    summ = float(summ)
    line("summary (labels of every run)", summ, f", {summ - float(t_open):.2f} s beyond opening the set from the "
         "cache in the same process (target <= 1 s)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=2000, help="runs of the always-run set (default 2000)")
    ap.add_argument("--frames", type=int, default=400)
    ap.add_argument("--large", action="store_true", help="also the 10,000-run set (1.4 GB of files; 30 minutes on a busy 2-core machine)")
    ap.add_argument("--big-atoms", action="store_true", help="also 200 runs of 1,000 atoms (about 6 GB of files)")
    ap.add_argument("--workers", type=int, default=0, help="loader workers (0: the loader's own choice)")
    ap.add_argument("--ase-files", type=int, default=4, help="files read by the ase loop (scaled to all)")
    ap.add_argument("--keep", metavar="DIR", help="generate the sets into DIR (kept) or reuse those already there")
    args = ap.parse_args()
    tmp = None
    base = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="basinmark-scale-"))
    tmp = None if args.keep else base
    cases = [(args.runs, 12)] + ([(10_000, 12)] if args.large else []) + ([(200, 1000)] if args.big_atoms else [])
    try:
        for runs, atoms in cases:
            root = base / f"set-{runs}x{atoms}"
            bench_set(root, runs, args.frames, atoms, args.workers, args.ase_files)
            if tmp:
                shutil.rmtree(root, ignore_errors=True)
    finally:
        if tmp:
            shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
