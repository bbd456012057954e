"""The map of all runs on a synthetic set of 1,000 runs x 1,000 frames, offscreen.

Measured: (1) building the map (both monitors over every frame, thinned paths, curves) and drawing it
once into a QImage (with many points the paths are a picture drawn in a worker thread: until it has come);
(2) moving the current-frame marker and drawing again; (3) a click's pick against the full-resolution paths;
(4) zooming in: the longest turn of the window's thread and the time until the new view is drawn.
``--curves`` draws curve items whatever the number of points (the way small maps are drawn).  Reference: the targets 300 ms (build and draw) and 16 ms (one frame, i.e.
60 frames a second); the printed ratio is measured / target (below 1 meets the target).

    QT_QPA_PLATFORM=offscreen .venv/bin/python bench/bench_map.py [--runs 1000] [--frames 1000]
"""

from __future__ import annotations

import argparse
import os
import statistics
import time

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np  # noqa: E402

TARGET_BUILD_MS = 300.0
TARGET_FRAME_MS = 16.0


def synthetic_set(n_runs: int, n_frames: int, seed: int = 7):
    """Three atoms whose two distances wander from 2.1 Å towards one of two ends (our own toy walk)."""
    from basinmark.core.model import SourceFile, Trajectory, TrajectorySet

    rng = np.random.default_rng(seed)
    half = n_frames // 2
    s = np.linspace(0.0, 1.0, n_frames - half)
    runs = {}
    for k in range(n_runs):
        end = rng.choice([(1.5, 3.0), (3.0, 1.5), (3.0, 3.0)])
        back = 2.1 + (3.0 - 2.1) * s[::-1][:half, None] * np.ones(2)
        fwd = 2.1 + (np.array(end) - 2.1) * s[:, None]
        d = np.concatenate([back, fwd]) + np.cumsum(rng.normal(0, 0.01, (n_frames, 2)), axis=0)
        pos = np.zeros((n_frames, 3, 3), dtype=np.float32)
        pos[:, 1, 0] = -d[:, 0]
        pos[:, 2, 0] = d[:, 1] * 0.5
        pos[:, 2, 1] = d[:, 1] * np.sqrt(3) / 2
        times = (np.arange(n_frames) - half) * 0.5
        rid = f"bench-{k:04d}"
        runs[rid] = Trajectory(rid, [6, 6, 6], pos, times, sources=(SourceFile(f"{rid}.xyz", f"{k:064x}"),))
    return TrajectorySet("bench", runs, metadata={"name": "bench"})


