"""The demo's model surface: analytic forces, the saddle, its normal modes, where its valleys lead."""

import numpy as np
import pytest
from ase import Atoms
from hypothesis import given, settings
from hypothesis import strategies as st

from basinmark.demo.sampling import find_saddle, landmarks, normal_modes
from basinmark.demo.surface import N_ATOMS, PAIR_A, PAIR_B, PAIR_C, SYMBOLS, Surface

KCAL = 0.0433641  # eV per kcal/mol (ase.units.kcal / ase.units.mol)


@pytest.fixture(scope="module")
def surface():
    return Surface()


@pytest.fixture(scope="module")
def saddle(surface):
    return find_saddle(surface)


@pytest.fixture(scope="module")
def modes(surface, saddle):
    return normal_modes(surface, saddle)


@pytest.fixture(scope="module")
def pts(surface, saddle, modes):
    return landmarks(surface, saddle, modes)


def _dist(x, pair):
    return float(np.linalg.norm(x[pair[0]] - x[pair[1]]))


def _numeric_forces(atoms, h):
    f = np.zeros((len(atoms), 3))
    x0 = atoms.positions.copy()
    for i in range(len(atoms)):
        for k in range(3):
            e = []
            for s in (h, -h):
                x = x0.copy()
                x[i, k] += s
                atoms.positions = x
                e.append(atoms.get_potential_energy())
            f[i, k] = -(e[0] - e[1]) / (2 * h)
    atoms.positions = x0
    return f


@settings(max_examples=15)
@given(seed=st.integers(0, 2**32 - 1), scale=st.sampled_from([0.05, 0.2, 0.4]))
def test_analytic_forces_match_central_differences(surface, seed, scale):
    # Central differences of the energy with step h = 1e-5 Å have error ~h^2 f''' ~ 1e-9 eV/Å plus
    # rounding ~1e-16 |E| / 1e-5 Å, which grows with the energy: on strongly compressed geometries (forces
    # ~3e3 eV/Å) the difference reached 8e-6 eV/Å, i.e. 3e-9 relative.  Tolerance 2e-6 eV/Å absolute plus
    # 1e-8 relative to the largest force covers both with room to spare.
    rng = np.random.default_rng(seed)
    atoms = surface.atoms(surface.reference + rng.normal(scale=scale, size=(N_ATOMS, 3)))
    analytic = atoms.get_forces()
    numeric = _numeric_forces(atoms, 1e-5)
    assert np.abs(analytic - numeric).max() < 2e-6 + 1e-8 * np.abs(analytic).max()


def test_forces_match_central_differences_near_products(surface, pts):
    # the reactive terms switch on as the ring closes: check there too (same step and tolerance)
    rng = np.random.default_rng(7)
    for name in ("alpha", "beta"):
        atoms = surface.atoms(pts[name] + rng.normal(scale=0.1, size=(N_ATOMS, 3)))
        assert np.abs(atoms.get_forces() - _numeric_forces(atoms, 1e-5)).max() < 2e-6


def test_forces_sum_to_zero_and_batch_matches_single(surface):
    rng = np.random.default_rng(3)
    batch = surface.reference[None] + rng.normal(scale=0.2, size=(5, N_ATOMS, 3))
    e, f = surface.energy_forces(batch)
    assert e.shape == (5,) and f.shape == (5, N_ATOMS, 3)
    for k in range(5):
        e1, f1 = surface.energy_forces(batch[k])
        assert e1 == pytest.approx(e[k], abs=1e-12)
        np.testing.assert_allclose(f1, f[k], atol=1e-12)
    # Newton's third law: internal forces have no net force
    np.testing.assert_allclose(f.sum(axis=1), 0.0, atol=1e-10)


def test_calculator_rejects_wrong_atom_count(surface):
    atoms = Atoms("H2", positions=[[0, 0, 0], [0, 0, 0.74]])
    atoms.calc = surface.atoms().calc
    with pytest.raises(ValueError, match="12 atoms"):
        atoms.get_potential_energy()


def test_molecule_uses_real_elements():
    assert len(SYMBOLS) == N_ATOMS == 12
    assert set(SYMBOLS) == {"C", "O", "H"}


