"""Movie export: a 300-frame animated GIF of a 30-atom run at 640x480.

Reference: the target of 15 s for the whole export (rendering, palette mapping, GIF writing);
the ratio printed is measured / target (below 1 meets it).  Also prints the time per frame and
the file size.  The run is synthetic (our own scenario: a 30-atom chain that flexes, with one end
group leaving), built in memory so the benchmark needs no data files.

    .venv/bin/python bench/bench_movie.py
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np  # noqa: E402

TARGET_S = 15.0
N_FRAMES, N_ATOMS, SIZE = 300, 30, (640, 480)


def synthetic_run():
    from basinmark.core.model import Trajectory

    rng = np.random.default_rng(7)
    k = np.arange(N_ATOMS)
    base = np.stack([1.3 * k, 0.6 * np.sin(k), 0.3 * np.cos(1.7 * k)], axis=1)
    times = (np.arange(N_FRAMES) - N_FRAMES // 2) * 1.0
    phase = np.linspace(0, 4 * np.pi, N_FRAMES)
    pos = np.repeat(base[None], N_FRAMES, axis=0)
    pos[:, :, 1] += 0.4 * np.sin(phase[:, None] + 0.3 * k[None])
    pos[:, -1, 0] += np.clip(times / 40.0, 0, None)          # the end group leaves after t = 0
    pos += rng.normal(0, 0.02, pos.shape)
    numbers = np.where(k % 3 == 2, 1, 6)
    epot = 0.05 * np.cos(phase)
    return Trajectory("bench-chain", numbers, pos, times, energies={"potential": epot, "kinetic": 1.0 - epot})


def main() -> None:
    from basinmark.core.classify import classify_run
    from basinmark.core.rules import parse_rules
    from basinmark.gui.app import make_app
    from basinmark.gui.movie import export_movie

    make_app(sys.argv[:1])
    traj = synthetic_run()
    rules = parse_rules("reactant = \"bound\"\ndwell_fs = 10\n[monitors]\nr_end = [29, 30]\n"
                        "[basins.bound]\nr_end = { below = 2.0 }\n[basins.gone]\nr_end = { above = 3.5 }\n",
                        source="bench rules")
    result = classify_run(traj, rules)
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "bench.gif"
        t0 = time.perf_counter()
        res = export_movie(out, traj, result=result, rules=rules, fps=20, size=SIZE)
        dt = time.perf_counter() - t0
        size_mb = out.stat().st_size / 1e6
    print(f"GIF: {res.n_frames} frames, {res.size[0]}x{res.size[1]}, {N_ATOMS} atoms, {size_mb:.1f} MB")
    print(f"export time:     {dt:8.2f} s  ({1000 * dt / N_FRAMES:.1f} ms per frame)")
    print(f"ratio to target: {dt / TARGET_S:8.2f}  (target {TARGET_S:g} s; below 1 meets it)")
    if res.note:
        print(f"note: {res.note}")


if __name__ == "__main__":
    main()
