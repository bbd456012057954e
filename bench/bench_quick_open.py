"""How soon a cached set's first run is ready after a quick open (sizes and times checked, no hashing first).

The set is :mod:`bench_scale`'s (gzipped halves of 12 atoms x 400 frames, 2,000 runs unless ``--runs``); it is
opened once to write the cache and checked once to write the quick-check record, then every timing is in a
fresh process (imports excluded):

* quick open: time until ``on_run`` gets the set's first run (the first row of the run table), split into
  finding the runs (the record read and its plan checked against the folder's names, or ``discover`` when the
  folder changed), the ``stat`` check, and reading the first segment; then the time until every run is in;
* reference: an ordinary reopen from the cache (``open_set``, which hashes every file before reading a
  segment), time to its first run and to the end, in the same run.

Target (issue 14): first run <= 0.5 s at 10,000 runs.  What grows with the set before the first run is shown
(discover, record, stat: a few per file) is printed per 1,000 files, so that a 10,000-run figure can be
estimated from a smaller set; the estimate is printed as such, never as a measurement.

    .venv/bin/python bench/bench_quick_open.py [--runs N] [--keep DIR] [--repeat K]
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from bench_scale import _child, generate, load  # noqa: E402  (the same generated set as the scale benchmark)

PREPARE = r"""
import sys
from basinmark.core.quick_open import full_check
from basinmark.core.sets import open_set
open_set(sys.argv[1])
found = full_check(sys.argv[1])
assert found.recorded, "the quick-check record was not written"
"""

QUICK = r"""
import sys, time
from basinmark.core import quick_open as q
from basinmark.core import sets
first = []
marks = {}
real_discover, real_recorded, real_stats, real_open = q.discover, q._recorded_plan, q.file_stats, q.open_plan
used = {"record": 0}
def discover(path):
    out = real_discover(path); marks["discover"] = time.perf_counter(); used["record"] = 0; return out
def recorded_plan(*a):
    out = real_recorded(*a); marks["discover"] = time.perf_counter(); used["record"] = int(out is not None)
    return out
def file_stats(*a):
    out = real_stats(*a); marks["stat"] = time.perf_counter(); return out
def open_plan(plan, **kw):
    marks["segments"] = time.perf_counter(); return real_open(plan, **kw)
q.discover, q._recorded_plan, q.file_stats, q.open_plan = discover, recorded_plan, file_stats, open_plan
def on_run(t):
    if not first:
        first.append((time.perf_counter(), t.run_id))
t0 = time.perf_counter()
res = q.quick_open(sys.argv[1], on_run=on_run)
t1 = time.perf_counter()
assert res is not None, "no quick open"
plan_first = res.plan.runs[0].run_id
print(first[0][0] - t0, t1 - t0, marks["discover"] - t0, marks["stat"] - marks["discover"],
      marks["segments"] - marks["stat"], first[0][0] - marks["segments"], int(first[0][1] == plan_first),
      len(res.tset), len(res.plan.runs) * 2, used["record"])
"""

REOPEN = r"""
import sys, time
from basinmark.core.sets import open_set
first = []
def on_run(t):
    if not first:
        first.append(time.perf_counter())
t0 = time.perf_counter()
tset = open_set(sys.argv[1], on_run=on_run)
print(first[0] - t0, time.perf_counter() - t0)
"""


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=2000)
    ap.add_argument("--frames", type=int, default=400)
    ap.add_argument("--repeat", type=int, default=3, help="timed quick opens (the best and the worst printed)")
    ap.add_argument("--keep", metavar="DIR", help="generate the set into DIR (kept) or reuse the one there")
    args = ap.parse_args()
    base = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="basinmark-quick-"))
    root = base / f"set-{args.runs}x12"
    try:
        if not (root / "runs").is_dir():
            t0 = time.perf_counter()
            size = generate(root, args.runs, args.frames)
            print(f"generated {args.runs} runs ({size / 1e6:.0f} MB) in {time.perf_counter() - t0:.1f} s")
        t0 = time.perf_counter()
        _child(PREPARE, str(root))
        print(f"cache and record ready in {time.perf_counter() - t0:.1f} s   load {load()}")
        rows = [[float(x) for x in _child(QUICK, str(root))] for _ in range(args.repeat)]
        ref = [[float(x) for x in _child(REOPEN, str(root))] for _ in range(2)]
        rows.sort()
        best, worst = rows[0], rows[-1]
        first_ref = min(r[0] for r in ref)
        files = int(best[8])
        print(f"--- {args.runs} runs ({files} files), {int(best[7])} in the set; first run is the table's first: "
              f"{bool(best[6])}; runs taken from the record's plan (no pairing of names): {bool(best[9])}")
        for name, r in (("best", best), ("worst", worst)):
            print(f"quick open ({name} of {len(rows)}): first run {r[0]:.3f} s = {r[0] / first_ref:.3f} x the "
                  f"ordinary reopen's first run; all runs {r[1]:.2f} s  [finding the runs {r[2]:.3f}, stat "
                  f"{r[3]:.3f}, segment names {r[4]:.3f}, first segment {r[5]:.3f}]")
        print(f"reference, ordinary reopen (hashes every file first): first run {first_ref:.2f} s, all runs "
              f"{min(r[1] for r in ref):.2f} s   load {load()}")
        print(f"median first run {rows[len(rows) // 2][0]:.3f} s (target <= 0.5 s at 10,000 runs)")
        if args.runs != 10_000:
            per_file = (best[2] + best[3] + best[4]) / files
            est = per_file * 20_000 + best[5]
            print(f"estimate for 10,000 runs (20,000 files; not measured): {per_file * 1e3 * 1000:.1f} ms per 1,000 "
                  f"files before the first segment, + the first segment {best[5]:.3f} s = {est:.2f} s")
    finally:
        if not args.keep:
            shutil.rmtree(base, ignore_errors=True)


if __name__ == "__main__":
    main()