def test_saddle_has_zero_gradient_and_one_imaginary_mode(surface, saddle, modes):
    _, f = surface.energy_forces(saddle)
    assert np.abs(f).max() < 1e-5
    assert len(modes.wavenumbers) == 3 * N_ATOMS - 6
    assert modes.n_imaginary == 1
    assert modes.wavenumbers[0] < -100  # a clear barrier, not a flat shoulder
    # realistic spectrum: lowest real mode above 50 cm^-1, C-H stretches near 3000 cm^-1
    # (common practice, no source); the stiff H-C-C bends of this surface push the highest C-H
    # stretch up to about 3500 cm^-1, which we accept for an invented molecule
    assert modes.wavenumbers[1] > 50
    assert 2900 < modes.wavenumbers[-1] < 3550


def test_frequencies_agree_with_ase_vibrations(surface, saddle, modes, tmp_path, monkeypatch):
    # reference library: ase.vibrations.Vibrations (finite differences of the same calculator's forces)
    from ase.vibrations import Vibrations

    monkeypatch.chdir(tmp_path)
    atoms = surface.atoms(saddle)
    vib = Vibrations(atoms, delta=1e-3, nfree=2, name="vib")
    vib.run()
    freq = vib.get_frequencies()  # cm^-1, complex for imaginary modes
    ref = np.where(np.abs(freq.imag) > np.abs(freq.real), -np.abs(freq.imag), freq.real)
    ref = np.sort(ref)
    ref = np.concatenate([ref[:1], ref[7:]])  # drop the six near-zero rigid motions (ase keeps them)
    np.testing.assert_allclose(modes.wavenumbers, ref, atol=2.0)


def test_valleys_lead_to_reactant_and_two_products_of_different_depth(surface, saddle, pts):
    e_ts = float(surface.energy(saddle))
    e = {k: (float(surface.energy(x)) - e_ts) / KCAL for k, x in pts.items()}
    # barrier from the reactant: a few to 20 kcal/mol (the brief's design range)
    assert 3 < -e["reactant"] < 20
    # products well below the saddle, alpha deeper than beta
    assert e["alpha"] < e["beta"] < e["reactant"]
    a, b, c = (_dist(pts["alpha"], p) for p in (PAIR_A, PAIR_B, PAIR_C))
    assert a < 1.75 and b < 1.75 and c > 2.3
    a, b, c = (_dist(pts["beta"], p) for p in (PAIR_A, PAIR_B, PAIR_C))
    assert a < 1.75 and c < 1.75 and b > 2.3
    assert _dist(pts["reactant"], PAIR_A) > 2.9
    # at the saddle the partner distances are still long and nearly equal (one shared transition state)
    assert abs(_dist(saddle, PAIR_B) - _dist(saddle, PAIR_C)) < 0.1
    assert min(_dist(saddle, PAIR_B), _dist(saddle, PAIR_C)) > 2.3


def test_ridge_after_the_saddle(surface, saddle, pts):
    """The structure between alpha and beta is a saddle below the transition state: both products
    lie downhill of the one transition state and the path between them crosses the ridge."""
    bridge = find_saddle(surface, 0.5 * (pts["alpha"] + pts["beta"]))
    mb = normal_modes(surface, bridge)
    assert mb.n_imaginary == 1
    e = float(surface.energy(bridge))
    assert float(surface.energy(pts["alpha"])) < e < float(surface.energy(saddle))
    assert _dist(bridge, PAIR_A) < 1.8


def test_dihedral_angles_agree_with_ase():
    # reference library: ase.Atoms.get_dihedral (degrees in [0, 360)); gradient against central differences
    from ase import Atoms

    from basinmark.demo.surface import dihedral_angles

    rng = np.random.default_rng(3)
    x = rng.normal(size=(6, 3)) * 1.5
    quads = np.array([[0, 1, 2, 3], [5, 4, 3, 2], [1, 3, 0, 5]])
    phi, grad = dihedral_angles(x, quads)
    atoms = Atoms("C6", positions=x)
    ref = [atoms.get_dihedral(*q) for q in quads]
    np.testing.assert_allclose(np.degrees(phi) % 360, ref, atol=1e-9)
    h = 1e-6
    for n, q in enumerate(quads):
        for m, atom in enumerate(q):
            for k in range(3):
                xp, xm = x.copy(), x.copy()
                xp[atom, k] += h
                xm[atom, k] -= h
                num = (dihedral_angles(xp, quads)[0][n] - dihedral_angles(xm, quads)[0][n]) / (2 * h)
                assert abs(num - grad[n, m, k]) < 1e-6
