"""Each run's geometry and atom velocities at the transition state (t = 0).

Velocities come from the run's own file when its transition-state frame carries a per-atom velocity column
(``velocities``, ``vel`` or ``velo``, read in the set's length unit per its time unit, Å/fs by default) or
momenta (``momenta``, in ase's units, divided by the masses of a ``masses`` column or ase's standard atomic
masses).  Otherwise they are *estimated* from the frames next to t = 0 by a central difference
(x(t₊) − x(t₋)) / (t₊ − t₋), or by a one-sided difference when t = 0 is the first or last frame; the source
is named per run, because an estimate from frames saved every few fs is much rougher than the integrator's
own velocities.

The set loader keeps positions only, so the transition-state frame is read here again, and only from
files whose first comment line declares such a column (a peek at the first few kB).
"""

from __future__ import annotations

import re
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from ase import units as ase_units
from ase.data import atomic_masses

from basinmark.core.errors import BasinmarkError, TrajectoryFileError

#: per-atom columns read as velocities (compared without case)
VELOCITY_COLUMNS = ("velocities", "vel", "velo")
#: per-atom columns read as momenta (ase's units: amu·Å per ase time unit)
MOMENTA_COLUMNS = ("momenta",)

FROM_VELOCITIES = "file velocities"
FROM_MOMENTA = "file momenta"
CENTRAL = "central difference"
ONE_SIDED = "one-sided difference"
ESTIMATED = (CENTRAL, ONE_SIDED)

_PROPS = re.compile(r"properties\s*=\s*\"?([^\s\"]+)", re.IGNORECASE)


@dataclass
class TSState:
    """One run at t = 0: positions (N, 3) Å, velocities (N, 3) Å/fs, where the velocities came from and the
    time step of the frames a difference used (fs; NaN when read from the file)."""

    positions: np.ndarray
    velocities: np.ndarray
    source: str
    step_fs: float = float("nan")
    note: str = ""


def declared_columns(path: str | Path) -> list[str]:
    """The per-atom column names declared by the first frame's ``Properties=`` (empty when none or unreadable)."""
    from basinmark.core.io.registry import ByteStream, split_suffix

    if split_suffix(path)[0] not in (".xyz", ".extxyz"):
        return []
    head = b""
    try:
        stream = iter(ByteStream(path, piece=8192))
        for piece in stream:
            head += piece
            if head.count(b"\n") >= 2 or len(head) > 65536:
                break
        close = getattr(stream, "close", None)
        if close is not None:
            close()  # closes the file
    except TrajectoryFileError:
        return []
    lines = head.decode("utf-8", "replace").splitlines()
    if len(lines) < 2:
        return []
    m = _PROPS.search(lines[1])
    if not m:
        return []
    parts = m.group(1).split(":")
    return [parts[i] for i in range(0, len(parts) - 2, 3)]


def _column(columns, wanted) -> str | None:
    low = {c.lower(): c for c in columns}
    return next((low[w] for w in wanted if w in low), None)


def _ts_file(traj) -> tuple[Path | None, bool]:
    """The file holding the run's t = 0 frame and whether that frame is its first (a forward half)."""
    for s in traj.sources:
        if s.role == "forward":
            return Path(s.path), True
    for s in traj.sources:
        if s.role == "joined":
            return Path(s.path), False
    return None, False


def velocities_from_file(traj, length_factor: float = 1.0, time_factor: float = 1.0) -> TSState | None:
    """The t = 0 velocities as the run's own file carries them, or None when it carries none.

    ``length_factor`` (Å per file length unit) and ``time_factor`` (fs per file time unit) convert a velocity
    column; momenta are in ase's units whatever the set's units."""
    from basinmark.core.io import read_frames

    path, first = _ts_file(traj)
    if path is None or not path.exists():
        return None
    columns = declared_columns(path)
    vel_col, mom_col = _column(columns, VELOCITY_COLUMNS), _column(columns, MOMENTA_COLUMNS)
    if vel_col is None and mom_col is None:
        return None
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # a truncated tail does not matter for the first frames
        block = read_frames(path, dtype=np.float64)
    frame = 0 if first else traj.ts_index
    if frame >= block.n_frames:
        return None
    arrays = {k.lower(): v for k, v in block.arrays.items()}
    pos = np.asarray(traj.positions[traj.ts_index], dtype=np.float64)
    if vel_col is not None and vel_col.lower() in arrays:
        v = np.asarray(arrays[vel_col.lower()][frame], dtype=np.float64)
        if v.shape != pos.shape:
            raise TrajectoryFileError(path, f"the {vel_col} column has {v.shape[-1]} values per atom; velocities "
                                            "need 3")
        return TSState(pos, v * (length_factor / time_factor), FROM_VELOCITIES)
    if mom_col is not None and mom_col.lower() in arrays:
        p = np.asarray(arrays[mom_col.lower()][frame], dtype=np.float64)
        if p.shape != pos.shape:
            raise TrajectoryFileError(path, f"the {mom_col} column has {p.shape[-1]} values per atom; momenta "
                                            "need 3")
        masses = arrays.get("masses")
        m = (np.asarray(masses[frame], dtype=np.float64) if masses is not None
             else atomic_masses[np.asarray(traj.numbers, int)])
        # p / m is in Å per ase time unit; one fs is ase_units.fs ase time units
        return TSState(pos, p / m[:, None] * ase_units.fs, FROM_MOMENTA)
    return None


def velocities_by_difference(traj) -> TSState:
    """The t = 0 velocities estimated from the frames on either side of t = 0 (one side at an end of the run)."""
    i = traj.ts_index
    x = traj.positions
    t = traj.times
    if traj.n_frames < 2:
        raise BasinmarkError(f"run {traj.run_id} has a single frame, so no velocity can be estimated at t = 0")
    pos = np.asarray(x[i], dtype=np.float64)
    if 0 < i < traj.n_frames - 1:
        lo, hi, source = i - 1, i + 1, CENTRAL
    elif i == 0:
        lo, hi, source = 0, 1, ONE_SIDED
    else:
        lo, hi, source = i - 1, i, ONE_SIDED
    dt = float(t[hi] - t[lo])
    v = (np.asarray(x[hi], np.float64) - np.asarray(x[lo], np.float64)) / dt
    note = "" if source == CENTRAL else f"run {traj.run_id}: t = 0 is an end of the run, so its velocity is a " \
                                        "one-sided difference (first-order, rougher than a central one)"
    return TSState(pos, v, source, step_fs=dt if source == ONE_SIDED else dt / 2, note=note)


def ts_state(traj, length_factor: float = 1.0, time_factor: float = 1.0, use_file: bool = True) -> TSState:
    """The run at t = 0: velocities from its file when it carries them, else estimated from its frames."""
    if use_file:
        found = velocities_from_file(traj, length_factor, time_factor)
        if found is not None:
            return found
    return velocities_by_difference(traj)
