"""Small trajectories and sets for the GUI tests, built from scratch (our own toy scenario).

The toy set: three carbons in a row-ish arrangement.  Atom 1 sits between
atoms 2 and 3; at the transition state both 1-2 and 1-3 are 2.1 Å.  Going
backward both stretch to 3.0 Å (the reactant); going forward one of them
shortens to 1.5 Å (product "left" for 1-2, "right" for 1-3), or both
stretch again (a recrossing), or nothing happens (unfinished).
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

import numpy as np
from ase.build import molecule

from basinmark.core.model import Trajectory

TOY_RULES = """\
name = "toyfork"
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

[flags]
late_commit_fs = 30.0
max_energy_drift = 1.0
energy_unit = "kcal/mol"
min_length_fs = 20.0
"""


def stretched_ethylene(n_frames: int = 41, dt: float = 2.5) -> Trajectory:
    """Ethylene (G2 geometry from ase) whose first hydrogen flies off over the run (t = 0 in the middle)."""
    base = molecule("C2H4")
    pos = np.repeat(base.positions[None], n_frames, axis=0).astype(np.float64)
    h = int(np.nonzero(base.numbers == 1)[0][0])
    c = 0 if np.linalg.norm(base.positions[h] - base.positions[0]) < 1.3 else 1
    direction = base.positions[h] - base.positions[c]
    direction /= np.linalg.norm(direction)
    stretch = np.linspace(0.0, 2.0, n_frames)
    pos[:, h] += stretch[:, None] * direction
    times = (np.arange(n_frames) - n_frames // 2) * dt
    epot = 0.01 * np.sin(times / 20.0)
    ekin = 0.3 - epot
    return Trajectory("ethylene-stretch", base.numbers, pos, times,
                      energies={"potential": epot, "kinetic": ekin})


def _toy_path(d_left: Sequence[float], d_right: Sequence[float]) -> np.ndarray:
    """Positions (F, 3, 3) with atom 1 at the origin, atom 2 on -x, atom 3 at 120 degrees."""
    d_left, d_right = np.asarray(d_left), np.asarray(d_right)
    f = len(d_left)
    pos = np.zeros((f, 3, 3))
    pos[:, 1, 0] = -d_left
    ang = np.deg2rad(60.0)
    pos[:, 2, 0] = d_right * np.cos(ang)
    pos[:, 2, 1] = d_right * np.sin(ang)
    return pos


def _half(end_left: float, end_right: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    s = np.linspace(0, 1, n)
    ramp = np.minimum(1.0, s * 2.0)  # reaches the end value half-way, then stays
    return 2.1 + (end_left - 2.1) * ramp, 2.1 + (end_right - 2.1) * ramp


def _write_half(path: Path, pos: np.ndarray, times: np.ndarray, epot: np.ndarray, ekin: np.ndarray) -> None:
    lines = []
    for k in range(len(times)):
        lines.append("3")
        lines.append(f"time={times[k]:.3f} epot={epot[k]:.8f} ekin={ekin[k]:.8f}")
        for sym, xyz in zip(("C", "C", "C"), pos[k]):
            lines.append(f"{sym} {xyz[0]:.6f} {xyz[1]:.6f} {xyz[2]:.6f}")
    path.write_text("\n".join(lines) + "\n")


#: forward end of each toy outcome: (d_left, d_right) at the end of the forward half
TOY_ENDS = {"left": (1.5, 3.0), "right": (3.0, 1.5), "recrossing": (3.0, 3.0), "unfinished": (2.1, 2.1)}


def make_toy_set(root: Path, outcomes: Sequence[str], n_half: int = 41, dt: float = 2.0,
                 drift_runs: Sequence[int] = ()) -> Path:
    """Write a toy set folder: one backward and one forward half per run, plus basins.toml.

    ``outcomes[i]`` is the designed outcome of run i+1 (a key of TOY_ENDS).  Runs whose
    index is in ``drift_runs`` get a total-energy drift of about 5 kcal/mol.
    """
    root.mkdir(parents=True, exist_ok=True)
    (root / "basins.toml").write_text(TOY_RULES)
    times = np.arange(n_half) * dt
    for i, outcome in enumerate(outcomes):
        run = f"toy-{i + 1:03d}"
        bl, br = _half(3.0, 3.0, n_half)
        fl, fr = _half(*TOY_ENDS[outcome], n_half)
        epot = 0.02 * np.cos(times / 15.0)
        ekin = 0.5 - epot
        if i in drift_runs:
            ekin = ekin + np.linspace(0, 0.22, n_half)  # ~5 kcal/mol
        _write_half(root / f"{run}.bwd.xyz", _toy_path(bl, br), times, epot, ekin)
        _write_half(root / f"{run}.fwd.xyz", _toy_path(fl, fr), times, epot, ekin)
    return root


def toy_trajectory(run_id: str, outcome: str, n_half: int = 41, dt: float = 2.0, drift: bool = False) -> Trajectory:
    """One joined toy run in memory (the same geometry make_toy_set writes to disk)."""
    import hashlib

    from basinmark.core.model import SourceFile

    bl, br = _half(3.0, 3.0, n_half)
    fl, fr = _half(*TOY_ENDS[outcome], n_half)
    back = _toy_path(bl, br)[::-1]
    fwd = _toy_path(fl, fr)[1:]
    pos = np.concatenate([back, fwd])
    times = np.concatenate([-np.arange(n_half)[::-1] * dt, np.arange(1, n_half) * dt])
    epot = 0.02 * np.cos(times / 15.0)
    ekin = 0.5 - epot
    if drift:
        ekin = ekin + np.abs(times) / times.max() * 0.22
    sha = hashlib.sha256(f"{run_id}:{outcome}".encode()).hexdigest()
    return Trajectory(run_id, [6, 6, 6], pos, times, energies={"potential": epot, "kinetic": ekin},
                      sources=(SourceFile(Path(f"{run_id}.xyz"), sha),))


def toy_set(root: Path, outcomes: Sequence[str], drift_runs: Sequence[int] = ()):
    """A TrajectorySet in memory rooted at ``root`` (basins.toml written there), runs toy-001..."""
    from basinmark.core.model import TrajectorySet

    root.mkdir(parents=True, exist_ok=True)
    (root / "basins.toml").write_text(TOY_RULES)
    runs = {}
    for i, outcome in enumerate(outcomes):
        rid = f"toy-{i + 1:03d}"
        runs[rid] = toy_trajectory(rid, outcome, drift=i in drift_runs)
    return TrajectorySet(root, runs, metadata={"name": "toyfork"})
