"""Opening the bundled sample set cold (no cache) and again from the cache; peak memory.

Reference: the cold open of the same set in the same process.  Target: the cached
open is at least 10x faster than the cold open, and peak resident memory while
loading stays below 2x the float32 size of the set's coordinates plus a fixed
overhead (the interpreter and libraries, measured before loading).

    .venv/bin/python bench/bench_set_open.py [SET]
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_SET = ROOT / "sample_sets" / "ringfork"

CHILD = r"""
import resource, sys, time
import numpy as np, pandas, ase  # the fixed overhead: interpreter + libraries
from basinmark.core.sets import open_set
import basinmark.core.io
base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
t0 = time.perf_counter()
tset = open_set(sys.argv[1], use_cache=sys.argv[2] == "1")
dt = time.perf_counter() - t0
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
coords = sum(t.positions.nbytes for t in tset)
print(dt, base * 1024, peak * 1024, coords, len(tset), len(tset.failures))
"""


def run(set_dir: Path, cache: bool):
    out = subprocess.run([sys.executable, "-c", CHILD, str(set_dir), "1" if cache else "0"],
                         capture_output=True, text=True, check=True).stdout.split()
    dt, base, peak, coords, n, nfail = (float(x) for x in out)
    return dt, base, peak, coords, int(n), int(nfail)


def main() -> None:
    src = Path(sys.argv[1]) if len(sys.argv) > 1 else DEFAULT_SET
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp) / src.name
        shutil.copytree(src, work, ignore=shutil.ignore_patterns(".basinmark-cache"))
        cold = [run(work, cache=False) for _ in range(3)]
        run(work, cache=True)  # fills the cache
        warm = [run(work, cache=True) for _ in range(3)]
    dt_cold = min(c[0] for c in cold)
    dt_warm = min(w[0] for w in warm)
    _, base, peak, coords, n, nfail = cold[0]
    print(f"set: {src.name}, {n} runs loaded, {nfail} failures, coordinates {coords / 1e6:.2f} MB as float32")
    print(f"cold open (no cache):  {dt_cold * 1000:8.1f} ms  (best of 3)")
    print(f"open from cache:       {dt_warm * 1000:8.1f} ms  (best of 3)")
    print(f"cache / cold speed-up: {dt_cold / dt_warm:.1f}x  (target >= 10x)")
    extra = peak - base
    print(f"peak RSS growth while loading: {extra / 1e6:.1f} MB = {extra / coords:.2f}x the float32 coordinates "
          f"(interpreter and libraries before loading: {base / 1e6:.0f} MB)")
    # memory per coordinate byte, free of the fixed part: the same runs four times over (hard links, new run
    # ids) against once; the slope must stay below 2 (positions stored once; times and energies add ~0.2)
    with tempfile.TemporaryDirectory() as tmp:
        big = Path(tmp) / "x4"
        (big / "runs").mkdir(parents=True)
        files = sorted(p for p in src.rglob("*") if p.is_file() and (".bwd." in p.name or ".fwd." in p.name))
        for k in range(4):
            for f in files:
                os.link(f, big / "runs" / f"k{k}-{f.name}")
        _, base4, peak4, coords4, n4, _ = run(big, cache=False)
    slope = ((peak4 - base4) - extra) / (coords4 - coords)
    fixed = extra - slope * coords
    print(f"memory model from {n} and {n4} runs: peak growth = {slope:.2f} x coordinates + {fixed / 1e6:.1f} MB "
          f"(target: < 2x coordinates + a fixed overhead)")


if __name__ == "__main__":
    main()
