"""Classifying 1,000 runs x 1,000 frames x 8 monitors with the arrays already in memory.

Target: under 0.5 s on one core.  Reference: a per-frame Python loop over
``ase.Atoms.get_distance`` computing the same monitors (timed on a subset and scaled
per frame), which our vectorised path must beat at least 100x.

    .venv/bin/python bench/bench_classify.py [--runs 1000 --frames 1000]
"""

from __future__ import annotations

import argparse
import os
import time

os.environ.setdefault("OMP_NUM_THREADS", "1")  # one core, as the target says
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import numpy as np  # noqa: E402
from ase import Atoms  # noqa: E402

from basinmark.core.classify import classify_set  # noqa: E402
from basinmark.core.model import Trajectory, TrajectorySet  # noqa: E402
from basinmark.core.rules import parse_rules  # noqa: E402

RULES = """
reactant = "reactant"
dwell_fs = 20.0
[monitors]
r_a = [1, 6]
r_b = [2, 9]
r_c = [4, 9]
r_d = [3, 7]
r_e = [5, 8]
r_f = [10, 11]
ang = [1, 2, 3]
dih = [1, 2, 3, 4]
[basins.reactant]
r_a = { above = 2.6 }
[basins.alpha]
r_a = { below = 1.75 }
r_b = { below = 1.75 }
r_c = { above = 2.3 }
[basins.beta]
r_a = { below = 1.75 }
r_c = { below = 1.75 }
r_b = { above = 2.3 }
"""


def synthetic_set(n_runs: int, n_frames: int, n_atoms: int = 12, seed: int = 0) -> TrajectorySet:
    rng = np.random.default_rng(seed)
    times = (np.arange(n_frames) - n_frames // 2) * 1.0
    runs = {}
    base = rng.normal(scale=1.5, size=(n_atoms, 3)).astype(np.float32)
    for r in range(n_runs):
        drift = rng.normal(scale=0.004, size=(n_frames, n_atoms, 3)).cumsum(axis=0).astype(np.float32)
        pos = base + drift
        runs[f"run-{r:05d}"] = Trajectory(f"run-{r:05d}", [6] * n_atoms, pos, times)
    return TrajectorySet(root=".", runs=runs)


def per_frame_reference(tset: TrajectorySet, rules, n_runs: int) -> float:
    """Seconds per frame for a plain loop: ase.Atoms per frame, get_distance/get_angle/get_dihedral."""
    mons = rules.monitor_indices()
    frames = 0
    t0 = time.perf_counter()
    for traj in list(tset)[:n_runs]:
        for f in range(traj.n_frames):
            atoms = Atoms(numbers=traj.numbers, positions=traj.positions[f])
            for idx in mons.values():
                if len(idx) == 2:
                    atoms.get_distance(*idx)
                elif len(idx) == 3:
                    atoms.get_angle(*idx)
                else:
                    atoms.get_dihedral(*idx)
            frames += 1
    return (time.perf_counter() - t0) / frames


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--runs", type=int, default=1000)
    ap.add_argument("--frames", type=int, default=1000)
    args = ap.parse_args()
    rules = parse_rules(RULES)
    tset = synthetic_set(args.runs, args.frames)
    best = min(_timed(lambda: classify_set(tset, rules)) for _ in range(3))
    n_frames = args.runs * args.frames
    per_frame_ref = per_frame_reference(tset, rules, n_runs=3)
    ref_total = per_frame_ref * n_frames
    print(f"classify_set: {args.runs} runs x {args.frames} frames x {len(rules.monitors)} monitors "
          f"in {best * 1000:.0f} ms (best of 3; target < 500 ms)")
    print(f"per-frame ase loop (3 runs timed, scaled): {ref_total:.1f} s for the same work")
    print(f"speed-up vs per-frame ase loop: {ref_total / best:.0f}x (target >= 100x)")


def _timed(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


if __name__ == "__main__":
    main()
