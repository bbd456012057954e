"""Normal modes of the transition state: the data, computing them from a Hessian or a calculator.

Conventions (docs/mode-file.md says the same for people):

* positions in Å, masses in amu, Hessian in eV/Å² inside the core;
* ``modes`` are **mass-weighted** and orthonormal: ``modes[k]`` is an ``(n_atoms, 3)`` array ``L_k`` with
  ``sum(L_k * L_j) == delta_kj``; the Cartesian displacement of mode k is ``L_k / sqrt(m)`` (per atom);
* modes are ordered by increasing signed frequency, so an imaginary mode (a negative number here) comes
  first; people see them numbered from 1 (:attr:`NormalModes.numbers`);
* the 6 rigid motions (5 for a linear molecule) are projected out before diagonalising, so there are
  ``3N - 6`` (``3N - 5``) modes; the projection follows the usual recipe of an orthonormal basis of the
  internal space (Wilson, Decius & Cross, *Molecular Vibrations*, 1955; from memory);
* the sign of each mode is fixed so that its largest component is positive (any sign is equally right).

Reading and writing the mode file is :mod:`basinmark.core.mode_file`; projecting runs onto the modes is
:mod:`basinmark.core.mode_projection`; both are re-exported here (:func:`read_modes`, :func:`write_modes`,
:func:`project`, :func:`align_to_reference`).
"""

from __future__ import annotations

import importlib
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from ase import units as _u
from ase.data import atomic_masses, atomic_numbers

from basinmark.core.errors import BasinmarkError

#: eV per (amu Å² / fs²): kinetic energy of 1 amu moving at 1 Å/fs (≈ 103.6 eV)
AMU_A2_FS2 = _u._amu * 1e10 / _u._e
#: cm⁻¹ per (1/fs) of ordinary frequency: 1e15 / c (c in cm/s)
INV_FS_TO_CM = 1e15 / (_u._c * 100)
#: eV per kcal/mol (thermochemical calorie)
KCAL_MOL = _u.kcal / _u.mol

#: Hessian units a mode file may use, in eV/Å² per unit
HESSIAN_UNITS: dict[str, float] = {
    "eV/Å^2": 1.0,
    "eV/angstrom^2": 1.0,
    "eV/A^2": 1.0,
    "hartree/bohr^2": _u.Hartree / _u.Bohr**2,
    "kcal/mol/Å^2": KCAL_MOL,
    "kcal/mol/angstrom^2": KCAL_MOL,
    "kcal/mol/A^2": KCAL_MOL,
    "kJ/mol/Å^2": _u.kJ / _u.mol,
    "kJ/mol/angstrom^2": _u.kJ / _u.mol,
    "kJ/mol/A^2": _u.kJ / _u.mol,
}

#: calculators known by a short name (ase's own cheap ones); anything else as "module:Class"
CALCULATOR_NAMES: dict[str, str] = {
    "emt": "ase.calculators.emt:EMT",
    "lj": "ase.calculators.lj:LennardJones",
    "morse": "ase.calculators.morse:MorsePotential",
}


class ModeError(BasinmarkError):
    """Normal modes that cannot be made or used (a bad Hessian, atoms that do not match, ...)."""


def hessian_factor(unit: str) -> float:
    """eV/Å² per one ``unit`` of a Hessian; unknown units raise ValueError listing the known ones."""
    for key, value in HESSIAN_UNITS.items():
        if key.lower() == unit.strip().lower():
            return value
    raise ValueError(f"unknown Hessian unit {unit!r}; use one of: eV/Å^2, hartree/bohr^2, kcal/mol/Å^2, kJ/mol/Å^2")


