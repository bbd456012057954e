"""The demo's dynamics: our velocity Verlet against ase's, energy conservation, thermal sampling."""

import numpy as np
import pytest
import scipy.constants as sc
from ase import units
from ase.md.velocitydistribution import MaxwellBoltzmannDistribution
from ase.md.verlet import VelocityVerlet

from basinmark.demo.integrate import velocity_verlet
from basinmark.demo.sampling import (
    harmonic_mean_energy,
    kinetic_energy,
    maxwell_boltzmann,
    normal_modes,
    find_saddle,
    quasiclassical,
    remove_rigid_motion,
)
from basinmark.demo.surface import N_ATOMS, Surface

KCAL = units.kcal / units.mol  # eV per kcal/mol
T = 298.15
KB_EV = sc.k / sc.e  # scipy.constants (CODATA 2018)


@pytest.fixture(scope="module")
def surface():
    return Surface()


@pytest.fixture(scope="module")
def saddle(surface):
    return find_saddle(surface)


@pytest.fixture(scope="module")
def modes(surface, saddle):
    return normal_modes(surface, saddle)


def test_velocity_verlet_matches_ase(surface, saddle, modes):
    # reference library: ase.md.verlet.VelocityVerlet on the same calculator and start
    start = quasiclassical(modes, saddle, 2, T, np.random.default_rng(11))
    dt, n = 0.2, 250  # 50 fs
    ours = velocity_verlet(surface, start.positions, start.velocities, dt=dt, max_time=n * dt, save_every=n)
    for k in range(2):
        atoms = surface.atoms(start.positions[k])
        atoms.set_velocities(start.velocities[k] * units.Angstrom / units.fs)  # Å/fs -> ase units
        VelocityVerlet(atoms, timestep=dt * units.fs).run(n)
        # same algorithm, same forces: differences are rounding only (tolerance 1e-7 Å)
        np.testing.assert_allclose(ours.positions[k][-1], atoms.positions, atol=1e-7)
        assert ours.kinetic[k][-1] == pytest.approx(atoms.get_kinetic_energy(), abs=1e-8)
        assert ours.potential[k][-1] == pytest.approx(atoms.get_potential_energy(), abs=1e-8)
        assert ours.times[k][-1] == pytest.approx(n * dt)


def test_energy_is_conserved_over_300_fs(surface, saddle, modes):
    # drift of the total energy below 1 kcal/mol over a few hundred fs: common practice, no source
    start = quasiclassical(modes, saddle, 8, T, np.random.default_rng(5))
    h = velocity_verlet(surface, start.positions, start.velocities, dt=0.2, max_time=300.0, save_every=10)
    for k in range(8):
        total = h.potential[k] + h.kinetic[k]
        assert np.max(np.abs(total - total[0])) < 1.0 * KCAL


def test_stop_test_ends_runs_early(surface, saddle, modes):
    start = quasiclassical(modes, saddle, 3, T, np.random.default_rng(2))

    def stop(step, x, active):  # stop run 1 at the first saved frame after 10 fs
        return (active == 1) & (step * 0.2 >= 10.0)

    h = velocity_verlet(surface, start.positions, start.velocities, dt=0.2, max_time=20.0, save_every=10, stop=stop)
    assert h.times[1][-1] == pytest.approx(10.0)
    assert h.times[0][-1] == pytest.approx(20.0) and h.times[2][-1] == pytest.approx(20.0)
    np.testing.assert_allclose(h.times[0], np.arange(0, 20.01, 2.0))


