"""Starting conditions per run: where its atoms were and how they moved at the transition state (t = 0).

:func:`starting_conditions` gives, for every run of a set, its t = 0 geometry and atom velocities (from the
file's velocity or momentum column, else estimated from the frames next to t = 0: see
:mod:`basinmark.core.origins_velocities`), expressed as *coordinates* a person can read:

* every monitor of the rules at t = 0 and its rate of change (the directional derivative of the monitor along
  the atom velocities, d/dh m(x + h·v) at h = 0, by a symmetric difference with h = 1e-3 fs: exact to O(h²)
  for distances, angles and dihedrals alike);
* with the transition state's normal modes (:meth:`StartingConditions.with_modes`), each run's
  mass-weighted displacement, velocity, energy and phase along every mode.

It also checks that the runs were started at one transition state: every t = 0 geometry is aligned onto the
set's mean t = 0 geometry (translation and rotation, ase's ``minimize_rotation_and_translation``) and its
RMSD measured; a run farther than :data:`SAME_TS_RMSD` is named in a warning.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Mapping, Sequence

import numpy as np
import pandas as pd

from basinmark.core.errors import BasinmarkError
from basinmark.core.geometry import measure
from basinmark.core.origins_velocities import ESTIMATED, TSState, ts_state

#: t = 0 geometries farther than this from the set's mean (Å RMSD after alignment) were not started at the same
#: transition state.  Quasiclassical zero-point and thermal displacements at a saddle point of a small organic
#: molecule stay near 0.1-0.2 Å RMSD (the bundled demo set: at most 0.15 Å); 0.5 Å is well beyond that and
#: well below the change between two different transition states (common practice, no source).
SAME_TS_RMSD = 0.5

#: step along the velocities for the monitors' rates, fs (symmetric difference; our own choice: 1e-3 fs moves
#: atoms by ~1e-5 Å at thermal speeds, where float64 rounding is still ~1e-11)
RATE_STEP_FS = 1e-3

UNIT_WORDS = {2: "angstrom", 3: "deg", 4: "deg"}


class OriginsError(BasinmarkError):
    """The starting conditions or the analysis of outcomes cannot be made as asked."""


@dataclass(frozen=True)
class Coordinate:
    """One starting coordinate: its column in the table and how a sentence names it."""

    column: str
    phrase: str  # "the rate of change of r_a at t = 0"
    group: str  # what it belongs to: a monitor name or "mode 7"
    kind: str  # value, rate, displacement, velocity, energy, phase
    circular: bool = False  # an angle that wraps (dihedral, phase): in degrees


@dataclass
class StartingConditions:
    """The starting conditions of the runs of a set, one row per run in :attr:`table`."""

    run_ids: list[str]
    numbers: np.ndarray  # (N,)
    positions: np.ndarray  # (R, N, 3) Å at t = 0
    velocities: np.ndarray  # (R, N, 3) Å/fs at t = 0
    sources: list[str]  # per run: where its velocities came from
    table: pd.DataFrame  # run, velocity_source, ts_rmsd [angstrom], then one column per coordinate
    coordinates: list[Coordinate]
    rmsd: np.ndarray  # (R,) Å, after alignment onto a typical run's t = 0 geometry
    warnings: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)

    @property
    def estimated(self) -> list[str]:
        """Runs whose velocities were estimated from frames rather than read."""
        return [r for r, s in zip(self.run_ids, self.sources) if s in ESTIMATED]

    def coordinate(self, column: str) -> Coordinate:
        for c in self.coordinates:
            if c.column == column:
                return c
        raise KeyError(column)

    def with_modes(self, modes, project: Callable | None = None) -> "StartingConditions":
        """A copy with each run's displacement, velocity, energy and phase along every normal mode added."""
        from basinmark.core.origins_modes import mode_coordinates

        cols, coords, warns = mode_coordinates(modes, self.positions, self.velocities, self.run_ids, project)
        # one concatenation (a column at a time fragments the frame: ~150 columns with a mode file)
        table = pd.concat([self.table.drop(columns=[c for c in cols.columns if c in self.table]),
                           cols.set_axis(self.table.index)], axis=1)
        return StartingConditions(self.run_ids, self.numbers, self.positions, self.velocities, self.sources,
                                  table, self.coordinates + coords, self.rmsd, list(self.warnings) + warns,
                                  list(self.notes))


# --- the transition-state check ---------------------------------------------------------------------------

