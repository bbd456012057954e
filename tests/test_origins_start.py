"""Starting conditions at t = 0: velocities read or estimated (and said so), monitors and their rates, one TS."""

from __future__ import annotations

import numpy as np
import pytest
from origins_sets import MONITORS, SYMBOLS, rate_bc, toy_runs, toy_set, write_toy_set

from basinmark.core.origins_start import aligned_rmsd, monitor_coordinates, starting_conditions
from basinmark.core.origins_velocities import CENTRAL, FROM_MOMENTA, FROM_VELOCITIES, declared_columns
from basinmark.core.sets import open_set


def test_estimated_velocities_are_the_straight_line_velocities_and_are_said_to_be_estimated():
    tset, _ = toy_set(n=12, seed=3)
    truth = {rid: v0 for rid, _t, _p, v0, _o in toy_runs(12, 3)}
    start = starting_conditions(tset, MONITORS)
    assert start.sources == [CENTRAL] * 12
    for k, rid in enumerate(start.run_ids):
        # positions are stored as float32 (1e-6 Å at 3 Å) and differenced over 4 fs
        np.testing.assert_allclose(start.velocities[k], truth[rid], atol=2e-6)
    assert any("estimated" in w and "12 of 12" in w for w in start.warnings)


def test_rates_of_monitors_match_the_analytic_derivative_of_a_distance():
    # d|r|/dt = r·ṙ/|r| (calculus; independent of our directional difference)
    rng = np.random.default_rng(5)
    x = rng.normal(0, 1.0, (7, 4, 3))
    v = rng.normal(0, 0.02, (7, 4, 3))
    cols, coords = monitor_coordinates(x, v, MONITORS)
    expected = [rate_bc(x[k], v[k]) for k in range(7)]
    np.testing.assert_allclose(cols["dr_bc/dt [angstrom/fs]"], expected, rtol=1e-7, atol=1e-12)
    np.testing.assert_allclose(cols["r_bc [angstrom]"], np.linalg.norm(x[:, 2] - x[:, 1], axis=-1))
    assert [c.kind for c in coords[:2]] == ["value", "rate"]


def test_dihedral_rate_matches_a_fine_difference_of_ase_dihedral():
    # reference: ase's Atoms.get_dihedral at x ± h·v (a library we did not write), across the ±180° seam too
    from ase import Atoms

    x = np.array([[0.0, 1.0, 0.0], [0.0, 0.0, 0.0], [1.5, 0.0, 0.0], [1.5, -1.0, 0.01]])  # near 180°
    v = np.array([[0.0, 0.0, 0.02], [0.0, 0.0, 0.0], [0.0, 0.0, 0.0], [0.0, 0.0, -0.03]])
    cols, _ = monitor_coordinates(x[None], v[None], {"phi": (0, 1, 2, 3)})
    h = 1e-4

    def ase_phi(p):
        return Atoms("C4", positions=p).get_dihedral(0, 1, 2, 3)

    d = ase_phi(x + h * v) - ase_phi(x - h * v)
    d = (d + 180.0) % 360.0 - 180.0
    assert cols["dphi/dt [deg/fs]"][0] == pytest.approx(d / (2 * h), rel=1e-5)


def test_velocities_from_a_velocity_column_are_read_not_estimated(tmp_path):
    write_toy_set(tmp_path, n=6, seed=2, velocities="vel")
    truth = {rid: v0 for rid, _t, _p, v0, _o in toy_runs(6, 2)}
    tset = open_set(tmp_path, use_cache=False)
    start = starting_conditions(tset, MONITORS)
    assert start.sources == [FROM_VELOCITIES] * 6
    for k, rid in enumerate(start.run_ids):
        np.testing.assert_allclose(start.velocities[k], truth[rid], atol=1e-8)
    assert not any("estimated" in w for w in start.warnings)
    assert declared_columns(tset[0].sources[0].path) == ["species", "pos", "vel"]


def test_velocities_from_momenta_written_by_ase_match_ase_velocities(tmp_path):
    # reference: ase writes the momenta and computes the velocities (Atoms.get_velocities, Å per ase time unit)
    from ase import Atoms, units
    from ase.io import write

    rng = np.random.default_rng(9)
    (tmp_path / "runs").mkdir()
    frames = []
    for t in (-2.0, 0.0, 2.0):
        a = Atoms("".join(SYMBOLS), positions=np.array(toy_runs(1, 1)[0][2][0]) + 0.01 * t)
        frames.append(a)
    p0 = rng.normal(0, 0.3, (4, 3))
    for a in frames:
        a.set_momenta(p0)
    for a, t in zip(frames, (-2.0, 0.0, 2.0)):
        a.info["time"] = t
    write(tmp_path / "runs" / "run-1.xyz", frames, format="extxyz")
    tset = open_set(tmp_path, use_cache=False)
    start = starting_conditions(tset, MONITORS)
    assert start.sources == [FROM_MOMENTA]
    np.testing.assert_allclose(start.velocities[0], frames[1].get_velocities() * units.fs, rtol=1e-6)


def test_runs_started_at_two_transition_states_are_named(tmp_path):
    tset, _ = toy_set(n=10, seed=4)
    start = starting_conditions(tset, MONITORS)
    assert not any("one transition state" in w for w in start.warnings)
    assert float(np.max(start.rmsd)) < 0.2
    for rid in ("run-002", "run-007", "run-009"):  # these start with atom D 2 Å farther out
        traj = tset[rid]
        traj.positions[:, 3, 1] += 2.0
    start = starting_conditions(tset, MONITORS)
    w = next(w for w in start.warnings if "one transition state" in w)
    assert "3 of 10" in w and "run-002" in w and "run-009" in w and "run-001" not in w