@pytest.mark.filterwarnings("ignore::DeprecationWarning")
def test_maxwell_boltzmann_mean_kinetic_energy_is_equipartition(surface):
    # equipartition: <E_kin> = 3/2 N k_B T (k_B from scipy.constants); reference sampler:
    # ase.md.velocitydistribution.MaxwellBoltzmannDistribution
    rng = np.random.default_rng(0)
    samples = 4000
    ours = kinetic_energy(maxwell_boltzmann(surface.masses, T, rng, size=samples), surface.masses)
    expected = 1.5 * N_ATOMS * KB_EV * T
    # relative standard error of the mean: sqrt(2 / (3 N samples)) = 0.4 %; allow 1.5 %
    assert ours.mean() == pytest.approx(expected, rel=0.015)
    atoms = surface.atoms()
    ase_ke = []
    ase_rng = np.random.default_rng(1)
    for _ in range(samples // 8):
        MaxwellBoltzmannDistribution(atoms, temperature_K=T, rng=ase_rng)
        ase_ke.append(atoms.get_kinetic_energy())
    # 500 ase samples: relative standard error 1.2 %; allow 4 %
    assert np.mean(ase_ke) == pytest.approx(expected, rel=0.04)
    assert ours.mean() == pytest.approx(np.mean(ase_ke), rel=0.05)


def test_harmonic_mean_energy_is_planck(modes):
    # (n_bar + 1/2) h nu with n_bar = 1/(exp(h nu / kT) - 1) (Planck); constants from scipy.constants
    for wn in (100.0, 1000.0, 3000.0):
        nu = wn * 100 * sc.c  # Hz
        x = sc.h * nu / (sc.k * T)
        expected = sc.h * nu * (0.5 + 1 / np.expm1(x)) / sc.e
        assert harmonic_mean_energy(wn, T) == pytest.approx(expected, rel=1e-6)
    assert harmonic_mean_energy(1000.0, 0.0) == pytest.approx(0.5 * sc.h * 1000.0 * 100 * sc.c / sc.e, rel=1e-6)


def test_quasiclassical_mode_energies_have_the_oscillator_mean(modes, saddle):
    runs = 6000
    start = quasiclassical(modes, saddle, runs, T, np.random.default_rng(4))
    expected = harmonic_mean_energy(modes.wavenumbers[1:], T)
    hnu = 2 * harmonic_mean_energy(modes.wavenumbers[1:], 0.0)
    nbar = expected / hnu - 0.5
    e = start.mode_energies[:, 1:]
    # standard error from the oscillator's own variance, (h nu)^2 n_bar (n_bar + 1) (Bose-Einstein)
    se = hnu * np.sqrt(nbar * (nbar + 1) / runs)
    # each real mode's mean within 4.5 standard errors of (n_bar + 1/2) h nu
    assert np.all(np.abs(e.mean(axis=0) - expected) < 4.5 * se)
    # every mode holds whole quanta on top of its zero-point energy
    n = e / hnu - 0.5
    np.testing.assert_allclose(n, np.round(n), atol=1e-9)
    assert n.min() > -1e-9
    # reaction coordinate: E = -kT ln U has mean kT; direction random
    assert start.mode_energies[:, 0].mean() == pytest.approx(KB_EV * T, rel=0.05)


def test_quasiclassical_kinetic_energy_and_momentum(modes, saddle, surface):
    start = quasiclassical(modes, saddle, 200, T, np.random.default_rng(9))
    m = surface.masses
    p = (m[None, :, None] * start.velocities).sum(axis=1)
    np.testing.assert_allclose(p, 0.0, atol=1e-10)
    com = (m[:, None] * start.positions).sum(axis=1, keepdims=True) / m.sum()
    ang = (m[None, :, None] * np.cross(start.positions - com, start.velocities)).sum(axis=1)
    np.testing.assert_allclose(ang, 0.0, atol=1e-8)
    # half the runs head each way along the reaction coordinate (binomial, 200 runs: 5 sigma ~ 35)
    mw = (start.velocities * np.sqrt(m)[None, :, None]).reshape(200, -1) @ modes.vectors[0].ravel()
    assert 65 < np.sum(mw > 0) < 135
    # kinetic energy is at most the total given to the modes (virial: about half on average)
    ke = kinetic_energy(start.velocities, m)
    assert np.all(ke <= start.mode_energies.sum(axis=1) * 1.001)
    assert 0.35 < ke.mean() / start.mode_energies.sum(axis=1).mean() < 0.65


def test_remove_rigid_motion_keeps_internal_motion(surface):
    rng = np.random.default_rng(1)
    x = surface.reference
    v = rng.normal(size=(N_ATOMS, 3))
    v0 = remove_rigid_motion(x, v, surface.masses)
    v1 = remove_rigid_motion(x, v0, surface.masses)
    np.testing.assert_allclose(v0, v1, atol=1e-12)  # a projection: applying it twice changes nothing


def test_one_transition_state_feeds_both_products(surface, saddle, modes):
    # the point of the surface: runs from the one saddle end in either product, alpha more often
    from basinmark.demo.generate import region_track

    start = quasiclassical(modes, saddle, 60, T, np.random.default_rng(21))
    ends = []
    for sign in (1.0, -1.0):
        h = velocity_verlet(surface, start.positions, sign * start.velocities, dt=0.2, max_time=120.0, save_every=50)
        ends.append(np.array([region_track(h.positions[k][-1]) for k in range(60)]))
    products = np.concatenate([e[e > 0] for e in ends])
    n_alpha, n_beta = int(np.sum(products == 1)), int(np.sum(products == 2))
    assert n_beta >= 2 and n_alpha > n_beta
