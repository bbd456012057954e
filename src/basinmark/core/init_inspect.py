"""What `basinmark init` finds in a folder: pairing, comment keys and likely units, atoms, bonds of the TS frame.

Every finding is a sentence saying how it was found.  The likely units are checks against physics, not
guesses from names: the time step is compared with the steps direct dynamics uses; the length unit with
the bond lengths of the transition-state frame; the energy unit by comparing the kinetic energy the files
carry with ½ Σ m v² from the positions themselves (finite differences over one step, masses from
``ase.data``): in eV the two agree, in kcal/mol the file's numbers are 23 times larger, and so on.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from ase import units as ase_units
from ase.data import atomic_masses, chemical_symbols

from basinmark.core.geometry import bonds_in_frame
from basinmark.core.init_propose import Proposal, propose
from basinmark.core.units import ENERGY_UNITS, LENGTH_UNITS, TIME_UNITS

#: 1 amu·Å²/fs² in eV (from ase.units: CODATA values of the atomic mass unit and the elementary charge)
AMU_A2_FS2_IN_EV = ase_units._amu * 1e10 / ase_units._e


@dataclass
class Guess:
    what: str  # "time", "energy", "length"
    unit: str | None  # the likely unit as the manifest writes it, or None when it cannot be told
    current: str  # the unit the set is read with now
    how: str  # one sentence


@dataclass
class Findings:
    root: Path
    tset: object  # TrajectorySet
    keys_used: dict = field(default_factory=dict)  # role -> comment key found (None when absent)
    file_keys: list = field(default_factory=list)
    guesses: list[Guess] = field(default_factory=list)
    atoms: list[tuple[int, str]] = field(default_factory=list)  # 1-based number, symbol
    ts_bonds: list[tuple[int, int, float]] = field(default_factory=list)  # 1-based pair, Å
    ts_run: str = ""
    proposal: Proposal | None = None
    patterns: dict | None = None  # [files] patterns that reproduce the pairing, when one pattern fits all
    layout: object = None


def _keys_used(tset, layout) -> tuple[dict, list]:
    from basinmark.core.io import read_frames
    from basinmark.core.sets import pick_key

    first = next(iter(tset))
    path = first.sources[-1].path
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        block = read_frames(path)
    used = {role: pick_key(block.info, layout.keys[role])[0] for role in ("time", "potential", "kinetic", "total")}
    if used["kinetic"] is None and "momenta" in block.arrays:
        used["kinetic"] = "(from per-atom momenta)"
    return used, sorted(block.info)


def _nearest(table: dict, value: float) -> tuple[str, float]:
    name = min(table, key=lambda k: abs(np.log(table[k] / value)))
    return name, abs(np.log(table[name] / value))


def _time_guess(tset, layout, time_key) -> Guess:
    current = next(k for k, v in TIME_UNITS.items() if np.isclose(v, layout.time_factor))
    if time_key is None:
        return Guess("time", None, current, "the files carry no time key, so the time step cannot be checked; "
                                            "state it as [time] step_fs")
    steps = np.concatenate([np.diff(t.times) for t in list(tset)[:20] if t.n_frames > 1])
    step_fs = float(np.median(steps))
    raw = step_fs / layout.time_factor  # in the file's own numbers
    # dynamics frames are written 0.05-5 fs apart (common practice, no source): the unit that puts the step there
    for unit in ("fs", "ps", "au", "as"):
        fs = raw * TIME_UNITS[unit]
        if 0.05 <= fs <= 5.0:
            return Guess("time", unit, current, f"the files step by {raw:g} in their own unit; read as {unit} "
                                                f"that is {fs:.3g} fs between frames, a usual spacing for dynamics (0.05 to 5 fs)")
    return Guess("time", None, current, f"the files step by {raw:g} in their own unit, which is no usual step in "
                                        "fs, ps, as or atomic units; check the time key")


def _length_guess(tset, layout) -> Guess:
    current = next(k for k, v in LENGTH_UNITS.items() if np.isclose(v, layout.length_factor))
    t = next(iter(tset))
    p = np.asarray(t.positions[t.ts_index], dtype=np.float64) / layout.length_factor  # the file's numbers
    if p.shape[0] < 2:
        return Guess("length", None, current, "one atom: no distance to check the unit by")
    d = np.linalg.norm(p[:, None] - p[None], axis=-1)
    np.fill_diagonal(d, np.inf)
    nn = float(np.median(d.min(axis=1)))
    # nearest neighbours in molecules are 0.9-1.8 Å (common practice, no source)
    for unit in ("angstrom", "bohr", "nm", "pm"):
        a = nn * LENGTH_UNITS[unit]
        if 0.85 <= a <= 1.9:
            return Guess("length", unit, current, f"nearest neighbours in the transition-state frame are "
                                                  f"{nn:.3g} apart in the files' unit; read as {unit} that is "
                                                  f"{a:.2f} Å, the length of a bond")
    return Guess("length", None, current, f"nearest neighbours are {nn:.3g} apart in the files' unit, no bond "
                                          "length in Å, bohr, nm or pm; check the coordinates")


def kinetic_ratio(traj, speed_scale: float = 1.0) -> float | None:
    """Median over frames of (kinetic energy the file carries, as read, in eV) / (½ Σ m v² from the positions).

    ``speed_scale`` corrects the velocities when the likely length or time unit differs from how the set is read.
    """
    ke = traj.energies.get("kinetic")
    if ke is None or traj.n_frames < 3:
        return None
    p = np.asarray(traj.positions, dtype=np.float64)
    t = traj.times
    v = (p[1:] - p[:-1]) / np.diff(t)[:, None, None]  # Å/fs between neighbouring frames
    m = atomic_masses[traj.numbers]
    ke_fd = 0.5 * np.einsum("a,fai,fai->f", m, v, v) * AMU_A2_FS2_IN_EV * speed_scale ** 2
    ke_mid = 0.5 * (ke[1:] + ke[:-1])
    ok = ke_fd > 1e-6
    if ok.sum() < 2:
        return None
    return float(np.median(ke_mid[ok] / ke_fd[ok]))


def _energy_guess(tset, layout, kinetic_key, time: Guess, length: Guess) -> Guess:
    current = next(k for k, v in ENERGY_UNITS.items() if np.isclose(v, layout.energy_factor))
    if kinetic_key is None:
        return Guess("energy", None, current, "no kinetic energy in the files, so the energy unit cannot be "
                                              "checked against the motion of the atoms")
    if kinetic_key.startswith("("):
        return Guess("energy", None, current, "kinetic energy comes from the momenta, in eV already")
    # velocities in Å/fs under the likely units, where they differ from how the set is read now
    scale, also = 1.0, []
    if length.unit and length.unit != length.current:
        scale *= LENGTH_UNITS[length.unit] / LENGTH_UNITS[length.current]
        also.append(f"lengths in {length.unit}")
    if time.unit and time.unit != time.current:
        scale /= TIME_UNITS[time.unit] / TIME_UNITS[time.current]
        also.append(f"times in {time.unit}")
    ratios = [r for r in (kinetic_ratio(t, scale) for t in list(tset)[:10]) if r is not None]
    if not ratios:
        return Guess("energy", None, current, "too few frames to compare the kinetic energy with the motion")
    ratio = float(np.median(ratios))
    # the file's numbers are energy / unit: as read (× current factor) they are `ratio` times ½mv² in eV
    file_factor = layout.energy_factor / ratio  # eV per one of the file's units, as the motion says
    unit, miss = _nearest(ENERGY_UNITS, file_factor)
    # finite differences over frames written far apart miss fast vibrations, so only a factor of 2 is asked
    # (the units differ by 4.2 (kJ/kcal) to 27 (hartree/eV)); common practice, no source
    if miss > np.log(2.0):
        return Guess("energy", None, current, f"the kinetic energy the files carry is {ratio:.3g} times ½ m v² from "
                                              "the positions (read as " + current + "), near no known unit")
    close = ratio * ENERGY_UNITS[unit] / layout.energy_factor
    given = f", with {' and '.join(also)}" if also else ""
    return Guess("energy", unit, current, f"the kinetic energy the files carry ({kinetic_key}) is {close:.2f} times "
                                          f"½ m v² from the positions (finite differences{given}) when read as {unit}")


def _patterns(tset, plan) -> dict | None:
    """``[files]`` patterns that reproduce the pairing (the run id replaced by {run}), when one fits every run."""
    root = plan.root.resolve()
    found = set()
    folders = set()
    for spec in plan.runs:
        if spec.run_id not in tset.runs:
            continue
        roles = {}
        for role in ("backward", "forward", "joined"):
            path = getattr(spec, role)
            if path is None:
                continue
            rel = path.resolve().relative_to(root).as_posix()
            base = "runs" if rel.startswith("runs/") else "."
            rel = rel[5:] if base == "runs" else rel
            if rel.count(spec.run_id) != 1:
                return None
            pattern = rel.replace(spec.run_id, "{run}")
            for comp in (".gz", ".bz2", ".xz"):
                if pattern.lower().endswith(comp):
                    pattern = pattern[: -len(comp)]
            roles[role] = pattern + "*"
            folders.add(base)
        found.add(tuple(sorted(roles.items())))
    if len(found) != 1:
        return None
    out = dict(next(iter(found)))
    out["folders"] = sorted(folders)
    return out


def inspect_folder(root: str | Path, progress=None, tset=None) -> Findings:
    """Open the folder as a set (no rules needed; or use ``tset`` already open) and gather what `init` reports."""
    from basinmark.core.sets import discover, open_set

    root = Path(root)
    plan = discover(root)
    if tset is None:
        tset = open_set(root, progress=progress)
    f = Findings(root=root, tset=tset, layout=plan.layout)
    if not len(tset):
        return f
    f.keys_used, f.file_keys = _keys_used(tset, plan.layout)
    time = _time_guess(tset, plan.layout, f.keys_used.get("time"))
    length = _length_guess(tset, plan.layout)
    f.guesses = [time, _energy_guess(tset, plan.layout, f.keys_used.get("kinetic"), time, length), length]
    first = next(iter(tset))
    f.atoms = [(i + 1, chemical_symbols[z]) for i, z in enumerate(first.numbers)]
    ts = np.asarray(first.positions[first.ts_index], dtype=np.float64)
    f.ts_run = first.run_id
    f.ts_bonds = [(int(a) + 1, int(b) + 1, float(np.linalg.norm(ts[a] - ts[b])))
                  for a, b in bonds_in_frame(first.numbers, ts)]
    f.proposal = propose(list(tset), first.numbers)
    f.patterns = None if plan.layout.patterns_given else _patterns(tset, plan)
    return f
