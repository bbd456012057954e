"""Fallback reader: any format ``ase.io`` reads (e.g. ASE ``.traj``), turned into a FrameBlock.

Numeric ``atoms.info`` entries become ``info``, other entries ``text_info``;
a calculator's potential energy becomes ``info['epot']`` (eV); per-atom arrays
other than numbers and positions become ``arrays``.  Formats without lines have
``frame_lines`` of zeros.
"""

from __future__ import annotations

import numbers as _numbers
from pathlib import Path

import numpy as np

from basinmark.core.errors import TrajectoryFileError
from basinmark.core.io.registry import FrameBlock, load_bytes

_SKIP_ARRAYS = {"numbers", "positions"}


def _energy(atoms) -> float:
    calc = atoms.calc
    if calc is None:
        return np.nan
    try:
        return float(calc.get_potential_energy(atoms))
    except Exception:  # a calculator without a stored energy (any ase error type)
        return np.nan


def read_ase(path: str | Path, *, dtype=np.float32) -> FrameBlock:
    """Read every frame with ``ase.io.read(path, index=':')``; errors become TrajectoryFileError."""
    import ase.io

    path = Path(path)
    _, sha, warnings = load_bytes(path)  # hash of the stored bytes, and a clear error if missing
    try:
        frames = ase.io.read(path, index=":")
    except MemoryError:
        raise TrajectoryFileError(
            path, f"there is not enough memory to read this file ({path.stat().st_size / 1e6:.1f} MB on disk); close "
            "other programs, read the set on a machine with more memory, or split the file into shorter runs"
        ) from None
    except Exception as exc:  # ase raises many types; say which, in one sentence
        kind = type(exc).__name__
        raise TrajectoryFileError(
            path, f"not a file basinmark or ase can read ({kind}: {exc}); trajectories are expected as "
            "XYZ or extended XYZ (.xyz, .extxyz), optionally compressed") from None
    if not isinstance(frames, list):
        frames = [frames]
    if not frames:
        raise TrajectoryFileError(path, "the file holds no frames")
    numbers = frames[0].numbers
    for i, a in enumerate(frames):
        if len(a) != len(numbers):
            raise TrajectoryFileError(path, f"the atom count changes: frame {i + 1} has {len(a)} atoms but frame 1 "
                                      f"has {len(numbers)}; every frame must have the same atoms")
        if not np.array_equal(a.numbers, numbers):
            k = int(np.flatnonzero(a.numbers != numbers)[0])
            raise TrajectoryFileError(path, f"the element order changes: atom {k + 1} differs between frame 1 and "
                                      f"frame {i + 1}; every frame must list the same atoms in the same order")
    positions = np.stack([a.positions for a in frames]).astype(dtype, copy=False)
    if not np.isfinite(positions).all():
        f = int(np.argwhere(~np.isfinite(positions))[0][0])
        raise TrajectoryFileError(path, f"frame {f + 1} has a coordinate that is not a finite number")
    n = len(frames)
    info: dict[str, np.ndarray] = {}
    text: dict[str, list[str]] = {}
    keys = list(dict.fromkeys(k for a in frames for k in a.info))
    for key in keys:
        values = [a.info.get(key) for a in frames]
        present = [v for v in values if v is not None]
        if all(isinstance(v, _numbers.Real) and not isinstance(v, (bool, np.bool_)) for v in present):
            info[key] = np.array([np.nan if v is None else float(v) for v in values], dtype=np.float64)
        else:
            text[key] = ["" if v is None else str(v) for v in values]
    energies = np.array([_energy(a) for a in frames])
    if np.isfinite(energies).any() and "epot" not in info:
        info["epot"] = energies
    arrays = {}
    for name in frames[0].arrays:
        if name in _SKIP_ARRAYS:
            continue
        if all(name in a.arrays and a.arrays[name].shape == frames[0].arrays[name].shape for a in frames):
            arrays[name] = np.stack([a.arrays[name] for a in frames])
    return FrameBlock(path=path, numbers=numbers.astype(np.int16), positions=positions, info=info, text_info=text,
                      arrays=arrays, frame_lines=np.zeros(n, dtype=np.int64), sha256=sha, warnings=warnings)
