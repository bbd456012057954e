"""Unit conversions against CODATA values as scipy.constants carries them (reference library); ase.units
uses an older CODATA release, so agreement is to about 1e-7 relative."""

import pytest
import scipy.constants as sc

from basinmark.core.units import convert_energy, energy_factor, length_factor, time_factor

EV = sc.physical_constants["electron volt"][0]  # J


def test_energy_units_against_codata():
    # thermochemical calorie: 1 cal = 4.184 J exactly
    assert energy_factor("kcal/mol") == pytest.approx(4184.0 / sc.N_A / EV, rel=1e-6)
    assert energy_factor("kJ/mol") == pytest.approx(1000.0 / sc.N_A / EV, rel=1e-6)
    assert energy_factor("hartree") == pytest.approx(sc.physical_constants["Hartree energy in eV"][0], rel=1e-6)
    assert convert_energy(1.0, "kcal/mol", "kJ/mol") == pytest.approx(4.184, rel=1e-12)
    assert convert_energy(2.5, "eV", "eV") == 2.5


def test_length_and_time_units_against_codata():
    assert length_factor("bohr") == pytest.approx(sc.physical_constants["Bohr radius"][0] * 1e10, rel=1e-6)
    assert length_factor("nm") == 10.0 and length_factor("Å") == 1.0
    assert time_factor("ps") == 1000.0
    assert time_factor("au") == pytest.approx(sc.physical_constants["atomic unit of time"][0] * 1e15, rel=1e-6)


def test_unknown_units_say_what_is_known():
    with pytest.raises(ValueError, match="unknown energy unit 'kcal'.*kcal/mol"):
        energy_factor("kcal")
