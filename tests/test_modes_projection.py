"""Runs' starting points projected on the normal modes: displacement, velocity, energy, phase, alignment."""

import numpy as np
import pytest
import scipy.constants as sc
from scipy.spatial.transform import Rotation

from basinmark.core.modes import ModeError, modes_from_hessian, project
from basinmark.core.mode_projection import UNITS, align_to_reference, project_arrays, wide


def _water_like():
    """A bent triatomic with a harmonic Hessian of our own (springs on the three distances)."""
    x = np.array([[0.0, 0.0, 0.12], [0.0, 0.76, -0.47], [0.0, -0.76, -0.47]])
    pairs = [((0, 1), 50.0), ((0, 2), 50.0), ((1, 2), 8.0)]
    h = np.zeros((9, 9))
    for (i, j), k in pairs:
        u = (x[i] - x[j]) / np.linalg.norm(x[i] - x[j])
        block = k * np.outer(u, u)
        for a, b, s in ((i, i, 1), (j, j, 1), (i, j, -1), (j, i, -1)):
            h[3 * a:3 * a + 3, 3 * b:3 * b + 3] += s * block
    return modes_from_hessian(["O", "H", "H"], x, h), h


MODES, HESSIAN = _water_like()


def _along(modes, k, q, qdot):
    """Geometry and velocity of a displacement q and velocity qdot along mode k alone (built by hand)."""
    d = modes.modes[k] / np.sqrt(modes.masses)[:, None]
    return modes.positions + q * d, qdot * d


@pytest.mark.parametrize("k", [0, 1, 2])
def test_displacement_along_one_mode_projects_onto_it_alone(k):
    x, v = _along(MODES, k, 0.05, -0.002)
    a = project_arrays(MODES, x[None], v[None])
    expected_q = np.zeros(3)
    expected_q[k] = 0.05
    expected_v = np.zeros(3)
    expected_v[k] = -0.002
    np.testing.assert_allclose(a["Q"][0], expected_q, atol=1e-12)
    np.testing.assert_allclose(a["Qdot"][0], expected_v, atol=1e-12)
    assert a["rmsd"][0] < 0.05


def test_turned_and_moved_run_projects_the_same():
    # the run's t = 0 geometry arrives rotated and shifted (another program's orientation); the Kabsch
    # alignment must undo it.  Reference for the rotation: scipy.spatial.transform.Rotation
    x, v = _along(MODES, 1, 0.03, 0.004)
    turn = Rotation.from_rotvec([0.4, -1.1, 0.7])
    x2 = turn.apply(x) + np.array([5.0, -2.0, 1.0])
    v2 = turn.apply(v)
    plain = project_arrays(MODES, x[None], v[None])
    turned = project_arrays(MODES, x2[None], v2[None])
    for key in ("Q", "Qdot", "energy_kcal_mol"):
        np.testing.assert_allclose(turned[key], plain[key], atol=1e-10)
    # the phase of the excited mode only: modes at rest have no phase to speak of (atan2 of rounding noise)
    assert turned["phase"][0, 1] == pytest.approx(plain["phase"][0, 1], abs=1e-8)
    aligned, vel, rmsd = align_to_reference(MODES, x2[None], v2[None])
    # a pure vibration leaves no net rotation, so the alignment returns the hand-built geometry
    np.testing.assert_allclose(aligned[0], x, atol=2e-3)
    assert rmsd[0] == pytest.approx(plain["rmsd"][0], abs=1e-9)


def test_energy_per_mode_against_direct_kinetic_and_harmonic_energy():
    # kinetic energy ½ Σ m v² and harmonic potential ½ dxᵀ H dx computed here in SI (CODATA via
    # scipy.constants), to kcal/mol with the thermochemical calorie (4.184 J)
    kcal_per_mol = 4184.0 / sc.N_A  # J
    x, v = _along(MODES, 2, 0.0, 0.01)
    e = project_arrays(MODES, x[None], v[None])["energy_kcal_mol"][0]
    ke_j = 0.5 * np.sum(MODES.masses[:, None] * sc.atomic_mass * (v * 1e5) ** 2)  # Å/fs = 1e5 m/s
    assert e[2] == pytest.approx(ke_j / kcal_per_mol, rel=1e-6)
    assert e.sum() == pytest.approx(ke_j / kcal_per_mol, rel=1e-6)
    x, v = _along(MODES, 0, 0.04, 0.0)
    e = project_arrays(MODES, x[None], v[None])["energy_kcal_mol"][0]
    dx = (x - MODES.positions).ravel()
    pe_j = 0.5 * dx @ HESSIAN @ dx * sc.electron_volt
    assert e[0] == pytest.approx(pe_j / kcal_per_mol, rel=1e-6)


