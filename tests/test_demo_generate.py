"""The demo generator, the make-demo command and the bundled ringfork set."""

import gzip
import tomllib
from pathlib import Path

import numpy as np
import pytest
from ase.io import read

from basinmark.cli import main
from basinmark.demo.generate import (
    BOND_BELOW,
    DEFAULT_SEED,
    PRODUCT_A_BELOW,
    REACTANT_A_ABOVE,
    SPECTATOR_ABOVE,
    DemoSettings,
    GenerateSummary,
    format_frames,
    generate,
)
from basinmark.demo.scenario import basins_toml
from basinmark.demo.surface import SYMBOLS

SHORT = DemoSettings(max_time_fs=40.0, stop_dwell_fs=20.0)
KCAL = 0.0433641  # eV per kcal/mol (ase.units.kcal / ase.units.mol)
BUNDLED = Path(__file__).resolve().parents[1] / "sample_sets" / "ringfork"


@pytest.fixture(scope="module")
def small_set(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo")
    summary = generate(out, runs=3, seed=5, settings=SHORT)
    return out, summary


def _all_bytes(folder: Path) -> dict[str, bytes]:
    """The generator's files only (other tools may add a cache or a label journal beside them)."""
    files = [folder / "README.md", folder / "basins.toml", *sorted((folder / "runs").glob("*.xyz.gz"))]
    return {str(p.relative_to(folder)): p.read_bytes() for p in files}


def test_generate_is_deterministic_for_a_seed(small_set, tmp_path):
    out, _ = small_set
    again = tmp_path / "again"
    generate(again, runs=3, seed=5, settings=SHORT)
    assert _all_bytes(out) == _all_bytes(again)
    other = tmp_path / "other"
    generate(other, runs=3, seed=6, settings=SHORT)
    assert _all_bytes(out)["runs/run-0001.fwd.xyz.gz"] != _all_bytes(other)["runs/run-0001.fwd.xyz.gz"]


def test_layout_and_gzip_header(small_set):
    out, summary = small_set
    names = sorted(p.name for p in (out / "runs").iterdir())
    assert names == [f"run-000{k}.{h}.xyz.gz" for k in (1, 2, 3) for h in ("bwd", "fwd")]
    raw = (out / "runs" / "run-0001.fwd.xyz.gz").read_bytes()
    # RFC 1952: bytes 4-7 are MTIME (0 here); flag byte 3 has no FNAME bit (0x08)
    assert raw[:2] == b"\x1f\x8b" and raw[4:8] == b"\0\0\0\0" and not raw[3] & 0x08
    assert (out / "basins.toml").is_file() and (out / "README.md").is_file()
    assert set(summary.ends) == {"run-0001", "run-0002", "run-0003"}


def test_halves_read_back_with_ase(small_set):
    # reference library: ase.io.read (extended XYZ)
    out, _ = small_set
    for half, sign in (("bwd", -1), ("fwd", 1)):
        frames = read(out / "runs" / f"run-0002.{half}.xyz.gz", index=":", format="extxyz")
        assert frames[0].get_chemical_symbols() == SYMBOLS
        times = np.array([a.info["time"] for a in frames])
        assert times[0] == 0.0
        assert np.all(sign * np.diff(times) > 0)  # backward half: negative, decreasing times
        assert abs(times[-1]) <= SHORT.max_time_fs + 1e-9
        np.testing.assert_allclose(np.abs(np.diff(times)), SHORT.save_every_fs)
        total = np.array([a.info["epot"] + a.info["ekin"] for a in frames])
        assert np.max(np.abs(total - total[0])) < 1.0 * KCAL  # energy check on the written numbers
    f0 = read(out / "runs" / "run-0002.bwd.xyz.gz", index=0)
    f1 = read(out / "runs" / "run-0002.fwd.xyz.gz", index=0)
    np.testing.assert_allclose(f0.positions, f1.positions)  # both halves start at the same point


def test_halves_read_back_with_our_reader(small_set):
    from basinmark.core.io import read_frames

    out, _ = small_set
    block = read_frames(out / "runs" / "run-0003.fwd.xyz.gz")
    ref = read(out / "runs" / "run-0003.fwd.xyz.gz", index=":")
    assert block.positions.shape == (len(ref), len(SYMBOLS), 3)
    np.testing.assert_allclose(block.positions[-1], ref[-1].positions, atol=1e-5)
    np.testing.assert_allclose(block.info["ekin"], [a.info["ekin"] for a in ref])


def test_format_frames_round_trip(tmp_path):
    rng = np.random.default_rng(0)
    pos = rng.normal(scale=3, size=(3, len(SYMBOLS), 3))
    text = format_frames(SYMBOLS, pos, np.array([0.0, 4.0, 8.0]), np.array([0.1, -0.2, 0.3]), np.ones(3))
    path = tmp_path / "x.xyz"
    path.write_text(text)
    frames = read(path, index=":")
    assert len(frames) == 3
    np.testing.assert_allclose(frames[2].positions, pos[2], atol=5.1e-5)  # 4 decimals
    assert frames[1].info["epot"] == pytest.approx(-0.2)


def test_rules_file_follows_the_schema(small_set):
    out, _ = small_set
    rules = tomllib.loads((out / "basins.toml").read_text())
    assert rules["reactant"] == "reactant"
    assert rules["monitors"] == {"r_a": [1, 6], "r_b": [2, 9], "r_c": [4, 9]}
    assert set(rules["basins"]) == {"reactant", "alpha", "beta"}
    assert rules["basins"]["alpha"]["r_b"] == {"below": BOND_BELOW}
    assert rules["basins"]["beta"]["r_b"] == {"above": SPECTATOR_ABOVE}
    assert rules["basins"]["reactant"]["r_a"] == {"above": REACTANT_A_ABOVE}
    assert rules["time_gap"]["bonds"] == ["r_a", "r_b"]
    assert rules["flags"]["energy_unit"] == "kcal/mol"
    from basinmark.core.rules import load_rules

    loaded = load_rules(out / "basins.toml", n_atoms=len(SYMBOLS))
    assert sorted(loaded.products) == ["alpha", "beta"]


def test_summary_warns_about_few_reactive_runs(tmp_path):
    s = GenerateSummary(out_dir=tmp_path, runs=3, seed=1, settings=SHORT,
                        ends={"run-1": ("reactant", "alpha"), "run-2": ("reactant", "reactant"),
                              "run-3": ("none", "beta")},
                        max_drift_ev={"run-1": 0.0, "run-2": 2 * KCAL, "run-3": 0.0})
    assert s.counts() == {"alpha": 1, "recrossing": 1, "unfinished": 1}
    text = "\n".join(s.report_lines())
    assert "warning: only 1 reactive runs" in text
    assert "1 runs drift more than 1 kcal/mol" in text


def test_make_demo_command(tmp_path, capsys):
    out = tmp_path / "cli"
    assert main(["make-demo", str(out), "--runs", "2", "--seed", "3", "--max-time", "30"]) == 0
    printed = capsys.readouterr().out
    assert "2 runs written" in printed and "warning: only" in printed
    assert len(list((out / "runs").glob("*.xyz.gz"))) == 4
    assert main(["make-demo", str(out), "--runs", "0"]) == 2
    # a folder that already holds runs is not mixed with a new set, unless asked, and then replaced whole
    assert main(["make-demo", str(out), "--runs", "1", "--max-time", "20"]) == 2
    assert "already holds 4 run files" in capsys.readouterr().err
    assert main(["make-demo", str(out), "--runs", "1", "--seed", "3", "--max-time", "20", "--force"]) == 0
    assert len(list((out / "runs").glob("*.xyz.gz"))) == 2
    (tmp_path / "afile").write_text("x")
    assert main(["make-demo", str(tmp_path / "afile"), "--runs", "1"]) == 2
    assert "is not a folder" in capsys.readouterr().err


def test_bundled_set_is_complete_and_small():
    halves = sorted((BUNDLED / "runs").glob("*.xyz.gz"))
    assert len(halves) == 400
    assert sum(len(b) for b in _all_bytes(BUNDLED).values()) < 5e6
    assert (BUNDLED / "basins.toml").read_text() == basins_toml(
        REACTANT_A_ABOVE, PRODUCT_A_BELOW, BOND_BELOW, SPECTATOR_ABOVE)
    readme = (BUNDLED / "README.md").read_text()
    assert "invented" in readme and f"seed {DEFAULT_SEED}" in readme
    # TST ratio of the invented 0.3 kcal/mol: exp(ddG / RT), R from scipy.constants (CODATA 2018),
    # 1 cal = 4.184 J (thermochemical calorie)
    import scipy.constants as sc

    ratio = np.exp(0.3 * 4184 / (sc.R * 298.15))
    assert f"≈ {ratio:.2f}" in readme and "62:38" in readme
    with gzip.open(halves[0], "rt") as fh:
        assert fh.readline().strip() == str(len(SYMBOLS))


#: numpy release the bundled set was generated with; the dynamics are chaotic, so another release's
#: different rounding may change the files (not the physics), and the byte check only holds on this one
BUNDLED_WITH_NUMPY = "2.4"


@pytest.mark.slow
@pytest.mark.skipif(not np.__version__.startswith(BUNDLED_WITH_NUMPY + "."),
                    reason=f"bundled set was generated with numpy {BUNDLED_WITH_NUMPY}.x")
def test_bundled_set_regenerates_byte_for_byte(tmp_path):
    # the bundled set is exactly what make-demo writes with the default seed (same numpy)
    generate(tmp_path, runs=200, seed=DEFAULT_SEED)
    assert _all_bytes(tmp_path) == _all_bytes(BUNDLED)