def test_aligned_rmsd_matches_scipy_kabsch():
    # reference: scipy's Rotation.align_vectors (Kabsch) and its rssd
    from scipy.spatial.transform import Rotation

    rng = np.random.default_rng(11)
    ref = rng.normal(0, 1.5, (6, 3))
    rots = Rotation.random(5, random_state=3)
    runs = np.stack([rots[k].apply(ref + rng.normal(0, 0.1, ref.shape)) + rng.normal(0, 3, 3) for k in range(5)])
    ours, used = aligned_rmsd(runs, reference=ref)
    np.testing.assert_allclose(used, ref)
    for k in range(5):
        a = ref - ref.mean(0)
        b = runs[k] - runs[k].mean(0)
        _rot, rssd = Rotation.align_vectors(a, b)
        assert ours[k] == pytest.approx(rssd / np.sqrt(len(ref)), rel=1e-6)


def test_mode_projections_become_named_columns_in_run_order():
    # the projection is modes.py's; here only its long table (one row per run and mode) turned into columns
    import pandas as pd

    tset, _ = toy_set(n=5, seed=8)
    start = starting_conditions(tset, MONITORS)

    def fake_project(modes, positions, velocities, run_ids):
        rows = []
        for r in reversed(run_ids):  # any order: the columns must still follow the runs
            k = run_ids.index(r)
            for mode, imag in ((1, True), (2, False)):
                rows.append({"run": r, "mode": mode, "imaginary": imag, "Q": 10 * k + mode, "Qdot": -k,
                             "energy_kcal_mol": 0.5, "phase": np.pi / 2, "rmsd": 0.9 if k == 3 else 0.01})
        return pd.DataFrame(rows)

    with_modes = start.with_modes(object(), project=fake_project)
    t = with_modes.table
    assert list(t["mode 2 displacement [amu^1/2 angstrom]"]) == [2, 12, 22, 32, 42]
    assert list(t["mode 1 velocity [amu^1/2 angstrom/fs]"]) == [0, -1, -2, -3, -4]
    assert list(t["mode 2 phase [deg]"]) == [90.0] * 5
    assert "mode 1 phase [deg]" not in t  # the imaginary mode has no oscillation phase
    assert with_modes.coordinate("mode 2 phase [deg]").circular
    assert with_modes.coordinate("mode 1 velocity [amu^1/2 angstrom/fs]").phrase.startswith("the velocity along mode 1")
    assert any("run-004" in w and "mode file" in w for w in with_modes.warnings)


def _ase_aligned(positions: np.ndarray, target: np.ndarray) -> np.ndarray:
    """Each geometry moved onto ``target`` by ase's own minimize_rotation_and_translation (the reference)."""
    from ase import Atoms
    from ase.build import minimize_rotation_and_translation

    ref = Atoms(f"X{target.shape[0]}", positions=target)
    out = np.empty_like(positions)
    for k, x in enumerate(positions):
        atoms = Atoms(f"X{target.shape[0]}", positions=x)
        minimize_rotation_and_translation(ref, atoms)
        out[k] = atoms.positions
    return out


@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_aligned_geometries_equal_ase_one_by_one(seed):
    from scipy.spatial.transform import Rotation

    from basinmark.core.origins_start import aligned_onto

    rng = np.random.default_rng(seed)
    n_atoms = int(rng.integers(3, 15))
    base = rng.normal(0, 1.5, (n_atoms, 3))
    rots = Rotation.random(40, random_state=seed)
    runs = np.stack([rots[k].apply(base + rng.normal(0, 0.3, base.shape)) + rng.normal(0, 4, 3) for k in range(40)])
    target = base + rng.normal(0, 0.2, base.shape)
    np.testing.assert_allclose(aligned_onto(runs, target), _ase_aligned(runs, target), rtol=0, atol=1e-9)


def test_default_reference_is_the_run_ase_alignment_picks():
    rng = np.random.default_rng(21)
    base = rng.normal(0, 1.5, (9, 3))
    runs = np.stack([base + rng.normal(0, 0.25, base.shape) + rng.normal(0, 2, 3) for _ in range(60)])
    rmsd, used = aligned_rmsd(runs)
    first = _ase_aligned(runs, runs[0])
    pick = int(np.argmin(np.sqrt(np.mean(np.sum((first - np.median(first, axis=0)) ** 2, axis=-1), axis=1))))
    np.testing.assert_array_equal(used, runs[pick])
    moved = _ase_aligned(runs, runs[pick])
    want = np.sqrt(np.mean(np.sum((moved - runs[pick]) ** 2, axis=-1), axis=1))
    np.testing.assert_allclose(rmsd, want, rtol=0, atol=1e-9)


def test_alignment_python_work_does_not_grow_with_runs():
    """Aligning 10,000 runs one by one (a Python loop of small LAPACK calls, each letting go of Python's lock
    and taking it straight back) kept the window's thread from running for 170-470 ms at a time while the
    starting conditions were analysed.  Done on whole arrays, its Python calls do not grow with the runs."""
    import sys

    def calls(n_runs: int) -> int:
        rng = np.random.default_rng(5)
        runs = rng.normal(0, 1.5, (n_runs, 8, 3))
        count = [0]

        def hook(frame, event, arg):
            if event == "call":
                count[0] += 1

        sys.setprofile(hook)
        try:
            aligned_rmsd(runs)
        finally:
            sys.setprofile(None)
        return count[0]

    few, many = calls(20), calls(400)
    assert many < 1.5 * few + 50, f"20 runs: {few} Python calls, 400 runs: {many}"