def aligned_onto(positions: np.ndarray, target: np.ndarray) -> np.ndarray:
    """Each geometry of ``positions`` ``(R, N, 3)`` moved onto ``target`` ``(N, 3)``: rotated about its centroid by
    the rotation of least RMSD and put on the target's centroid.

    The quaternion method of ase's ``minimize_rotation_and_translation`` (Melander et al., J. Chem. Theory Comput.
    2015, 11, 1055), done for every geometry at once; tests/test_origins_start.py holds it to ase's own, geometry by
    geometry.  Written out because ase aligns one pair per call: 10,000 calls, each a small LAPACK call that lets go
    of Python's lock and takes it straight back, kept the window's thread waiting 170-470 ms at a time (measured)
    and took seconds; here the work is a few array operations (one batched eigen-decomposition)."""
    p = np.asarray(positions, dtype=np.float64)
    p = p - p.mean(axis=1, keepdims=True)
    t = np.asarray(target, dtype=np.float64)
    c0 = t.mean(axis=0)
    t = t - c0
    r = np.einsum("kni,nj->kij", p, t)   # r[k, i, j] = sum over atoms of p_i t_j (ase's R_ij)
    r11, r12, r13 = r[:, 0, 0], r[:, 0, 1], r[:, 0, 2]
    r21, r22, r23 = r[:, 1, 0], r[:, 1, 1], r[:, 1, 2]
    r31, r32, r33 = r[:, 2, 0], r[:, 2, 1], r[:, 2, 2]
    f = np.stack([
        np.stack([r11 + r22 + r33, r23 - r32, r31 - r13, r12 - r21], axis=-1),
        np.stack([r23 - r32, r11 - r22 - r33, r12 + r21, r13 + r31], axis=-1),
        np.stack([r31 - r13, r12 + r21, -r11 + r22 - r33, r23 + r32], axis=-1),
        np.stack([r12 - r21, r13 + r31, r23 + r32, -r11 - r22 + r33], axis=-1),
    ], axis=1)
    w, v = np.linalg.eigh(f)
    q = np.take_along_axis(v, np.argmax(w, axis=1)[:, None, None], axis=2)[:, :, 0]   # most positive eigenvalue's
    q0, q1, q2, q3 = q[:, 0], q[:, 1], q[:, 2], q[:, 3]
    rot = np.stack([
        np.stack([q0**2 + q1**2 - q2**2 - q3**2, 2 * (q1 * q2 - q0 * q3), 2 * (q1 * q3 + q0 * q2)], axis=-1),
        np.stack([2 * (q1 * q2 + q0 * q3), q0**2 - q1**2 + q2**2 - q3**2, 2 * (q2 * q3 - q0 * q1)], axis=-1),
        np.stack([2 * (q1 * q3 - q0 * q2), 2 * (q2 * q3 + q0 * q1), q0**2 - q1**2 - q2**2 + q3**2], axis=-1),
    ], axis=1)
    return np.einsum("knj,kij->kni", p, rot) + c0


