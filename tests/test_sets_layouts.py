"""Folders laid out by other people's conventions open without a manifest, and say what was paired and left out."""

from __future__ import annotations

import gzip
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from ase import Atoms
from ase.calculators.singlepoint import SinglePointCalculator
from ase.io import write

from basinmark.core.sets import open_set

SYMBOLS = "CHHOH"


def _frames(times, sign, symbols=SYMBOLS, keys=("time", "energy", "kinetic"), seed=3):
    rng = np.random.default_rng(seed)
    base = rng.normal(scale=1.2, size=(len(symbols), 3))
    out = []
    for i, t in enumerate(times):
        a = Atoms(symbols, positions=base + sign * 0.02 * i)
        values = {"time": float(t), "energy": -3.0 + 0.01 * i, "kinetic": 0.4 - 0.01 * i}
        for k in keys:
            a.info[k] = values[k]
        out.append(a)
    return out


def _write(path: Path, frames) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    if path.name.endswith(".gz"):
        plain = path.with_name(path.name[:-3])
        write(plain, frames, format="extxyz")
        path.write_bytes(gzip.compress(plain.read_bytes(), mtime=0))
        plain.unlink()
    else:
        write(path, frames, format="extxyz")


def make_run(folder: Path, backward: str, forward: str, n=4, dt=0.5, **kw) -> None:
    _write(folder / backward, _frames(-dt * np.arange(n), -1, **kw))
    _write(folder / forward, _frames(dt * np.arange(n + 1), +1, **kw))


def _ts(path: Path, symbols=SYMBOLS) -> None:
    _write(path, _frames([0.0], 0, symbols=symbols)[:1])


@pytest.mark.parametrize("bwd, fwd", [
    ("{run}_bwd.xyz", "{run}_fwd.xyz"),
    ("{run}.bwd.xyz", "{run}.fwd.xyz"),
    ("{run}-BWD.xyz", "{run}-FWD.xyz"),
    ("bwd_{run}.xyz", "fwd_{run}.xyz"),
    ("{run}_backward.xyz.gz", "{run}_forward.xyz.gz"),
    ("{run}_Back.extxyz", "{run}_Fwd.extxyz"),
    ("{run}.rev.xyz", "{run}.fwd.xyz"),
])
def test_half_name_conventions_are_paired(tmp_path, bwd, fwd):
    for i in (1, 2, 10):
        rid = f"run_{i:03d}"
        make_run(tmp_path, bwd.format(run=rid), fwd.format(run=rid))
    tset = open_set(tmp_path, use_cache=False)
    assert tset.run_ids == ["run_001", "run_002", "run_010"], tset.notes
    assert tset.failures == [] and tset.left_out == []
    t = tset["run_002"]
    np.testing.assert_allclose(t.times, 0.5 * np.arange(-3, 5))
    assert [s.role for s in t.sources] == ["backward", "forward"]
    example = bwd.format(run="run_001")
    assert any("3 runs" in n and example in n for n in tset.notes), tset.notes


def test_transition_state_file_beside_the_halves_is_left_out_with_a_note(tmp_path):
    for i in (1, 2, 3):
        make_run(tmp_path, f"run_{i:03d}_bwd.xyz", f"run_{i:03d}_fwd.xyz")
    _ts(tmp_path / "ts.xyz")
    _ts(tmp_path / "saddle.xyz.gz")
    tset = open_set(tmp_path, use_cache=False)
    assert tset.run_ids == ["run_001", "run_002", "run_003"]
    assert tset.failures == []
    left = {Path(f.path).name: f.reason for f in tset.left_out}
    assert set(left) == {"ts.xyz", "saddle.xyz.gz"}
    assert all("one frame" in r and "not a run" in r for r in left.values()), left
    assert tset.notes and not any("joined" in n for n in tset.notes), tset.notes  # ts.xyz is not counted
    table = tset.info_table()
    assert table["problems"].str.startswith("left out").sum() == 2
    assert len(table[table["frames"] > 1]) == 3


def test_one_folder_per_run(tmp_path):
    for i in (1, 2, 12):
        make_run(tmp_path / f"run{i:03d}", "bwd.xyz", "fwd.xyz")
    make_run(tmp_path / "runs" / "run020", "backward.xyz.gz", "forward.xyz.gz")
    _ts(tmp_path / "run001" / "ts.xyz")
    _ts(tmp_path / "saddle.xyz")
    tset = open_set(tmp_path, use_cache=False)
    assert tset.run_ids == ["run001", "run002", "run012", "run020"], (tset.notes, tset.left_out)
    assert {Path(f.path).name for f in tset.left_out} == {"ts.xyz", "saddle.xyz"}
    assert any("one folder per run" in n for n in tset.notes), tset.notes
    assert tset["run012"].sources[0].path == (tmp_path / "run012" / "bwd.xyz").resolve()