@pytest.mark.parametrize("phi", [0.0, 0.7, np.pi / 2, 2.5, -0.4, -2.9])
def test_phase_of_a_harmonic_oscillation(phi):
    # Q(t) = A cos(ω t + φ): at t = 0 the phase is φ; a quarter period later φ + π/2 (wrapped)
    k, amp = 1, 0.06
    w = MODES.angular_frequencies[k]
    for t in (0.0, 0.5 * np.pi / w):
        q = amp * np.cos(w * t + phi)
        qdot = -amp * w * np.sin(w * t + phi)
        x, v = _along(MODES, k, q, qdot)
        got = project_arrays(MODES, x[None], v[None])["phase"][0, k]
        assert np.angle(np.exp(1j * (got - (w * t + phi)))) == pytest.approx(0.0, abs=1e-9)


def test_table_long_and_wide():
    x1, v1 = _along(MODES, 0, 0.02, 0.0)
    x2, v2 = _along(MODES, 2, 0.0, 0.003)
    table = project(MODES, np.stack([x1, x2]), np.stack([v1, v2]), run_ids=["run-1", "run-2"])
    assert list(table.columns) == ["run", "mode", "frequency_cm1", "imaginary", "Q", "Qdot", "energy_kcal_mol",
                                   "phase", "rmsd"]
    assert len(table) == 6 and table["mode"].tolist() == [1, 2, 3, 1, 2, 3]
    assert table.attrs["units"] == UNITS and UNITS["energy_kcal_mol"] == "kcal/mol"
    w = wide(table)
    assert w.index.tolist() == ["run-1", "run-2"]
    assert w.loc["run-1", "Q_1"] == pytest.approx(0.02) and w.loc["run-2", "Qdot_3"] == pytest.approx(0.003)
    assert "phase_2" in w.columns and "energy_kcal_mol_3" in w.columns


def test_shapes_that_do_not_match_are_refused():
    with pytest.raises(ModeError, match=r"positions must have shape \(runs, 3, 3\)"):
        project(MODES, np.zeros((2, 4, 3)), np.zeros((2, 4, 3)))
    with pytest.raises(ModeError, match="2 run ids for 1 runs"):
        project(MODES, MODES.positions[None], np.zeros((1, 3, 3)), run_ids=["a", "b"])
    with pytest.raises(ModeError, match="same shape"):
        align_to_reference(MODES, np.stack([MODES.positions] * 2), np.zeros((1, 3, 3)))


def test_far_start_shows_in_rmsd():
    x = MODES.positions.copy()
    x[1] += [0.0, 0.8, 0.0]
    a = project_arrays(MODES, x[None], np.zeros((1, 3, 3)))
    assert a["rmsd"][0] > 0.1


def test_linear_molecule_projects_without_warnings():
    # a linear molecule's turn about its own axis is free: the alignment must not warn about it
    import warnings

    x = np.array([[0.0, 0.0, -1.16], [0.0, 0.0, 0.0], [0.0, 0.0, 1.16]])
    h = np.zeros((9, 9))
    for i, j in ((0, 1), (1, 2)):
        block = 60.0 * np.outer([0, 0, 1.0], [0, 0, 1.0])
        for a, b, s in ((i, i, 1), (j, j, 1), (i, j, -1), (j, i, -1)):
            h[3 * a:3 * a + 3, 3 * b:3 * b + 3] += s * block
    modes = modes_from_hessian(["O", "C", "O"], x, h)
    assert modes.linear
    k = int(np.argmax(modes.frequencies_cm1))
    xs, vs = _along(modes, k, 0.02, 0.001)
    turn = Rotation.from_rotvec([0.3, 0.2, -0.5])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        a = project_arrays(modes, turn.apply(xs)[None], turn.apply(vs)[None])
    assert a["Q"][0, k] == pytest.approx(0.02, abs=1e-9) and a["Qdot"][0, k] == pytest.approx(0.001, abs=1e-9)