def aligned_rmsd(positions: np.ndarray, reference: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """RMSD (Å) of each geometry ``(R, N, 3)`` from ``reference`` after the best translation and rotation, and
    the reference used.

    The default reference is one of the runs: the one nearest the per-atom median of all geometries (aligned
    onto the first run).  A real run rather than a mean: runs started at two transition states would put a mean
    halfway between them, within the limit of both, whereas from one run of either group the other group is the
    whole distance away."""
    positions = np.asarray(positions, dtype=np.float64)

    def rmsd_to(moved: np.ndarray, target: np.ndarray) -> np.ndarray:
        return np.sqrt(np.mean(np.sum((moved - target) ** 2, axis=-1), axis=1))

    if reference is None:
        first = aligned_onto(positions, positions[0])
        middle = np.median(first, axis=0)
        reference = positions[int(np.argmin(rmsd_to(first, middle)))]
    reference = np.asarray(reference, dtype=np.float64)
    moved = aligned_onto(positions, reference)
    # moved onto the reference's centroid (as ase does), so the difference is taken as it stands
    return rmsd_to(moved, reference), reference


def one_ts_warning(run_ids: Sequence[str], rmsd: np.ndarray, limit: float = SAME_TS_RMSD) -> str | None:
    far = [r for r, d in zip(run_ids, rmsd) if d > limit]
    if not far:
        return None
    shown = ", ".join(far[:8]) + (f" and {len(far) - 8} more" if len(far) > 8 else "")
    return (f"The runs were not all started at one transition state: {len(far)} of {len(run_ids)} t = 0 "
            f"geometries differ from a typical run's by more than {limit:g} Å RMSD after alignment (largest "
            f"{float(np.max(rmsd)):.2f} Å: {shown}). Starting conditions of different transition states are not "
            "comparable; analyse each transition state's runs as a set of its own.")


# --- monitors at t = 0 --------------------------------------------------------------------------------------

def _wrap_deg(d: np.ndarray) -> np.ndarray:
    return (d + 180.0) % 360.0 - 180.0


def monitor_coordinates(positions: np.ndarray, velocities: np.ndarray, monitors: Mapping[str, Sequence[int]]
                        ) -> tuple[dict[str, np.ndarray], list[Coordinate]]:
    """Each monitor's value at t = 0 and its rate of change along the velocities, for ``(R, N, 3)`` arrays.

    ``monitors`` maps names to 0-based atom indices.  Rates are per fs (Å/fs, deg/fs)."""
    h = RATE_STEP_FS
    cols: dict[str, np.ndarray] = {}
    coords: list[Coordinate] = []
    for name, idx in monitors.items():
        idx = [int(i) for i in idx]
        unit = UNIT_WORDS[len(idx)]
        value = measure(positions, idx)
        ahead = measure(positions + h * velocities, idx)
        behind = measure(positions - h * velocities, idx)
        diff = ahead - behind
        if len(idx) == 4:
            diff = _wrap_deg(diff)  # a dihedral crossing ±180° between the two probes
        vcol, rcol = f"{name} [{unit}]", f"d{name}/dt [{unit}/fs]"
        cols[vcol] = np.asarray(value, float)
        cols[rcol] = np.asarray(diff / (2 * h), float)
        coords.append(Coordinate(vcol, f"the value of {name} at t = 0", name, "value", circular=len(idx) == 4))
        coords.append(Coordinate(rcol, f"the rate of change of {name} at t = 0", name, "rate"))
    return cols, coords


# --- the whole set ------------------------------------------------------------------------------------------

def starting_conditions(tset, monitors: Mapping[str, Sequence[int]] | None = None, runs: Sequence[str] | None = None,
                        use_file_velocities: bool = True, rmsd_limit: float = SAME_TS_RMSD,
                        progress: Callable[[int, int], None] | None = None) -> StartingConditions:
    """The starting conditions of ``runs`` (default all) of ``tset``.

    ``monitors`` maps names to 0-based atom indices (e.g. ``rules.monitor_indices``); none gives a table of
    velocities' sources and the TS check only (modes can still be added)."""
    from basinmark.core.manifest import load_layout

    run_ids = list(runs) if runs is not None else list(tset.run_ids)
    if not run_ids:
        raise OriginsError(f"{tset.root}: no runs to take starting conditions from")
    try:
        layout = load_layout(tset.root)
        lf, tf = layout.length_factor, layout.time_factor
    except (BasinmarkError, OSError):
        lf, tf = 1.0, 1.0
    states: list[TSState] = []
    notes: list[str] = []
    for k, rid in enumerate(run_ids):
        state = ts_state(tset[rid], lf, tf, use_file=use_file_velocities)
        states.append(state)
        if state.note:
            notes.append(state.note)
        if progress is not None:
            progress(k + 1, len(run_ids))
    numbers = np.asarray(tset[run_ids[0]].numbers)
    positions = np.stack([s.positions for s in states])
    velocities = np.stack([s.velocities for s in states])
    sources = [s.source for s in states]
    warnings: list[str] = []
    estimated = [r for r, s in zip(run_ids, sources) if s in ESTIMATED]
    if estimated:
        steps = np.array([s.step_fs for s in states if s.source in ESTIMATED])
        warnings.append(
            f"Starting velocities were estimated, not read: {len(estimated)} of {len(run_ids)} runs carry no "
            f"velocity or momentum column, so their t = 0 velocities come from the frames next to t = 0 (central "
            f"difference over ±{np.median(steps):g} fs). Rates and mode velocities are then approximate, the more "
            "so the farther apart the saved frames are.")
    rmsd = np.zeros(len(run_ids))
    if len(run_ids) > 1:
        rmsd, _ref = aligned_rmsd(positions)
        w = one_ts_warning(run_ids, rmsd, rmsd_limit)
        if w:
            warnings.append(w)
    cols, coords = monitor_coordinates(positions, velocities, monitors or {})
    table = pd.DataFrame({"run": run_ids, "velocity_source": sources, "ts_rmsd [angstrom]": rmsd, **cols})
    return StartingConditions(run_ids, numbers, positions, velocities, sources, table, coords, rmsd,
                              warnings, notes)
