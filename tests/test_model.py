"""The core model: Trajectory shape rules, ase.Atoms interchange, identity, info table."""

import numpy as np
import pytest
from ase.build import molecule
from hypothesis import given, strategies as st

from basinmark.core.model import SourceFile, Trajectory, TrajectorySet, combined_hash
from basinmark.core.units import energy_factor


def _run(n_frames=5, run_id="r1"):
    a = molecule("CH3CH2OH")  # G2 geometry shipped with ase
    pos = np.stack([a.positions + 0.01 * k for k in range(n_frames)])
    times = np.arange(n_frames) - n_frames // 2
    return Trajectory(run_id, a.numbers, pos, times,
                      energies={"potential": np.linspace(-1, -1.1, n_frames), "kinetic": np.full(n_frames, 0.1)},
                      sources=(SourceFile("x.bwd.xyz", "a" * 64, "backward"), SourceFile("x.fwd.xyz", "b" * 64, "forward")))


def test_shapes_dtypes_and_total_energy():
    t = _run()
    assert t.positions.dtype == np.float32 and t.positions.shape == (5, 9, 3)
    assert t.symbols[:3] == ["C", "C", "O"]
    assert t.ts_index == 2 and t.time_span == (-2.0, 2.0)
    np.testing.assert_allclose(t.energies["total"], t.energies["potential"] + t.energies["kinetic"])
    # drift: largest |E_total - E_total(t=0)|; total falls linearly from -0.9 to -1.0 eV, -0.95 at t = 0
    assert t.energy_drift() == pytest.approx(0.05, abs=1e-12)


def test_bad_shapes_are_refused_with_the_run_named():
    with pytest.raises(ValueError, match="r9: 3 times for 2 frames"):
        Trajectory("r9", [1, 1], np.zeros((2, 2, 3)), [0, 1, 2])
    with pytest.raises(ValueError, match="r9: 1 atomic numbers for 2 atoms"):
        Trajectory("r9", [1], np.zeros((2, 2, 3)), [0, 1])
    with pytest.raises(ValueError, match="energy 'potential' has 1 values"):
        Trajectory("r9", [1, 1], np.zeros((2, 2, 3)), [0, 1], energies={"potential": [0.0]})


def test_to_and_from_ase_atoms():
    t = _run()
    atoms = t.to_atoms(3)
    ref = molecule("CH3CH2OH")
    np.testing.assert_allclose(atoms.positions, ref.positions + 0.03, atol=1e-5)  # float32 storage
    assert atoms.get_chemical_symbols() == ref.get_chemical_symbols()
    assert atoms.info["time"] == 1.0
    back = Trajectory.from_atoms("copy", t.to_atoms_list())
    np.testing.assert_array_equal(back.positions, t.positions)
    np.testing.assert_array_equal(back.times, t.times)
    np.testing.assert_allclose(back.energies["potential"], t.energies["potential"])
    with pytest.raises(ValueError, match="frame 2 has different atoms"):
        Trajectory.from_atoms("bad", [molecule("CH4"), molecule("H2O")])


@given(st.lists(st.tuples(st.sampled_from(["backward", "forward", "joined"]),
                          st.text("0123456789abcdef", min_size=64, max_size=64)), min_size=1, max_size=3))
def test_content_hash_depends_on_every_source(parts):
    sources = [SourceFile("f", sha, role) for role, sha in parts]
    h = combined_hash(sources)
    assert len(h) == 64
    changed = list(sources)
    last = changed[-1]
    changed[-1] = SourceFile(last.path, ("0" if last.sha256[0] != "0" else "1") + last.sha256[1:], last.role)
    assert combined_hash(changed) != h


def test_set_info_table_lists_runs_and_failures():
    from basinmark.core.model import LoadFailure

    tset = TrajectorySet(".", {"r1": _run(run_id="r1")}, [LoadFailure("bad.xyz", "bad.xyz, line 3: no")])
    table = tset.info_table()
    assert list(table["run"]) == ["r1", "bad.xyz"]
    assert table.loc[0, "drift_kcal_mol"] == pytest.approx(_run().energy_drift() / energy_factor("kcal/mol"))
    assert "not loaded" in table.loc[1, "problems"]
    assert tset[0] is tset["r1"] and "r1" in tset
    with pytest.raises(KeyError, match="no run 'zz'"):
        tset["zz"]
