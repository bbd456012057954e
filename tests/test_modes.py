"""Normal modes from a Hessian or a calculator, checked against ase.vibrations (reference library) and
against CODATA constants as scipy.constants carries them."""

import numpy as np
import pytest
import scipy.constants as sc
from ase import Atoms
from ase.build import molecule
from ase.calculators.emt import EMT
from ase.optimize import BFGS
from ase.vibrations import VibrationsData

from basinmark.core.errors import BasinmarkError
from basinmark.core.modes import (
    AMU_A2_FS2,
    INV_FS_TO_CM,
    KCAL_MOL,
    ModeError,
    hessian_factor,
    modes_from_calculator,
    modes_from_hessian,
    rigid_basis,
)


def _relaxed(name: str) -> Atoms:
    a = molecule(name)
    a.calc = EMT()
    BFGS(a, logfile=None).run(fmax=1e-6, steps=1000)
    return a


@pytest.fixture(scope="module")
def water():
    """H2O relaxed with ase's EMT, its modes from our code and ase's VibrationsData of the same Hessian."""
    a = _relaxed("H2O")
    modes = modes_from_calculator(a, "emt")
    from ase.vibrations import Vibrations
    import tempfile

    with tempfile.TemporaryDirectory() as tmp:
        vib = Vibrations(a, name=f"{tmp}/vib")
        vib.run()
        data = vib.get_vibrations()
    return a, modes, data


def _mass_weighted(cartesian: np.ndarray, masses: np.ndarray) -> np.ndarray:
    v = (cartesian * np.sqrt(masses)[:, None]).ravel()
    return v / np.linalg.norm(v)


def test_water_frequencies_and_vectors_match_ase_vibrations(water):
    # reference library: ase.vibrations (finite-difference Hessian, mass-weighted diagonalisation)
    atoms, modes, data = water
    assert modes.n_modes == 3 and not modes.linear and modes.n_imaginary == 0
    ase_freq = np.real(data.get_frequencies())[-3:]
    np.testing.assert_allclose(modes.frequencies_cm1, ase_freq, rtol=1e-6)
    ase_modes = data.get_modes()[-3:]  # Cartesian displacements
    for k in range(3):
        ours = modes.modes[k].ravel()
        theirs = _mass_weighted(ase_modes[k], atoms.get_masses())
        assert abs(ours @ theirs) == pytest.approx(1.0, abs=1e-6)  # equal up to sign
    flat = modes.modes.reshape(3, -1)
    np.testing.assert_allclose(flat @ flat.T, np.eye(3), atol=1e-12)  # orthonormal


def test_linear_molecule_keeps_3n_minus_5_modes():
    # reference library: ase.vibrations; EMT's CO2 bends with an imaginary (degenerate) frequency
    a = _relaxed("CO2")
    modes = modes_from_calculator(a, "emt")
    assert modes.linear and modes.n_modes == 4
    data = VibrationsData.from_2d(a, _hessian_of(a))
    f = data.get_frequencies()
    ref = np.sort(np.where(np.abs(f.imag) > 0, -np.abs(f.imag), f.real))
    ref = ref[np.abs(ref) > 30.0]  # ase keeps the 5 rigid motions (near zero) in its list
    np.testing.assert_allclose(modes.frequencies_cm1, ref, rtol=1e-6)
    assert modes.n_imaginary == 2 and not modes.is_transition_state
    assert any("2 imaginary frequencies" in n and "exactly one" in n for n in modes.notes())


def _hessian_of(atoms: Atoms) -> np.ndarray:
    import tempfile

    from ase.vibrations import Vibrations

    with tempfile.TemporaryDirectory() as tmp:
        work = atoms.copy()
        work.calc = EMT()
        vib = Vibrations(work, name=f"{tmp}/vib")
        vib.run()
        return vib.get_vibrations().get_hessian_2d()


def test_transition_state_hessian_has_one_imaginary_mode(water):
    # a first-order saddle made from the water Hessian by turning its bend downhill; reference: ase's
    # VibrationsData of the same Hessian (imaginary frequencies as complex numbers)
    atoms, modes, _ = water
    h = _hessian_of(atoms)
    m = atoms.get_masses()
    bend = modes.modes[0].ravel() * np.sqrt(np.repeat(m, 3))  # M^1/2 L
    lam = modes.eigenvalues[0]
    saddle_h = h - 2 * lam * np.outer(bend, bend)
    ts = modes_from_hessian(atoms.get_chemical_symbols(), atoms.positions, saddle_h)
    assert ts.is_transition_state and ts.has_imaginary and ts.notes() == []
    assert ts.imaginary.tolist() == [True, False, False]
    f = VibrationsData.from_2d(atoms, saddle_h).get_frequencies()
    imag = f[np.abs(f.imag) > 30.0]
    assert ts.frequencies_cm1[0] == pytest.approx(-abs(imag[0].imag), rel=1e-6)
    assert ts.label(0).startswith("mode 1 (") and "i cm⁻¹" in ts.label(0)
    assert abs(ts.modes[0].ravel() @ modes.modes[0].ravel()) == pytest.approx(1.0, abs=1e-9)
    minimum = modes_from_hessian(atoms.get_chemical_symbols(), atoms.positions, h)
    assert "no imaginary frequency" in minimum.notes()[0]


