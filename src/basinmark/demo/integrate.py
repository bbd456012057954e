"""Velocity Verlet over many runs at once (numpy), with a per-run stop test.

Written here rather than driving ``ase.md`` run by run: the demo propagates hundreds of runs,
and one vectorised force call for all active runs per step is far faster than an ASE dynamics
object per run (measured on the demo surface, 12 atoms: ase 1.3 ms per step per run, this loop 1.3 ms per
step for 200 runs together, about 200 times less per run); ``ase.md.verlet.VelocityVerlet`` is the reference
the tests compare against.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from basinmark.demo.sampling import AMU_A2_FS2, kinetic_energy
from basinmark.demo.surface import Surface

#: stop(step_index, positions (R, N, 3), run_indices (R,)) -> bool array (R,): True = this run is done
StopTest = Callable[[int, np.ndarray, np.ndarray], np.ndarray]


@dataclass
class HalfRuns:
    """Saved frames of a batch of halves: lists indexed by run."""

    positions: list[np.ndarray]  # each (F, N, 3) Å
    times: list[np.ndarray]  # each (F,) fs elapsed (>= 0)
    potential: list[np.ndarray]  # each (F,) eV
    kinetic: list[np.ndarray]  # each (F,) eV
    velocities: list[np.ndarray] | None = None  # each (F, N, 3) Å/fs, in the direction of propagation


def velocity_verlet(surface: Surface, x0: np.ndarray, v0: np.ndarray, *, dt: float = 0.5,
                    max_time: float = 500.0, save_every: int = 8, stop: StopTest | None = None,
                    ) -> HalfRuns:
    """Propagate runs ``(R, N, 3)`` from ``x0, v0`` (Å, Å/fs) with a fixed step ``dt`` (fs).

    Frames are saved every ``save_every`` steps, starting with t = 0.  ``stop`` is asked at each
    saved frame; a run it marks as done is saved at that frame and then left alone.
    """
    x = np.array(x0, float)
    v = np.array(v0, float)
    runs = x.shape[0]
    masses = surface.masses
    inv_m = 1.0 / (masses[None, :, None] * AMU_A2_FS2)  # (eV/Å) -> Å/fs^2
    e, f = surface.energy_forces(x)
    active = np.arange(runs)
    saved: list[list] = [[] for _ in range(runs)]
    n_steps = int(round(max_time / dt))

    def save(step: int) -> None:
        ek = kinetic_energy(v, masses)
        for k, r in enumerate(active):
            saved[r].append((step * dt, x[k].copy(), e[k], ek[k], v[k].copy()))

    save(0)
    for step in range(1, n_steps + 1):
        if active.size == 0:
            break
        v += 0.5 * dt * f * inv_m
        x += dt * v
        e, f = surface.energy_forces(x)
        v += 0.5 * dt * f * inv_m
        if step % save_every == 0 or step == n_steps:
            save(step)
            if stop is not None:
                done = np.asarray(stop(step, x, active), dtype=bool)
                if done.any():
                    keep = ~done
                    x, v, e, f, active = x[keep], v[keep], e[keep], f[keep], active[keep]
    return HalfRuns(
        positions=[np.array([s[1] for s in fr]) for fr in saved],
        times=[np.array([s[0] for s in fr]) for fr in saved],
        potential=[np.array([s[2] for s in fr]) for fr in saved],
        kinetic=[np.array([s[3] for s in fr]) for fr in saved],
        velocities=[np.array([s[4] for s in fr]) for fr in saved],
    )
