"""Molecule view drawing speed, offscreen (QPainter, no OpenGL), at 900 x 700 px.

Targets: one frame <= 4 ms for 30 atoms, <= 12 ms for 300 atoms, <= 40 ms for
3,000 atoms; scrubbing (time cursor moved -> frame drawn) <= 16 ms for 30 atoms;
switching to another loaded run <= 50 ms.  The reference for each is the target
itself (a frame budget: 16 ms is one refresh at 60 Hz).

    .venv/bin/python bench/bench_gui_draw.py
"""

from __future__ import annotations

import os
import statistics
import time

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import numpy as np  # noqa: E402
from PySide6.QtGui import QImage, QPainter  # noqa: E402
from PySide6.QtWidgets import QApplication  # noqa: E402

from basinmark.core.model import Trajectory  # noqa: E402
from basinmark.gui.molecule_view import MoleculeView  # noqa: E402

W, H = 900, 700


def molecule(n_atoms: int, n_frames: int = 60, seed: int = 0) -> Trajectory:
    """A compact random cluster of C/H/O at a realistic density (about one atom per 10 Å^3)."""
    rng = np.random.default_rng(seed)
    side = (10.0 * n_atoms) ** (1 / 3)
    base = rng.uniform(0, side, size=(n_atoms, 3))
    numbers = rng.choice([1, 6, 8], size=n_atoms, p=[0.5, 0.4, 0.1])
    wobble = rng.normal(scale=0.02, size=(n_frames, n_atoms, 3)).cumsum(axis=0)
    return Trajectory(f"bench-{n_atoms}", numbers, base + wobble, np.arange(n_frames) - n_frames // 2)


def time_ms(fn, repeat: int = 30) -> float:
    fn()  # warm (sprites, caches)
    samples = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        samples.append((time.perf_counter() - t0) * 1000)
    return statistics.median(samples)


def main() -> None:
    app = QApplication.instance() or QApplication([])
    view = MoleculeView()
    view.resize(W, H)
    image = QImage(W, H, QImage.Format.Format_ARGB32_Premultiplied)
    targets = {30: 4.0, 300: 12.0, 3000: 40.0}
    for n, target in targets.items():
        traj = molecule(n)
        view.set_trajectory(traj)
        frame = iter(range(10**9))

        def draw():
            view.set_frame(next(frame) % traj.n_frames)
            p = QPainter(image)
            view.paint_scene(p, W, H)
            p.end()

        ms = time_ms(draw, repeat=30 if n < 3000 else 10)
        print(f"draw one frame, {n:5d} atoms: {ms:6.2f} ms (median; target <= {target:g} ms) "
              f"-> {target / ms:.1f}x within budget" if ms <= target else
              f"draw one frame, {n:5d} atoms: {ms:6.2f} ms (median; target <= {target:g} ms) -> OVER by "
              f"{ms / target:.1f}x")
    # scrubbing: a cursor move sets a frame and the widget repaints synchronously
    traj = molecule(30, n_frames=400)
    view.set_trajectory(traj)
    frames = iter(range(10**9))

    def paint():
        p = QPainter(image)
        view.paint_scene(p, W, H)
        p.end()

    def scrub():
        view.set_frame(next(frames) % traj.n_frames)
        paint()

    ms = time_ms(scrub, repeat=60)
    print(f"scrub (set frame + draw), 30 atoms: {ms:6.2f} ms (median; target <= 16 ms)")
    other = [molecule(30, n_frames=1000, seed=s) for s in range(6)]
    runs = iter(range(10**9))

    def switch():
        view.set_trajectory(other[next(runs) % len(other)])
        paint()

    ms = time_ms(switch, repeat=30)
    print(f"switch to another loaded run (molecule view), 30 atoms x 1000 frames: {ms:6.2f} ms "
          f"(median; target <= 50 ms)")
    app.quit()


if __name__ == "__main__":
    main()