def test_diatomic_frequency_against_codata():
    # ν̃ = sqrt(k / μ) / (2π c), evaluated in SI with CODATA constants (scipy.constants)
    k_ev = 30.0  # eV/Å²
    x = np.array([[0.0, 0.0, 0.0], [0.0, 0.0, 1.1]])
    h = np.zeros((6, 6))
    h[2, 2] = h[5, 5] = k_ev
    h[2, 5] = h[5, 2] = -k_ev
    modes = modes_from_hessian(["C", "O"], x, h, masses=[12.0, 15.995])
    mu = 12.0 * 15.995 / (12.0 + 15.995) * sc.atomic_mass
    k_si = k_ev * sc.electron_volt / 1e-20
    expected = np.sqrt(k_si / mu) / (2 * np.pi * sc.c * 100)
    assert modes.n_modes == 1 and modes.linear
    assert modes.frequencies_cm1[0] == pytest.approx(expected, rel=1e-6)  # ase.units: older CODATA


def test_unit_constants_against_codata():
    # CODATA via scipy.constants; ase.units carries an older release, so 1e-6 relative
    assert AMU_A2_FS2 == pytest.approx(sc.atomic_mass * 1e10 / sc.electron_volt, rel=1e-6)
    assert INV_FS_TO_CM == pytest.approx(1e15 / (sc.c * 100), rel=1e-9)
    assert KCAL_MOL == pytest.approx(4184.0 / sc.N_A / sc.electron_volt, rel=1e-6)
    hartree_bohr2 = sc.physical_constants["Hartree energy in eV"][0] / (sc.physical_constants["Bohr radius"][0]
                                                                       * 1e10) ** 2
    assert hessian_factor("hartree/bohr^2") == pytest.approx(hartree_bohr2, rel=1e-6)
    assert hessian_factor("kcal/mol/Å^2") == pytest.approx(KCAL_MOL)
    assert hessian_factor("kJ/mol/A^2") == pytest.approx(1000.0 / sc.N_A / sc.electron_volt, rel=1e-6)
    with pytest.raises(ValueError, match="unknown Hessian unit"):
        hessian_factor("eV/nm^2")


def test_modes_are_free_of_rigid_motion_and_rotation_invariant(water):
    atoms, modes, _ = water
    rigid = rigid_basis(atoms.positions, atoms.get_masses())
    assert rigid.shape == (6, 9)
    np.testing.assert_allclose(modes.modes.reshape(3, -1) @ rigid.T, 0.0, atol=1e-10)
    # the same molecule turned and moved: same frequencies (the Hessian turns with it)
    from scipy.spatial.transform import Rotation

    r = Rotation.from_euler("zyx", [40, -25, 70], degrees=True).as_matrix()
    big = np.kron(np.eye(3), r)
    h = _hessian_of(atoms)
    turned = modes_from_hessian(atoms.get_chemical_symbols(), atoms.positions @ r.T + 3.0, big @ h @ big.T)
    np.testing.assert_allclose(turned.frequencies_cm1, modes.frequencies_cm1, rtol=1e-9)


def test_sign_convention_largest_component_positive(water):
    _, modes, _ = water
    for v in modes.modes.reshape(modes.n_modes, -1):
        assert v[np.argmax(np.abs(v))] > 0


def test_bad_hessians_are_refused_with_sentences():
    x = np.array([[0.0, 0.0, 0.0], [0.0, 0.0, 1.0]])
    with pytest.raises(ModeError, match="must be 6 × 6"):
        modes_from_hessian(["H", "H"], x, np.zeros((3, 3)))
    h = np.eye(6)
    h[0, 1] = 5.0
    with pytest.raises(ModeError, match=r"not symmetric: element \(1, 2\)"):
        modes_from_hessian(["H", "H"], x, h)
    with pytest.raises(ModeError, match="unknown chemical symbol"):
        modes_from_hessian(["H", "Xx"], x, np.eye(6))
    with pytest.raises(ModeError, match="at least two atoms"):
        modes_from_hessian(["H"], x[:1], np.eye(3))
    assert issubclass(ModeError, BasinmarkError)


def test_calculator_by_module_path_and_unknown_name():
    a = Atoms("H2", positions=[[0, 0, 0], [0, 0, 0.9]])
    m = modes_from_calculator(a, "ase.calculators.morse:MorsePotential", epsilon=4.0, r0=0.9, rho0=6.0)
    assert m.n_modes == 1 and m.frequencies_cm1[0] > 0 and m.source == "calculator ase.calculators.morse:MorsePotential"
    with pytest.raises(ModeError, match="unknown calculator 'nonsense'"):
        modes_from_calculator(a, "nonsense")
    with pytest.raises(ModeError, match="cannot load the calculator"):
        modes_from_calculator(a, "no_such_module_xyz:Calc")
