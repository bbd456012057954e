"""The starting conditions along the transition state's normal modes, as coordinates of the origins table.

The projection itself (mass-weighted displacement Q, velocity Q̇, harmonic energy and phase of each run along
each mode) is :func:`basinmark.core.mode_projection.project`; this module only turns its long table (one row
per run and mode) into named columns and sentences.  The imaginary mode's phase is left out: it is no
oscillation, so a phase there names nothing physical.
"""

from __future__ import annotations

from typing import Callable, Sequence

import numpy as np
import pandas as pd

#: what each projected quantity is called in a column and in a sentence
_QUANTITIES = (
    ("Q", "displacement", "amu^1/2 angstrom", "the displacement along mode {k}"),
    ("Qdot", "velocity", "amu^1/2 angstrom/fs", "the velocity along mode {k}"),
    ("energy_kcal_mol", "energy", "kcal/mol", "the energy in mode {k}"),
    ("phase", "phase", "deg", "the phase of mode {k}"),
)


def mode_column(k: int, kind: str) -> str:
    """The table column of quantity ``kind`` (displacement, velocity, energy, phase) of mode ``k``."""
    for _key, word, unit, _phrase in _QUANTITIES:
        if word == kind:
            return f"mode {k} {word} [{unit}]"
    raise KeyError(kind)


def mode_coordinates(modes, positions: np.ndarray, velocities: np.ndarray, run_ids: Sequence[str],
                     project: Callable | None = None):
    """``(columns, coordinates, warnings)``: one column per mode and quantity, in run order."""
    from basinmark.core.origins_start import SAME_TS_RMSD, Coordinate

    if project is None:
        from basinmark.core.mode_projection import project
    long = project(modes, positions, velocities, list(run_ids))
    cols: dict[str, np.ndarray] = {}
    coords: list[Coordinate] = []
    order = {r: i for i, r in enumerate(run_ids)}
    for k, rows in long.groupby("mode", sort=True):
        rows = rows.iloc[np.argsort([order[r] for r in rows["run"]])]
        imaginary = bool(rows["imaginary"].iloc[0]) if "imaginary" in rows else False
        for key, word, unit, phrase in _QUANTITIES:
            if word == "phase" and imaginary:
                continue
            values = rows[key].to_numpy(dtype=float)
            if word == "phase":
                values = np.degrees(values)
            name = mode_column(int(k), word)
            cols[name] = values
            what = phrase.format(k=int(k)) + (" (the imaginary mode)" if imaginary and word == "velocity" else "")
            coords.append(Coordinate(name, what, f"mode {int(k)}", word, circular=word == "phase"))
    warns: list[str] = []
    if "rmsd" in long:
        rmsd = long.groupby("run", sort=False)["rmsd"].first()
        far = [r for r in run_ids if float(rmsd.get(r, 0.0)) > SAME_TS_RMSD]
        if far:
            warns.append(f"The runs were not all started at the mode file's transition state: {len(far)} run(s) "
                         f"start more than {SAME_TS_RMSD:g} Å (mass-weighted RMSD after alignment) from its geometry, "
                         f"e.g. {', '.join(far[:5])}; their mode projections mean little (check that the mode file "
                         "belongs to this set).")
    return pd.DataFrame(cols, index=list(run_ids)), coords, warns