def test_files_with_other_atoms_are_left_out(tmp_path):
    for i in (1, 2, 3):
        make_run(tmp_path, f"r{i}_bwd.xyz", f"r{i}_fwd.xyz")
    # a multi-frame file of another molecule (say an optimisation of a reactant) is not a run of this set
    _write(tmp_path / "reactant_opt.xyz", _frames([0.0, 1.0, 2.0], 1, symbols="NHHH"))
    tset = open_set(tmp_path, use_cache=False)
    assert tset.run_ids == ["r1", "r2", "r3"]
    (left,) = tset.left_out
    assert Path(left.path).name == "reactant_opt.xyz" and "atoms" in left.reason and "r1" in left.reason


def test_unpaired_half_is_left_out_not_a_failure(tmp_path):
    make_run(tmp_path, "a_bwd.xyz", "a_fwd.xyz")
    _write(tmp_path / "b_fwd.xyz", _frames([0.0, 0.5, 1.0], 1))
    tset = open_set(tmp_path, use_cache=False)
    assert tset.run_ids == ["a"] and tset.failures == []
    (left,) = tset.left_out
    assert "no backward half" in left.reason


def test_energies_under_ase_keys_are_found_by_default(tmp_path):
    make_run(tmp_path, "x_bwd.xyz", "x_fwd.xyz")
    t = open_set(tmp_path, use_cache=False)["x"]
    assert {"potential", "kinetic", "total"} <= set(t.energies)
    np.testing.assert_allclose(t.energies["total"], -2.6, atol=1e-9)


def test_no_energy_key_names_the_keys_the_files_carry(tmp_path):
    for rid in ("a", "b"):
        _write(tmp_path / f"{rid}_bwd.xyz", [_with(a, enthalpy_guess=1.0) for a in _frames([0, -1, -2], -1, keys=("time",))])
        _write(tmp_path / f"{rid}_fwd.xyz", [_with(a, enthalpy_guess=1.0) for a in _frames([0, 1, 2], 1, keys=("time",))])
    tset = open_set(tmp_path, use_cache=False)
    assert all(not t.energies for t in tset)
    text = " ".join(tset.warnings + tset.notes)
    assert "no energy" in text and "enthalpy_guess" in text and "[keys]" in text, text


def _with(atoms, **info):
    atoms.info.update(info)
    return atoms


def test_traj_files_carry_energies_without_a_manifest(tmp_path):
    from ase.io.trajectory import Trajectory as AseTrajectory

    masses = None
    for role, sign in (("bwd", -1), ("fwd", 1)):
        with AseTrajectory(tmp_path / f"run7_{role}.traj", "w") as out:
            for i, a in enumerate(_frames(np.arange(4) * sign, sign, keys=("time",))):
                a.set_momenta(np.full((len(a), 3), 0.1 * (i + 1)))
                a.calc = SinglePointCalculator(a, energy=-5.0 + 0.1 * i)
                out.write(a)
                masses = a.get_masses()
    t = open_set(tmp_path, use_cache=False)["run7"]
    assert {"potential", "kinetic"} <= set(t.energies)
    # reference: ase's own kinetic energy of the last forward frame (momenta 0.4 in every component)
    ref = Atoms(SYMBOLS, momenta=np.full((len(SYMBOLS), 3), 0.4), masses=masses).get_kinetic_energy()
    assert t.energies["kinetic"][-1] == pytest.approx(ref, rel=1e-9)
    assert t.energies["potential"][-1] == pytest.approx(-4.7)


def test_info_says_what_was_paired_and_left_out(tmp_path):
    for i in (1, 2):
        make_run(tmp_path, f"run_{i:03d}_bwd.xyz", f"run_{i:03d}_fwd.xyz")
    _ts(tmp_path / "ts.xyz")
    out = subprocess.run([sys.executable, "-m", "basinmark", "info", str(tmp_path), "-q"],
                         capture_output=True, text=True, check=True).stdout
    assert "2 runs" in out and "run_001_bwd.xyz" in out
    assert "left out: " in out and "ts.xyz" in out and "one frame" in out


def test_cached_reopen_keeps_the_notes(tmp_path):
    for i in (1, 2):
        make_run(tmp_path, f"run_{i:03d}_bwd.xyz", f"run_{i:03d}_fwd.xyz")
    _ts(tmp_path / "ts.xyz")
    first = open_set(tmp_path)
    again = open_set(tmp_path)
    assert again.run_ids == first.run_ids == ["run_001", "run_002"]
    assert [f.reason for f in again.left_out] == [f.reason for f in first.left_out]
    assert again.notes == first.notes


def test_window_says_what_was_paired_and_left_out(qtbot, tmp_path):
    from basinmark.gui.main_window import MainWindow

    for i in (1, 2):
        make_run(tmp_path, f"run_{i:03d}_bwd.xyz", f"run_{i:03d}_fwd.xyz")
    _ts(tmp_path / "ts.xyz")
    win = MainWindow()
    qtbot.addWidget(win)
    with qtbot.waitSignal(win.set_loaded, timeout=20000):
        win.open_set(tmp_path, use_cache=False)
    text = win.banner.text()
    assert "run_001_bwd.xyz" in text and "ts.xyz (one frame only" in text, text
