"""Units in one place.

Internal units: length in Å, time in fs, energy in eV (ASE's convention, so
``ase.Atoms`` and ASE calculators need no conversion).  Values from
``ase.units`` (CODATA 2014 in current ase); 1 cal = 4.184 J exactly
(thermochemical calorie).
"""

from __future__ import annotations

from ase import units as _u

#: energy units a person may choose, in eV per unit
ENERGY_UNITS: dict[str, float] = {
    "eV": 1.0,
    "kcal/mol": _u.kcal / _u.mol,
    "kJ/mol": _u.kJ / _u.mol,
    "hartree": _u.Hartree,
}

#: time units accepted in set manifests, in fs per unit
TIME_UNITS: dict[str, float] = {"fs": 1.0, "ps": 1000.0, "as": 1e-3, "au": _u._aut * 1e15}

#: length units accepted in set manifests, in Å per unit
LENGTH_UNITS: dict[str, float] = {"angstrom": 1.0, "Å": 1.0, "A": 1.0, "bohr": _u.Bohr, "nm": 10.0, "pm": 0.01}


def _lookup(table: dict[str, float], unit: str, kind: str) -> float:
    for key, value in table.items():
        if key.lower() == unit.strip().lower():
            return value
    raise ValueError(f"unknown {kind} unit {unit!r}; use one of: {', '.join(table)}")


def energy_factor(unit: str) -> float:
    """eV per one ``unit`` of energy."""
    return _lookup(ENERGY_UNITS, unit, "energy")


def time_factor(unit: str) -> float:
    """fs per one ``unit`` of time."""
    return _lookup(TIME_UNITS, unit, "time")


def length_factor(unit: str) -> float:
    """Å per one ``unit`` of length."""
    return _lookup(LENGTH_UNITS, unit, "length")


def convert_energy(value, from_unit: str, to_unit: str):
    """Convert an energy (scalar or array) between two of :data:`ENERGY_UNITS`."""
    return value * (energy_factor(from_unit) / energy_factor(to_unit))
