"""Cold open of a large generated set against decompressing and hashing the same files on the same cores.

Generates N gzipped half-pair runs (default 2,000 runs, 12 atoms x 400 frames per half; synthetic
coordinates made with numpy, not the demo dynamics) and times, each in a fresh process:

* reference: zlib decompression + SHA-256 of every file, spread over the same cores (a process per core);
* cold open without the cache (``open_set(use_cache=False)``);
* first open, writing the cache;
* reopen from the cache.

Each time is printed as a ratio against the reference measured in the same run.  Target (issue 14):
cold open <= 1.5 x the reference.  The machine's load average is printed with the numbers: on a shared
machine they move with it.

    .venv/bin/python bench/bench_scale.py [--runs N] [--frames F] [--workers W] [--keep DIR]
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

ELEMENTS = ["C"] * 6 + ["H"] * 4 + ["O"] * 2  # 12 atoms of an invented framework
N_BODIES = 16  # distinct pre-compressed bodies; each file gets its own first frame (so its own hash)


def _frame_text(pos: np.ndarray, t: float, e_pot: float) -> str:
    head = f"{len(ELEMENTS)}\nProperties=species:S:1:pos:R:3 time={t:.2f} epot={e_pot:.5f} ekin=1.00000\n"
    return head + "".join(f"{el} {x:12.6f} {y:12.6f} {z:12.6f}\n" for el, (x, y, z) in zip(ELEMENTS, pos))


def _body(rng: np.random.Generator, start: np.ndarray, frames: int, step: float) -> str:
    walk = start + np.cumsum(rng.normal(0.0, 0.02, size=(frames, len(ELEMENTS), 3)), axis=0)
    return "".join(_frame_text(walk[i], step * (i + 1), -0.01 * i) for i in range(frames - 1))


def generate(root: Path, runs: int, frames: int, seed: int = 3) -> int:
    """Write ``runs`` pairs of gzipped halves under ``root/runs``; returns the bytes written.

    Each file is two gzip members (allowed by the format and read as one stream): a first frame
    of its own (the run's transition-state geometry) and one of a few shared pre-compressed bodies.
    """
    rng = np.random.default_rng(seed)
    base = rng.normal(0.0, 1.5, size=(len(ELEMENTS), 3))
    bodies = [gzip.compress(_body(rng, base, frames, 1.0).encode(), compresslevel=6) for _ in range(N_BODIES)]
    folder = root / "runs"
    folder.mkdir(parents=True)
    total = 0
    for i in range(runs):
        ts = base + rng.normal(0.0, 0.05, size=base.shape)
        first = gzip.compress(_frame_text(ts, 0.0, 0.0).encode(), compresslevel=6)
        for half, k in (("bwd", 2 * i), ("fwd", 2 * i + 1)):
            data = first + bodies[k % N_BODIES]
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

OPEN = r"""
import sys, time
from basinmark.core.sets import open_set
t0 = time.perf_counter()
tset = open_set(sys.argv[1], use_cache=sys.argv[2] == "1", workers=int(sys.argv[3]) or None)
print(time.perf_counter() - t0, len(tset), len(tset.failures))
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


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=2000)
    ap.add_argument("--frames", type=int, default=400)
    ap.add_argument("--workers", type=int, default=0, help="loader workers (0: the loader's own choice)")
    ap.add_argument("--keep", metavar="DIR", help="generate into DIR (kept) or reuse the set already there")
    ap.add_argument("--skip-first-open", action="store_true", help="only the reference and the cold open")
    args = ap.parse_args()
    tmp = None
    if args.keep:
        root = Path(args.keep)
    else:
        tmp = tempfile.mkdtemp(prefix="basinmark-scale-")
        root = Path(tmp) / "scale-set"
    try:
        if not (root / "runs").is_dir():
            t0 = time.perf_counter()
            size = generate(root, args.runs, args.frames)
            print(f"generated {args.runs} runs ({2 * args.runs} gzipped halves, {len(ELEMENTS)} atoms x "
                  f"{args.frames} frames, {size / 1e6:.0f} MB) in {time.perf_counter() - t0:.1f} s")
        shutil.rmtree(root / ".basinmark-cache", ignore_errors=True)
        n = cores()
        print(f"cores: {n}; load average at start: {load()}")
        ref = float(_child(REFERENCE, str(root), str(n))[0])
        print(f"reference (zlib decompression + SHA-256 over {n} processes): {ref:6.2f} s   load {load()}")
        w = str(args.workers)
        cold, runs, fails = _child(OPEN, str(root), "0", w)
        print(f"cold open, no cache ({runs} runs, {fails} failed): {float(cold):6.2f} s = "
              f"{float(cold) / ref:.2f} x reference (target <= 1.5)   load {load()}")
        if not args.skip_first_open:
            first = float(_child(OPEN, str(root), "1", w)[0])
            print(f"first open, writing the cache:      {first:6.2f} s = {first / ref:.2f} x reference, "
                  f"{first / float(cold):.2f} x cold open (target <= 1.2)   load {load()}")
            again = float(_child(OPEN, str(root), "1", w)[0])
            print(f"reopen from the cache:              {again:6.2f} s = {again / ref:.2f} x reference   "
                  f"load {load()}")
    finally:
        if tmp:
            shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