RULES = """\
reactant = "reactant"
dwell_fs = 10.0
[monitors]
d_left = [1, 2]
d_right = [1, 3]
[basins.reactant]
d_left = { above = 2.6 }
d_right = { above = 2.6 }
[basins.left]
d_left = { below = 1.75 }
d_right = { above = 2.3 }
[basins.right]
d_right = { below = 1.75 }
d_left = { above = 2.3 }
"""


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=1000)
    ap.add_argument("--frames", type=int, default=1000)
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--curves", action="store_true", help="curve items even for many points (no picture)")
    args = ap.parse_args()

    from PySide6.QtGui import QImage, QPainter
    from PySide6.QtWidgets import QApplication

    from basinmark.core.rules import parse_rules
    from basinmark.gui.map_view import MapCanvas, MapData, map_axes

    import pyqtgraph as pg

    app = QApplication.instance() or QApplication([])
    pg.setConfigOptions(antialias=True)  # as the application sets it (gui/app.py)
    rules = parse_rules(RULES)
    tset = synthetic_set(args.runs, args.frames)
    labels = {rid: ("left", "right", "recrossing")[i % 3] for i, rid in enumerate(tset.run_ids)}
    xa, ya = map_axes(rules)[:2]
    canvas = MapCanvas()
    if args.curves:
        canvas.PICTURE_FROM_POINTS = 10 ** 12
    canvas.resize(900, 700)
    canvas.show()
    app.processEvents()
    image = QImage(canvas.size(), QImage.Format.Format_ARGB32_Premultiplied)

    def draw() -> None:
        painter = QPainter(image)
        canvas.render(painter)
        painter.end()

    builds, measures = [], []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        data = MapData.build(tset, xa, ya)  # fresh: no cache
        t1 = time.perf_counter()
        canvas.set_data(data, labels, rules)
        canvas.set_current(tset.run_ids[0], 0)
        while not canvas.drawn():   # a picture drawn in the worker: wait for it
            app.processEvents()
        draw()
        t2 = time.perf_counter()
        measures.append((t1 - t0) * 1e3)
        builds.append((t2 - t0) * 1e3)
    frames = []
    for i in range(200):
        t0 = time.perf_counter()
        canvas.set_frame(i * 3 % args.frames)
        draw()
        frames.append((time.perf_counter() - t0) * 1e3)
    repaints = []
    for i in range(100):  # the on-screen path: the view's own paint event into its backing store
        t0 = time.perf_counter()
        canvas.set_frame(i * 7 % args.frames)
        canvas.viewport().repaint()
        repaints.append((time.perf_counter() - t0) * 1e3)
    picks = []
    for i in range(10):
        t0 = time.perf_counter()
        canvas.pick_at(2.0 + 0.05 * i, 2.4)
        picks.append((time.perf_counter() - t0) * 1e3)

    zooms, turns = [], []
    for i in range(5):   # zoom in and out: each step until the new view is drawn, and the longest turn meanwhile
        t0 = time.perf_counter()
        canvas.plot_item.vb.scaleBy((0.7, 0.7) if i % 2 == 0 else (1 / 0.7, 1 / 0.7))
        longest, last = 0.0, time.perf_counter()
        while True:
            app.processEvents()
            canvas.viewport().repaint()
            now = time.perf_counter()
            longest, last = max(longest, now - last), now
            if canvas.drawn() and now - t0 > 0.02:
                break
        zooms.append((time.perf_counter() - t0) * 1e3)
        turns.append(longest * 1e3)

    build, frame = statistics.median(builds), statistics.median(frames)
    points = int(data.x.size)
    drawn = sum(int(np.isfinite(groups_x).sum()) for groups_x in
                ([g.x for g in canvas.layer.groups] if canvas.layer is not None
                 else [c.getData()[0] for c in canvas.curves.values()]))
    how = "one picture drawn in a worker" if canvas.layer is not None else "curve items"
    print(f"map of {args.runs} runs x {args.frames} frames ({points:,} points, {drawn:,} drawn as {how}), "
          "900x700 offscreen")
    print(f"  measure both monitors : {statistics.median(measures):8.1f} ms (median of {args.repeat})")
    print(f"  build and draw        : {build:8.1f} ms   target {TARGET_BUILD_MS:.0f} ms   ratio {build / TARGET_BUILD_MS:.2f}")
    print(f"  new frame and draw    : {frame:8.2f} ms   target {TARGET_FRAME_MS:.0f} ms    ratio {frame / TARGET_FRAME_MS:.2f}"
          f"   (p90 {np.percentile(frames, 90):.2f} ms)")
    print(f"  new frame, repaint    : {statistics.median(repaints):8.2f} ms   (the window's own paint, same target)")
    print(f"  pick (full resolution): {statistics.median(picks):8.1f} ms")
    print(f"  zoom, new view drawn  : {statistics.median(zooms):8.1f} ms   target {TARGET_BUILD_MS:.0f} ms   ratio "
          f"{statistics.median(zooms) / TARGET_BUILD_MS:.2f}")
    print(f"  zoom, longest turn    : {max(turns):8.1f} ms   target 100 ms   ratio {max(turns) / 100:.2f}")
    canvas.close()


if __name__ == "__main__":
    main()
