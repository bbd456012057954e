"""The core model: one run (:class:`Trajectory`) and all runs of a study (:class:`TrajectorySet`).

Conventions (see DEVELOPERS.md):

* positions are one array ``(n_frames, n_atoms, 3)`` in Å, stored as float32
  (7 significant digits: 1e-6 Å at 10 Å, far finer than any bond threshold),
  stored once and never copied by the views;
* times are in fs with the transition state at t = 0, the backward half at
  negative times, strictly increasing;
* per-frame energies are in eV (ASE's unit) under the keys ``potential``,
  ``kinetic`` and ``total`` when known;
* a run's identity for labels is :attr:`Trajectory.content_hash`, the SHA-256
  over the SHA-256 of each source file's decompressed content, in order, and
  over :attr:`Trajectory.reading` (a digest of the settings that decided which
  numbers were read: units, keys, time step and convention; see
  :mod:`basinmark.core.content_hash`).
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator, Mapping, Sequence

import numpy as np
import pandas as pd
from ase import Atoms
from ase.data import atomic_numbers, chemical_symbols

from basinmark.core.units import energy_factor

ENERGY_KEYS = ("potential", "kinetic", "total")


@dataclass(frozen=True)
class SourceFile:
    """One file a run was read from, with the SHA-256 of its content (after decompression)."""

    path: Path
    sha256: str
    role: str = "joined"  # "backward", "forward" or "joined"


def combined_hash(sources: Sequence[SourceFile], reading: str = "") -> str:
    """SHA-256 over the ordered list of the sources' hashes and the reading digest (the run's content hash)."""
    h = hashlib.sha256()
    for s in sources:
        h.update(f"{s.role}:{s.sha256}\n".encode("ascii"))
    if reading:
        h.update(f"reading:{reading}\n".encode("ascii"))
    return h.hexdigest()


@dataclass(eq=False)
class Trajectory:
    """One run of a set: atoms, positions over time, optional energies."""

    run_id: str
    numbers: np.ndarray  # (n_atoms,) atomic numbers
    positions: np.ndarray  # (n_frames, n_atoms, 3) Å, float32
    times: np.ndarray  # (n_frames,) fs, t = 0 at the transition state
    energies: dict[str, np.ndarray] = field(default_factory=dict)  # eV, (n_frames,)
    scalars: dict[str, np.ndarray] = field(default_factory=dict)  # other per-frame values
    sources: tuple[SourceFile, ...] = ()
    metadata: dict = field(default_factory=dict)
    problems: list[str] = field(default_factory=list)  # non-fatal problems found while loading
    reading: str = ""  # digest of how the files were read (units, keys, time settings); part of content_hash

    def __post_init__(self) -> None:
        self.numbers = np.asarray(self.numbers, dtype=np.int16)
        self.positions = np.asarray(self.positions, dtype=np.float32)
        self.times = np.asarray(self.times, dtype=np.float64)
        f, n = self.positions.shape[:2]
        if self.positions.ndim != 3 or self.positions.shape[2] != 3:
            raise ValueError(f"run {self.run_id}: positions must be (frames, atoms, 3), got {self.positions.shape}")
        if self.numbers.shape != (n,):
            raise ValueError(f"run {self.run_id}: {self.numbers.size} atomic numbers for {n} atoms")
        if self.times.shape != (f,):
            raise ValueError(f"run {self.run_id}: {self.times.size} times for {f} frames")
        for name, table in (("energy", self.energies), ("scalar", self.scalars)):
            for key, values in list(table.items()):
                values = np.asarray(values, dtype=np.float64)
                if values.shape != (f,):
                    raise ValueError(f"run {self.run_id}: {name} {key!r} has {values.size} values for {f} frames")
                table[key] = values
        if "total" not in self.energies and {"potential", "kinetic"} <= self.energies.keys():
            self.energies["total"] = self.energies["potential"] + self.energies["kinetic"]

    # --- shape and identity -------------------------------------------------------------
    @property
    def n_frames(self) -> int:
        return int(self.positions.shape[0])

    @property
    def n_atoms(self) -> int:
        return int(self.positions.shape[1])

    @property
    def symbols(self) -> list[str]:
        return [chemical_symbols[z] for z in self.numbers]

    @property
    def content_hash(self) -> str:
        # kept while sources and reading stay the same: the window asks for every run's on each label refresh
        memo = self.__dict__.get("_content_hash_memo")
        if memo is None or memo[0] is not self.sources or memo[1] != self.reading:
            memo = (self.sources, self.reading, combined_hash(self.sources, self.reading))
            self.__dict__["_content_hash_memo"] = memo
        return memo[2]

    @property
    def ts_index(self) -> int:
        """Index of the frame nearest t = 0 (the transition state)."""
        return int(np.argmin(np.abs(self.times)))

    @property
    def time_span(self) -> tuple[float, float]:
        return float(self.times[0]), float(self.times[-1])

    def energy_drift(self) -> float | None:
        """Largest |E_total(t) - E_total(0)| over the run, in eV; None when energies are missing."""
        total = self.energies.get("total")
        if total is None or not np.all(np.isfinite(total)):
            return None
        return float(np.max(np.abs(total - total[self.ts_index])))

    # --- ASE interchange ------------------------------------------------------------------
    def to_atoms(self, frame: int) -> Atoms:
        """The geometry of one frame as ``ase.Atoms`` (time and energies in ``info``)."""
        atoms = Atoms(numbers=self.numbers.astype(int), positions=self.positions[frame].astype(np.float64))
        atoms.info["time"] = float(self.times[frame])
        for key, values in self.energies.items():
            atoms.info[f"energy_{key}"] = float(values[frame])
        for key, values in self.scalars.items():
            atoms.info[key] = float(values[frame])
        return atoms

    def to_atoms_list(self) -> list[Atoms]:
        return [self.to_atoms(i) for i in range(self.n_frames)]

    @classmethod
    def from_atoms(
        cls,
        run_id: str,
        frames: Sequence[Atoms],
        times: Sequence[float] | None = None,
        timestep_fs: float = 1.0,
        **kwargs,
    ) -> "Trajectory":
        """Build a run from a list of ``ase.Atoms`` with the same atoms in the same order.

        Times come from ``times``, else from each frame's ``info['time']``, else
        ``timestep_fs`` apart starting at 0.  Energies are taken from
        ``info['energy_potential'|'energy_kinetic'|'energy_total']`` when present.
        """
        if not frames:
            raise ValueError(f"run {run_id}: no frames")
        numbers = frames[0].numbers
        for i, a in enumerate(frames):
            if not np.array_equal(a.numbers, numbers):
                raise ValueError(f"run {run_id}: frame {i + 1} has different atoms than frame 1")
        if times is None:
            if all("time" in a.info for a in frames):
                times = [a.info["time"] for a in frames]
            else:
                times = np.arange(len(frames)) * timestep_fs
        energies = {}
        for key in ENERGY_KEYS:
            if all(f"energy_{key}" in a.info for a in frames):
                energies[key] = np.array([a.info[f"energy_{key}"] for a in frames])
        positions = np.stack([a.positions for a in frames])
        return cls(run_id=run_id, numbers=numbers, positions=positions, times=np.asarray(times, float),
                   energies=energies, **kwargs)

    @staticmethod
    def numbers_from_symbols(symbols: Sequence[str]) -> np.ndarray:
        return np.array([atomic_numbers[s] for s in symbols], dtype=np.int16)

    def __repr__(self) -> str:
        t0, t1 = self.time_span
        return f"<Trajectory {self.run_id}: {self.n_frames} frames, {self.n_atoms} atoms, {t0:g}..{t1:g} fs>"


@dataclass(frozen=True)
class LoadFailure:
    """A file (or run) of a set that could not be loaded, and why."""

    path: Path
    reason: str
    line: int | None = None

    def __str__(self) -> str:
        return self.reason if str(self.path) in self.reason else f"{self.path}: {self.reason}"


@dataclass(eq=False)
class TrajectorySet:
    """All runs of one study (one folder), in a stable order, plus what failed to load."""

    root: Path
    runs: dict[str, Trajectory] = field(default_factory=dict)
    failures: list[LoadFailure] = field(default_factory=list)
    warnings: list[str] = field(default_factory=list)
    metadata: dict = field(default_factory=dict)
    #: files found in the folder that are not runs (an unpaired half, a single geometry, other atoms), with why
    left_out: list[LoadFailure] = field(default_factory=list)
    #: how the runs were found (one sentence per naming convention or layout)
    notes: list[str] = field(default_factory=list)

    @property
    def name(self) -> str:
        return self.metadata.get("name") or Path(self.root).name

    @property
    def run_ids(self) -> list[str]:
        return list(self.runs)

    def __len__(self) -> int:
        return len(self.runs)

    def __iter__(self) -> Iterator[Trajectory]:
        return iter(self.runs.values())

    def __getitem__(self, key: str | int) -> Trajectory:
        if isinstance(key, int):
            return list(self.runs.values())[key]
        try:
            return self.runs[key]
        except KeyError:
            raise KeyError(f"no run {key!r} in set {self.name}") from None

    def __contains__(self, run_id: str) -> bool:
        return run_id in self.runs

    @property
    def n_atoms(self) -> int | None:
        return next(iter(self.runs.values())).n_atoms if self.runs else None

    def content_hashes(self) -> Mapping[str, str]:
        return {rid: t.content_hash for rid, t in self.runs.items()}

    def info_table(self) -> pd.DataFrame:
        """One row per run (and per file not loaded or left out): id, frames, time span, atoms, drift, problems."""
        rows = []
        for t in self.runs.values():
            t0, t1 = t.time_span
            drift = t.energy_drift()
            rows.append({
                "run": t.run_id,
                "frames": t.n_frames,
                "t_start_fs": t0,
                "t_end_fs": t1,
                "atoms": t.n_atoms,
                "drift_kcal_mol": None if drift is None else drift / energy_factor("kcal/mol"),
                "problems": "; ".join(t.problems),
            })
        for f in self.failures:
            rows.append({"run": Path(f.path).name, "frames": 0, "t_start_fs": None, "t_end_fs": None,
                         "atoms": None, "drift_kcal_mol": None, "problems": f"not loaded: {f.reason}"})
        for f in self.left_out:
            rows.append({"run": Path(f.path).name, "frames": 0, "t_start_fs": None, "t_end_fs": None,
                         "atoms": None, "drift_kcal_mol": None, "problems": f"left out: {f.reason}"})
        table = pd.DataFrame(rows, columns=["run", "frames", "t_start_fs", "t_end_fs", "atoms",
                                            "drift_kcal_mol", "problems"])
        table["atoms"] = table["atoms"].astype("Int64")  # whole numbers, empty where a file failed
        return table