@dataclass(frozen=True, eq=False)
class NormalModes:
    """Vibrational normal modes at one geometry (the transition state)."""

    frequencies_cm1: np.ndarray  #: (n_modes,) cm⁻¹, imaginary ones as negative numbers
    modes: np.ndarray  #: (n_modes, n_atoms, 3) mass-weighted, orthonormal
    masses: np.ndarray  #: (n_atoms,) amu
    positions: np.ndarray  #: (n_atoms, 3) Å, the reference geometry
    symbols: tuple[str, ...]
    linear: bool = False  #: 5 rigid motions were removed instead of 6
    source: str = ""  #: where the modes came from (a file, "Hessian", a calculator), for messages
    extra_notes: tuple[str, ...] = field(default=())

    # --- sizes and numbering ---------------------------------------------------------------------
    @property
    def n_modes(self) -> int:
        return int(self.frequencies_cm1.shape[0])

    @property
    def n_atoms(self) -> int:
        return int(self.masses.shape[0])

    @property
    def numbers(self) -> np.ndarray:
        """Mode numbers as people see them: 1, 2, ... in the order of :attr:`frequencies_cm1`."""
        return np.arange(1, self.n_modes + 1)

    # --- imaginary modes ---------------------------------------------------------------------------
    @property
    def imaginary(self) -> np.ndarray:
        """Boolean (n_modes,): True where the frequency is imaginary (stored negative)."""
        return self.frequencies_cm1 < 0

    @property
    def n_imaginary(self) -> int:
        return int(np.sum(self.imaginary))

    @property
    def has_imaginary(self) -> bool:
        return self.n_imaginary > 0

    @property
    def is_transition_state(self) -> bool:
        """Exactly one imaginary frequency, as a first-order saddle point has."""
        return self.n_imaginary == 1

    def notes(self) -> list[str]:
        """Plain sentences about anything that could mislead (empty when the modes look like a TS's)."""
        where = f"{self.source}: " if self.source else ""
        out = list(self.extra_notes)
        k = self.n_imaginary
        if k != 1:
            listed = ", ".join(f"{abs(f):.0f}i" for f in self.frequencies_cm1[self.imaginary])
            what = "no imaginary frequency" if k == 0 else f"{k} imaginary frequencies ({listed} cm⁻¹)"
            out.append(f"{where}the modes have {what}; a transition state has exactly one, so these are "
                       "probably not the modes of the transition state the runs started from")
        return out

    # --- derived quantities --------------------------------------------------------------------------
    @property
    def eigenvalues(self) -> np.ndarray:
        """Signed ω² in eV/(amu Å²) (negative for imaginary modes)."""
        omega = self.angular_frequencies
        return np.sign(self.frequencies_cm1) * omega**2 * AMU_A2_FS2

    @property
    def angular_frequencies(self) -> np.ndarray:
        """|ω| in rad/fs for each mode."""
        return 2 * np.pi * np.abs(self.frequencies_cm1) / INV_FS_TO_CM

    def cartesian(self, k: int) -> np.ndarray:
        """Cartesian displacement pattern (n_atoms, 3) of mode ``k`` (0-based), normalised to length 1 Å."""
        d = self.modes[k] / np.sqrt(self.masses)[:, None]
        return d / np.linalg.norm(d)

    def label(self, k: int) -> str:
        """'mode 7 (1234 cm⁻¹)' or 'mode 1 (512i cm⁻¹)' for mode ``k`` (0-based)."""
        f = self.frequencies_cm1[k]
        return f"mode {k + 1} ({abs(f):.0f}{'i' if f < 0 else ''} cm⁻¹)"


# ------------------------------------------------------------------------------------------------------
def default_masses(symbols) -> np.ndarray:
    """Standard atomic masses (amu) of ``symbols`` (ase.data.atomic_masses, IUPAC values)."""
    bad = [s for s in symbols if s not in atomic_numbers]
    if bad:
        raise ModeError(f"unknown chemical symbol(s): {', '.join(map(repr, bad[:5]))}")
    return np.array([atomic_masses[atomic_numbers[s]] for s in symbols], dtype=float)


def rigid_basis(positions: np.ndarray, masses: np.ndarray) -> np.ndarray:
    """Orthonormal mass-weighted rigid motions (translations, rotations about the centre of mass), (r, 3N).

    ``r`` is 6, or 5 for a linear molecule (the rotation about its axis moves nothing), 3 for one atom.
    """
    x = np.asarray(positions, float)
    sq = np.sqrt(masses)
    r = x - (masses[:, None] * x).sum(0) / masses.sum()
    vecs = []
    for k in range(3):
        t = np.zeros_like(x)
        t[:, k] = 1.0
        vecs.append((t * sq[:, None]).ravel())
        axis = np.zeros(3)
        axis[k] = 1.0
        vecs.append((np.cross(axis, r) * sq[:, None]).ravel())
    u, s, _ = np.linalg.svd(np.array(vecs).T, full_matrices=False)
    rank = int(np.sum(s > 1e-6 * s.max()))
    return u[:, :rank].T


