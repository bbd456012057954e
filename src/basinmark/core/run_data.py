"""One run's numbers as a table: time, every monitor, the basin of each frame and the energies.

The columns carry their units in their names (``time [fs]``, ``r_a [angstrom]``, ``E_total [kcal/mol]``) so
the table reads alone in a spreadsheet; ``E_total drift`` is the total energy minus its value at t = 0, the
number an energy check looks at.  Written through :mod:`basinmark.core.csv_safe` (text cells a spreadsheet would
run as formulas are quoted).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any, Mapping, Sequence

import numpy as np
import pandas as pd

from basinmark.core.csv_safe import csv_text
from basinmark.core.geometry import measure
from basinmark.core.model import Trajectory
from basinmark.core.units import energy_factor

UNIT_WORDS = {2: "angstrom", 3: "deg", 4: "deg"}
ENERGY_COLUMNS = (("potential", "E_pot"), ("kinetic", "E_kin"), ("total", "E_total"))
NO_BASIN = ""  # a frame in no basin (or in two, with overlap allowed): an empty cell


def run_data_table(traj: Trajectory, result: Any = None, rules: Any = None,
                   extra: Mapping[str, Sequence[int]] | None = None, energy_unit: str = "kcal/mol") -> pd.DataFrame:
    """The table of one run, one row per frame in time order.

    ``result`` (a classification result) gives the rule monitors and the basin track; without it the monitors are
    measured here.  ``extra`` adds monitors by name (0-based atom indices).  Energies are in ``energy_unit``."""
    out: dict[str, Any] = {"time [fs]": np.asarray(traj.times, float), "frame": np.arange(1, traj.n_frames + 1)}
    monitors: dict[str, tuple[int, ...]] = {}
    if rules is not None:
        monitors.update({name: m.indices for name, m in rules.monitors.items()})
    monitors.update({name: tuple(idx) for name, idx in (extra or {}).items()})
    have = getattr(result, "monitors", None) or {}
    for name, idx in monitors.items():
        if max(idx) >= traj.n_atoms:
            continue
        vals = np.asarray(have[name], float) if name in have else measure(traj.positions, list(idx))
        out[f"{name} [{UNIT_WORDS[len(idx)]}]"] = vals
    track = getattr(result, "basin_track", None)
    if rules is not None and track is not None and len(track) == traj.n_frames:
        names = rules.basin_names
        out["basin"] = [names[b] if 0 <= b < len(names) else NO_BASIN for b in np.asarray(track).tolist()]
    scale = 1.0 / energy_factor(energy_unit)
    for key, col in ENERGY_COLUMNS:
        e = traj.energies.get(key)
        if e is not None:
            out[f"{col} [{energy_unit}]"] = np.asarray(e, float) * scale
    total = traj.energies.get("total")
    if total is not None:
        out[f"E_total drift [{energy_unit}]"] = (np.asarray(total, float) - total[traj.ts_index]) * scale
    return pd.DataFrame(out)


def write_run_data(table: pd.DataFrame, path: str | Path) -> Path:
    """Write :func:`run_data_table`'s table as CSV (full float precision); returns the path."""
    from basinmark.core.atomic_write import write_text_atomic

    path = Path(path)
    write_text_atomic(path, csv_text(table, float_format="%.10g"), what="the run data")
    return path
