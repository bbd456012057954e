"""Classifying a generated set on a local Dask cluster against the single-process path on the same set.

Generates N gzipped half-pair runs (default 400 runs, 12 atoms x 400 frames per half, the synthetic set of
bench_scale.py) and times:

* reference: the single-process path, ``open_set(use_cache=False)`` on one thread, then ``classify_set``;
* Dask: ``classify_on_cluster`` on a running local cluster of W worker processes (one thread each), for each
  W asked for (default 1 and the machine's cores): listing the runs, checking the workers, reading, measuring
  and classifying every run on the workers, gathering the table.  The cluster's own start (once per W) is
  printed apart: it is paid once per cluster, not per set; so are the workers' first imports.

Printed per W: runs per second, runs per second per worker, and that per worker rate as a ratio against the
reference's runs per second (1.0: a worker does as much as the single process; below: Dask's overhead), and
the CPU time per run of workers and client together against the single process's, which a busy machine
changes less than the wall-clock rates.  The tables are checked to be equal.  The machine's load average is
printed with the numbers.

    .venv/bin/python bench/bench_dask.py [--runs N] [--frames F] [--workers 1,2] [--keep DIR]
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

from bench_scale import ELEMENTS, generate  # noqa: E402  the same synthetic set as the scale benchmark

RULES = """\
name = "bench"
reactant = "reactant"
dwell_fs = 10.0
[monitors]
r_a = [1, 6]
r_b = [2, 9]
r_c = [4, 11]
ang = [1, 2, 3]
[basins.reactant]
r_a = { above = 2.6 }
[basins.alpha]
r_a = { below = 2.0 }
r_b = { below = 2.0 }
[basins.beta]
r_a = { below = 2.0 }
r_b = { above = 2.3 }
[flags]
max_energy_drift = 5.0
"""


def _warm() -> None:
    import basinmark.core.run_task  # noqa: F401


def load() -> str:
    return "load average " + " ".join(f"{x:.1f}" for x in os.getloadavg())


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=400)
    ap.add_argument("--frames", type=int, default=400, help="frames per half")
    ap.add_argument("--workers", default=None, help="comma-separated worker counts (default 1 and the cores)")
    ap.add_argument("--keep", type=Path, help="write the set here and keep it")
    args = ap.parse_args()

    try:
        import distributed  # noqa: F401
    except ImportError:
        print("bench_dask: needs the optional extra 'cluster' (pip install 'basinmark[cluster]'); skipped")
        return
    import pandas as pd

    from basinmark.core.classify import classify_set
    from basinmark.core.dask_classify import _Connection, classify_on_cluster
    from basinmark.core.rules import parse_rules
    from basinmark.core.run_task import assemble_table
    from basinmark.core.sets import cores, open_set

    counts = [int(w) for w in args.workers.split(",")] if args.workers else sorted({1, cores()})
    work = args.keep or Path(tempfile.mkdtemp(prefix="bench-dask-"))
    root = work / "set"
    try:
        if not (root / "runs").is_dir():
            size = generate(root, args.runs, args.frames)
            print(f"generated {args.runs} runs ({len(ELEMENTS)} atoms x 2 x {args.frames} frames), "
                  f"{size / 1e6:.0f} MB gzipped")
        (root / "basins.toml").write_text(RULES, encoding="utf-8")
        rules = parse_rules(RULES)

        t0, c0 = time.perf_counter(), time.process_time()
        tset = open_set(root, use_cache=False, workers=1, processes=False)
        expected = classify_set(tset, rules)
        ref, ref_cpu = time.perf_counter() - t0, time.process_time() - c0
        n = len(expected)
        ref_rate = n / ref
        print(f"reference: single process, one thread: {ref:.2f} s = {ref_rate:.0f} runs/s, "
              f"CPU {1e3 * ref_cpu / n:.1f} ms per run ({load()})")
        print(f"  outcomes: {expected['outcome'].value_counts().to_dict()}")

        for w in counts:
            t0 = time.perf_counter()
            with _Connection(None, w, 10.0, True) as probe:  # the local cluster `classify --workers` starts
                probe.run(_warm)  # the workers import the readers once, as a long-running cluster has
                start = time.perf_counter() - t0
                before = sum(probe.run(time.process_time).values())
                t0, c0 = time.perf_counter(), time.process_time()
                got, parts = classify_on_cluster(root, rules, address=probe.scheduler.address)
                table = assemble_table(got, parts, rules)
                took, client_cpu = time.perf_counter() - t0, time.process_time() - c0
                cpu = sum(probe.run(time.process_time).values()) - before + client_cpu
            pd.testing.assert_frame_equal(table, expected, check_exact=True)
            rate = n / took
            print(f"Dask, {w} worker{'s' if w != 1 else ''}: {took:.2f} s = {rate:.0f} runs/s, "
                  f"{rate / w:.0f} runs/s per worker = {rate / w / ref_rate:.2f} x the single process per worker, "
                  f"{rate / ref_rate:.2f} x in all; CPU {1e3 * cpu / n:.1f} ms per run (workers and client) = "
                  f"{cpu / ref_cpu:.2f} x the single process's (cluster start {start:.1f} s, not counted; "
                  f"{load()}); same table")
    finally:
        if args.keep is None:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