def _fix_signs(vectors: np.ndarray) -> np.ndarray:
    """Each row's largest-magnitude component made positive (a fixed, reproducible sign)."""
    idx = np.argmax(np.abs(vectors), axis=1)
    sign = np.sign(vectors[np.arange(len(vectors)), idx])
    sign[sign == 0] = 1.0
    return vectors * sign[:, None]


def _check_geometry(symbols, positions, masses) -> tuple[tuple[str, ...], np.ndarray, np.ndarray]:
    symbols = tuple(str(s) for s in symbols)
    x = np.asarray(positions, dtype=float)
    if x.ndim != 2 or x.shape[1] != 3 or x.shape[0] != len(symbols):
        raise ModeError(f"positions must be {len(symbols)} rows of x, y, z (one per symbol); got shape {x.shape}")
    if len(symbols) < 2:
        raise ModeError("normal modes need at least two atoms")
    if not np.all(np.isfinite(x)):
        raise ModeError("positions hold a value that is not a finite number")
    m = default_masses(symbols) if masses is None else np.asarray(masses, dtype=float)
    if m.shape != (len(symbols),) or not np.all(np.isfinite(m)) or np.any(m <= 0):
        raise ModeError(f"masses must be {len(symbols)} positive numbers (amu), one per atom")
    return symbols, x, m


def modes_from_hessian(symbols, positions, hessian, *, masses=None, unit: str = "eV/Å^2",
                       source: str = "Hessian") -> NormalModes:
    """Normal modes from a Cartesian Hessian ``(3N, 3N)`` (row ``3 * atom + axis``) at ``positions`` (Å).

    The Hessian is mass-weighted, the rigid motions are projected out (6, or 5 for a linear molecule) and
    what is left is diagonalised; frequencies come out in cm⁻¹, imaginary ones negative.  ``masses``
    default to ase's standard atomic masses.  A Hessian that is not symmetric to 1e-3 of its largest
    element is refused (it is probably written in another layout); smaller asymmetry is averaged away.
    """
    symbols, x, m = _check_geometry(symbols, positions, masses)
    n3 = 3 * len(symbols)
    h = np.asarray(hessian, dtype=float) * hessian_factor(unit)
    if h.shape != (n3, n3):
        raise ModeError(f"the Hessian must be {n3} × {n3} for {len(symbols)} atoms; got {h.shape}")
    if not np.all(np.isfinite(h)):
        raise ModeError("the Hessian holds a value that is not a finite number")
    scale = max(float(np.abs(h).max()), 1e-300)
    asym = float(np.abs(h - h.T).max())
    if asym > 1e-3 * scale:
        i, j = np.unravel_index(np.argmax(np.abs(h - h.T)), h.shape)
        raise ModeError(f"the Hessian is not symmetric: element ({i + 1}, {j + 1}) is {h[i, j]:.6g} but "
                        f"({j + 1}, {i + 1}) is {h[j, i]:.6g} (eV/Å²); give the full matrix, row 3 × (atom − 1) + axis")
    h = 0.5 * (h + h.T)
    minv = 1.0 / np.sqrt(np.repeat(m, 3))
    hw = h * minv[:, None] * minv[None, :]
    rigid = rigid_basis(x, m)
    # orthonormal basis of the internal (vibrational) space: the complement of the rigid motions
    u, _, _ = np.linalg.svd(rigid.T, full_matrices=True)
    internal = u[:, rigid.shape[0]:]  # (3N, 3N - r)
    vals, vecs = np.linalg.eigh(internal.T @ hw @ internal)
    vectors = _fix_signs((internal @ vecs).T)
    omega = np.sqrt(np.abs(vals) / AMU_A2_FS2)  # rad/fs
    wn = np.sign(vals) * omega / (2 * np.pi) * INV_FS_TO_CM
    return NormalModes(frequencies_cm1=wn, modes=vectors.reshape(-1, len(symbols), 3), masses=m,
                       positions=x.copy(), symbols=symbols, linear=rigid.shape[0] == 5, source=source)


