"""The demo generator's phase-decided set: the outcome follows one mode's starting phase, the files carry
velocities, and the mode file beside the set is the transition state's."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from ase.io import read

from basinmark.cli import main
from basinmark.core.classify import classify_set
from basinmark.core.modes import project, read_modes
from basinmark.core.rules import load_rules
from basinmark.core.sets import open_set, rules_path
from basinmark.demo.generate import DemoSettings, generate
from basinmark.demo.phase_set import MODE_FILE_NAME, PhaseSettings

SHORT = DemoSettings(max_time_fs=160.0, stop_dwell_fs=30.0)
RUNS = 60
AMU_A2_FS2 = 103.642697  # eV per amu Å²/fs² (CODATA: u·(1e5 m/s)² / e; from scipy.constants)


@pytest.fixture(scope="module")
def phase_set(tmp_path_factory):
    out = tmp_path_factory.mktemp("phase")
    summary = generate(out, runs=RUNS, seed=11, settings=SHORT, phase=PhaseSettings())
    return out, summary


def _starts(out: Path):
    """Each run's t = 0 frame read with ase's extended-XYZ reader (reference library): positions, vel."""
    runs = sorted(p.name.split(".")[0] for p in (out / "runs").glob("*.fwd.xyz.gz"))
    frames = [read(out / "runs" / f"{r}.fwd.xyz.gz", index=0, format="extxyz") for r in runs]
    return runs, np.array([a.positions for a in frames]), np.array([a.arrays["vel"] for a in frames])


def _best_threshold_accuracy(phase: np.ndarray, y: np.ndarray) -> float:
    """Best accuracy of 'y when the phase lies in [a, b)' over a grid of a and b (a simple threshold pair on
    the circle); written here independently of the generator's own search."""
    grid = np.deg2rad(np.arange(0, 360, 5))
    p = np.mod(phase, 2 * np.pi)
    best = 0.0
    for a in grid:
        for b in grid:
            inside = (p >= a) & (p < b) if a < b else (p >= a) | (p < b)
            best = max(best, float(np.mean(inside == y)), float(np.mean(~inside == y)))
    return best


def test_deciding_mode_phase_predicts_the_classified_outcome(phase_set):
    out, summary = phase_set
    tset = open_set(out, use_cache=False)
    table = classify_set(tset, load_rules(rules_path(out), n_atoms=tset.n_atoms)).set_index("run")
    runs, x, v = _starts(out)
    modes = read_modes(out / MODE_FILE_NAME)
    assert modes.is_transition_state and modes.n_modes == 30
    proj = project(modes, x, v, run_ids=runs)
    outcome = table.loc[runs, "outcome"].to_numpy()
    product = np.isin(outcome, ["alpha", "beta"])
    assert product.sum() >= 0.9 * RUNS and 0.2 < np.mean(outcome[product] == "alpha") < 0.8  # both products
    accuracy = {}
    for k, part in proj.groupby("mode"):
        phase = part.set_index("run").loc[runs, "phase"].to_numpy()
        accuracy[k] = _best_threshold_accuracy(phase[product], outcome[product] == "alpha")
    print(f"\ndeciding mode {summary.decide_mode}: {accuracy[summary.decide_mode]:.3f}; best other "
          f"{max(a for k, a in accuracy.items() if k != summary.decide_mode):.3f}")
    assert accuracy[summary.decide_mode] > 0.95
    assert max(accuracy, key=accuracy.get) == summary.decide_mode
    # the record's phases are the ones the files give
    record = pd.read_csv(out / "generator-record.csv").set_index("run")
    mine = proj[proj["mode"] == summary.decide_mode].set_index("run")["phase"]
    np.testing.assert_allclose(record.loc[runs, "phase_rad"], mine.loc[runs], atol=1e-5)
    assert (record["decide_mode"] == summary.decide_mode).all()
    assert summary.arc is not None and summary.arc[2] > 0.95
    readme = (out / "README.md").read_text(encoding="utf-8")
    assert f"mode {summary.decide_mode} (" in readme and "ts-modes.toml" in readme


def test_velocity_columns_match_energies_and_positions(phase_set):
    out, _ = phase_set
    fwd = read(out / "runs" / "run-0003.fwd.xyz.gz", index=":", format="extxyz")
    bwd = read(out / "runs" / "run-0003.bwd.xyz.gz", index=":", format="extxyz")
    m = fwd[0].get_masses()
    for frame in fwd[:3] + bwd[:3]:
        ekin = 0.5 * AMU_A2_FS2 * np.sum(m[:, None] * frame.arrays["vel"] ** 2)
        assert ekin == pytest.approx(frame.info["ekin"], abs=2e-5)  # 5 decimals of eV in the comment line
    np.testing.assert_allclose(fwd[0].arrays["vel"], bwd[0].arrays["vel"])  # one start, one velocity
    # the velocity is dx/dt in true time for both halves: the heavy atoms move along it over the first 4 fs
    # (the hydrogens turn within that time), forward in the forward half and back in the backward half
    heavy = m > 2.0
    for half, sign in ((fwd, 1.0), (bwd, -1.0)):
        step = (half[1].positions - half[0].positions)[heavy]
        guess = sign * 4.0 * half[0].arrays["vel"][heavy]
        cos = np.sum(step * guess) / (np.linalg.norm(step) * np.linalg.norm(guess))
        assert cos > 0.8


def test_ordinary_set_is_unchanged_unless_velocities_are_asked(tmp_path):
    plain = generate(tmp_path / "a", runs=2, seed=5, settings=DemoSettings(max_time_fs=20.0, stop_dwell_fs=8.0))
    with_v = generate(tmp_path / "b", runs=2, seed=5, settings=DemoSettings(max_time_fs=20.0, stop_dwell_fs=8.0),
                      velocities=True)
    a = read(tmp_path / "a" / "runs" / "run-0001.fwd.xyz.gz", index=":")
    b = read(tmp_path / "b" / "runs" / "run-0001.fwd.xyz.gz", index=":")
    assert "vel" not in a[0].arrays and "vel" in b[0].arrays
    np.testing.assert_allclose([f.positions for f in a], [f.positions for f in b])
    assert plain.decide_mode is None and not (tmp_path / "a" / MODE_FILE_NAME).exists()
    assert "decide_mode" not in (tmp_path / "a" / "generator-record.csv").read_text().splitlines()[0]


def test_make_demo_phase_options(tmp_path, capsys):
    out = tmp_path / "p"
    assert main(["make-demo", str(out), "--runs", "2", "--max-time", "8", "--phase-decides", "--phase-mode", "7"]) == 0
    text = capsys.readouterr().out
    assert "deciding mode: 7" in text
    assert read_modes(out / MODE_FILE_NAME).n_modes == 30
    assert main(["make-demo", str(tmp_path / "q"), "--runs", "2", "--phase-mode", "7"]) == 2
    assert "--phase-mode needs --phase-decides" in capsys.readouterr().err
    assert main(["make-demo", str(tmp_path / "r"), "--phase-decides", "--phase-mode", "1"]) == 2
    assert "outside the allowed range 2 to 30" in capsys.readouterr().err
