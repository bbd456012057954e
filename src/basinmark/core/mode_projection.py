"""Each run's starting point expressed along the normal modes of the transition state.

For run r and mode k (``L_k`` mass-weighted, orthonormal; ``m`` masses in amu; ``x_ref`` the reference
geometry of the modes), after rotating the run's t = 0 geometry onto ``x_ref``:

* ``Q``      = Σ_i sqrt(m_i) (x_i − x_ref,i) · L_k,i          amu^½ Å
* ``Qdot``   = Σ_i sqrt(m_i) v_i · L_k,i                     amu^½ Å/fs
* ``energy`` = ½ Qdot² + ½ λ_k Q², λ_k = signed ω_k²         kcal/mol (harmonic; for the imaginary
  mode λ < 0, so its energy is kinetic minus the fall of an inverted parabola and may be negative)
* ``phase``  = atan2(−Qdot / |ω_k|, Q)                       rad in (−π, π]: a run with
  Q(t) = A cos(ω t + φ) has phase φ at t = 0 (φ = 0: at the outer turning point on the + side;
  φ = π/2: passing the reference moving toward −).  For the imaginary mode the same formula is given
  but it is no oscillation phase, only the direction of (Q, Qdot/|ω|).

Alignment: the run's geometry is moved to the reference's centre of mass and rotated onto it with the
mass-weighted Kabsch rotation (``scipy.spatial.transform.Rotation.align_vectors``, weights = masses);
velocities get the same rotation.  ``rmsd`` (Å, mass-weighted) of the aligned geometry says how far the
run started from the reference: a large value means the run did not start at this transition state.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
from scipy.spatial.transform import Rotation

from basinmark.core.modes import AMU_A2_FS2, KCAL_MOL, ModeError, NormalModes

#: column units of :func:`project`'s table (also in ``table.attrs["units"]``)
UNITS = {"Q": "amu^1/2 Å", "Qdot": "amu^1/2 Å/fs", "energy_kcal_mol": "kcal/mol", "phase": "rad",
         "frequency_cm1": "cm^-1", "rmsd": "Å"}


def _runs_array(a, n_atoms: int, what: str) -> np.ndarray:
    x = np.asarray(a, dtype=float)
    if x.ndim == 2:
        x = x[None]
    if x.ndim != 3 or x.shape[1:] != (n_atoms, 3):
        raise ModeError(f"{what} must have shape (runs, {n_atoms}, 3) to match the modes' {n_atoms} atoms; "
                        f"got {np.shape(a)}")
    return x


def align_to_reference(modes: NormalModes, positions, velocities=None):
    """``(positions, velocities, rmsd)`` of runs ``(n_runs, n_atoms, 3)`` rotated onto ``modes.positions``.

    Positions are centred on the reference's centre of mass, rotated by the mass-weighted Kabsch rotation;
    velocities (Å/fs, or None) get the same rotation.  ``rmsd`` (n_runs,) is the mass-weighted RMS distance
    in Å left after the alignment.
    """
    n = modes.n_atoms
    x = _runs_array(positions, n, "positions")
    v = None if velocities is None else _runs_array(velocities, n, "velocities")
    if v is not None and v.shape != x.shape:
        raise ModeError(f"positions {x.shape} and velocities {v.shape} must have the same shape")
    m = modes.masses
    ref = modes.positions - (m[:, None] * modes.positions).sum(0) / m.sum()
    ref_com = (m[:, None] * modes.positions).sum(0) / m.sum()
    out_x = np.empty_like(x)
    out_v = None if v is None else np.empty_like(v)
    rmsd = np.empty(len(x))
    for r in range(len(x)):
        centred = x[r] - (m[:, None] * x[r]).sum(0) / m.sum()
        # scipy: the rotation R minimising sum w |a - R b|^2, here a = reference, b = this run.  For a linear
        # molecule the turn about its axis is free; scipy warns so, and any choice gives the same projection
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message=".*(uniquely|poorly) defined.*")
            rot, _ = Rotation.align_vectors(ref, centred, weights=m)
        moved = rot.apply(centred)
        out_x[r] = moved + ref_com
        rmsd[r] = float(np.sqrt((m * ((moved - ref) ** 2).sum(1)).sum() / m.sum()))
        if v is not None:
            out_v[r] = rot.apply(v[r])
    return out_x, out_v, rmsd


def project_arrays(modes: NormalModes, positions, velocities, *, align: bool = True) -> dict[str, np.ndarray]:
    """The projections as arrays ``(n_runs, n_modes)``: Q, Qdot, energy_kcal_mol, phase; plus rmsd (n_runs,)."""
    if align:
        x, v, rmsd = align_to_reference(modes, positions, velocities)
    else:
        x = _runs_array(positions, modes.n_atoms, "positions")
        v = _runs_array(velocities, modes.n_atoms, "velocities")
        rmsd = np.sqrt((modes.masses * ((x - modes.positions) ** 2).sum(-1)).sum(-1) / modes.masses.sum())
    sq = np.sqrt(modes.masses)[None, :, None]
    q = np.einsum("rni,kni->rk", (x - modes.positions[None]) * sq, modes.modes)
    qdot = np.einsum("rni,kni->rk", v * sq, modes.modes)
    lam = modes.eigenvalues / AMU_A2_FS2  # signed ω² in 1/fs²
    energy = (0.5 * qdot**2 + 0.5 * lam[None] * q**2) * AMU_A2_FS2 / KCAL_MOL
    omega = modes.angular_frequencies
    with np.errstate(divide="ignore", invalid="ignore"):
        phase = np.arctan2(-qdot / omega[None], q)
    return {"Q": q, "Qdot": qdot, "energy_kcal_mol": energy, "phase": phase, "rmsd": rmsd}


def project(modes: NormalModes, positions, velocities, run_ids=None) -> pd.DataFrame:
    """One row per run and mode: run, mode (1-based), frequency_cm1, imaginary, Q, Qdot, energy_kcal_mol,
    phase, rmsd.  Units in :data:`UNITS` and ``table.attrs["units"]``.

    ``positions`` and ``velocities`` are the runs' t = 0 geometries (Å) and velocities (Å/fs),
    ``(n_runs, n_atoms, 3)`` in the modes' atom order; each run is aligned to the reference first
    (:func:`align_to_reference`).  ``run_ids`` default to 0, 1, ...
    """
    a = project_arrays(modes, positions, velocities)
    n_runs, n_modes = a["Q"].shape
    ids = list(range(n_runs)) if run_ids is None else list(run_ids)
    if len(ids) != n_runs:
        raise ModeError(f"{len(ids)} run ids for {n_runs} runs")
    table = pd.DataFrame({
        "run": np.repeat(np.array(ids, dtype=object), n_modes),
        "mode": np.tile(modes.numbers, n_runs),
        "frequency_cm1": np.tile(modes.frequencies_cm1, n_runs),
        "imaginary": np.tile(modes.imaginary, n_runs),
        "Q": a["Q"].ravel(),
        "Qdot": a["Qdot"].ravel(),
        "energy_kcal_mol": a["energy_kcal_mol"].ravel(),
        "phase": a["phase"].ravel(),
        "rmsd": np.repeat(a["rmsd"], n_modes),
    })
    table.attrs["units"] = dict(UNITS)
    return table


def wide(table: pd.DataFrame, columns=("Q", "Qdot", "energy_kcal_mol", "phase")) -> pd.DataFrame:
    """:func:`project`'s long table as one row per run (index ``run``), columns like ``Q_7``, ``phase_7``."""
    parts = []
    for c in columns:
        p = table.pivot(index="run", columns="mode", values=c)
        p.columns = [f"{c}_{k}" for k in p.columns]
        parts.append(p)
    out = pd.concat(parts, axis=1)
    return out.loc[list(dict.fromkeys(table["run"]))]