def _calculator(name_or_calc, params: dict):
    """An ASE calculator from a short name (:data:`CALCULATOR_NAMES`), "module:Class", or an instance."""
    if not isinstance(name_or_calc, str):
        return name_or_calc
    target = CALCULATOR_NAMES.get(name_or_calc.strip().lower(), name_or_calc.strip())
    if ":" not in target:
        raise ModeError(f"unknown calculator {name_or_calc!r}; name one of {', '.join(CALCULATOR_NAMES)} or give "
                        "'package.module:ClassName' of an ASE calculator")
    module, _, cls = target.partition(":")
    try:
        factory = getattr(importlib.import_module(module), cls)
    except (ImportError, AttributeError) as exc:
        raise ModeError(f"cannot load the calculator {name_or_calc!r} ({exc})") from None
    try:
        return factory(**params)
    except TypeError as exc:
        raise ModeError(f"cannot make the calculator {name_or_calc!r} with {params} ({exc})") from None


def modes_from_calculator(atoms, calculator, *, delta: float = 0.01, nfree: int = 2,
                          **calculator_params) -> NormalModes:
    """Normal modes of ``atoms`` (an ``ase.Atoms`` at the transition state) by finite differences of forces.

    ``calculator`` is a short name (``"emt"``, ``"lj"``, ``"morse"``), ``"package.module:ClassName"`` of any
    ASE calculator (made with ``calculator_params``), or a calculator object.  The Hessian comes from
    ``ase.vibrations.Vibrations`` (displacements of ``delta`` Å, ``nfree`` of them per coordinate), worked
    in a temporary folder that is removed afterwards; then :func:`modes_from_hessian`.  The calculator runs
    ``6N`` (or ``12N`` with nfree=4) times: fine for cheap models, slow for quantum chemistry.
    """
    from ase.vibrations import Vibrations

    work = atoms.copy()
    work.calc = _calculator(calculator, calculator_params)
    name = calculator if isinstance(calculator, str) else type(calculator).__name__
    with tempfile.TemporaryDirectory(prefix="basinmark-vib-") as tmp:
        vib = Vibrations(work, name=str(Path(tmp) / "vib"), delta=delta, nfree=nfree)
        try:
            vib.run()
            h = vib.get_vibrations(method="standard").get_hessian_2d()
        except BasinmarkError:
            raise
        except Exception as exc:  # a calculator's own failure, in a sentence
            raise ModeError(f"the calculator {name!r} failed while displacing atoms ({type(exc).__name__}: {exc})") \
                from None
    return modes_from_hessian(work.get_chemical_symbols(), work.positions, h, masses=work.get_masses(),
                              source=f"calculator {name}")


# --- re-exports (lazy, so that the modules below may import this one) -----------------------------
def read_modes(path) -> NormalModes:
    """Normal modes from a mode file (TOML or JSON, docs/mode-file.md); see :mod:`basinmark.core.mode_file`."""
    from basinmark.core.mode_file import read_modes as _read

    return _read(path)


def write_modes(path, modes: NormalModes, *, comment: str = "") -> None:
    """Write ``modes`` as a TOML mode file (modes form); see :mod:`basinmark.core.mode_file`."""
    from basinmark.core.mode_file import write_modes as _write

    _write(path, modes, comment=comment)


def align_to_reference(modes: NormalModes, positions, velocities=None):
    """Each run's geometry rotated onto the reference; see :mod:`basinmark.core.mode_projection`."""
    from basinmark.core.mode_projection import align_to_reference as _align

    return _align(modes, positions, velocities)


def project(modes: NormalModes, positions, velocities, run_ids=None):
    """Per run and mode: Q, dQ/dt, energy, phase; see :mod:`basinmark.core.mode_projection`."""
    from basinmark.core.mode_projection import project as _project

    return _project(modes, positions, velocities, run_ids)
