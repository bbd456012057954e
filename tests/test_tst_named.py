"""The TST estimate names its products: a pair with its direction, or one barrier per product."""

from __future__ import annotations

import math

import pandas as pd
import pytest
from scipy import constants

from basinmark.cli import main
from basinmark.core.errors import SetError
from basinmark.core.manifest import load_layout
from basinmark.core.summary import build_summary
from basinmark.core.tst import MAX_DDG_KCAL, TSTError, TSTEstimate



def labels(counts: dict[str, int]) -> pd.DataFrame:
    names = [name for name, k in counts.items() for _ in range(k)]
    return pd.DataFrame({"run": [f"run-{i:04d}" for i in range(len(names))], "final_label": names})


def rt_kcal(temperature: float) -> float:
    # reference: CODATA constants from scipy.constants; 1 kcal = 4184 J (thermochemical calorie)
    return constants.R * temperature / (constants.calorie * 1000.0)


def hand_ratio(ddg_kcal: float, temperature: float = 298.15) -> float:
    return math.exp(ddg_kcal / rt_kcal(temperature))


# --- the pair and its direction ---------------------------------------------------------------


def test_the_same_pair_gives_reciprocal_predictions_for_the_two_orders():
    est = TSTEstimate.pair("major", "minor", 0.5)
    counts = labels({"major": 70, "minor": 30})
    forward = build_summary(counts, ["major", "minor"], "major", "minor", tst=est)
    backward = build_summary(counts, ["major", "minor"], "minor", "major", tst=est)
    assert forward.tst_ratio == pytest.approx(hand_ratio(0.5), rel=1e-12)  # 2.33
    assert backward.tst_ratio == pytest.approx(1.0 / hand_ratio(0.5), rel=1e-12)  # 0.43
    assert forward.tst_ratio * backward.tst_ratio == pytest.approx(1.0, rel=1e-12)
    # 70 : 30 = 2.33 observed: TST is inside the interval in both orders, never "outside" for one of them
    assert "inside the observed interval" in forward.to_text() and "inside the observed interval" in backward.to_text()
    assert "TST with ΔΔG‡ = -0.50 kcal/mol (G‡(major) − G‡(minor)) at 298.15 K predicts 0.43" in backward.to_text()


@pytest.fixture()
def ringfork(tmp_path):
    """A small two-product set of our own toy (products alpha and beta), no manifest yet."""
    from gui_fixtures import make_toy_set

    root = make_toy_set(tmp_path / "fork", ["left"] * 8 + ["right"] * 3 + ["recrossing"])
    rules = (root / "basins.toml").read_text()
    (root / "basins.toml").write_text(rules.replace("[basins.left]", "[basins.alpha]")
                                      .replace("[basins.right]", "[basins.beta]"))
    return root


def test_manifest_pair_is_converted_for_the_order_asked(ringfork, capsys):
    (ringfork / "basinmark-set.toml").write_text('[tst]\nmajor = "alpha"\nminor = "beta"\nddg = 0.5\n')
    assert main(["summary", str(ringfork), "-q", "--no-cache", "--ratio", "beta", "alpha"]) == 0
    out = capsys.readouterr().out
    assert f"predicts {1 / hand_ratio(0.5):.2f}" in out and "predicts 0.43" in out
    assert main(["summary", str(ringfork), "-q", "--ratio", "alpha", "beta"]) == 0
    assert "predicts 2.33" in capsys.readouterr().out


def test_command_line_ddg_names_its_pair(ringfork, capsys):
    assert main(["summary", str(ringfork), "-q", "--no-cache", "--ratio", "beta", "alpha",
                 "--ddg", "alpha", "beta", "0.5"]) == 0
    assert "predicts 0.43" in capsys.readouterr().out
    # one number alone says nothing about its direction: refused, telling how to name it
    assert main(["summary", str(ringfork), "-q", "--ddg", "0.5"]) == 2
    assert "--ddg MAJOR MINOR 0.5" in capsys.readouterr().err
    # with --ratio A B, one number keeps its documented meaning G‡(B) − G‡(A)
    assert main(["summary", str(ringfork), "-q", "--ratio", "beta", "alpha", "--ddg", "0.5"]) == 0
    assert "predicts 2.33" in capsys.readouterr().out


def test_old_manifest_without_names_says_how_to_name_the_pair(ringfork, capsys):
    (ringfork / "basinmark-set.toml").write_text('[tst]\nddg = 0.3\n')
    assert load_layout(ringfork).tst["kind"] == "unnamed"
    assert main(["summary", str(ringfork), "-q", "--no-cache"]) == 0
    out = capsys.readouterr().out
    assert "predicts" not in out
    assert 'major = "…" and minor = "…" under [tst]' in out and "Products of the rules: alpha, beta" in out
    # equal barriers read the same either way: still shown
    (ringfork / "basinmark-set.toml").write_text('[tst]\nddg = 0.0\n')
    assert main(["summary", str(ringfork), "-q"]) == 0
    assert "predicts 1.00" in capsys.readouterr().out


def test_manifest_naming_an_unknown_product_is_refused(ringfork, capsys):
    (ringfork / "basinmark-set.toml").write_text('[tst]\nmajor = "alpha"\nminor = "gamma"\nddg = 0.5\n')
    assert main(["summary", str(ringfork), "-q", "--no-cache"]) == 2
    assert "basinmark-set.toml: 'gamma' is not a product of the rules" in capsys.readouterr().err


# --- absurd values ----------------------------------------------------------------------------


@pytest.mark.parametrize("text, message", [
    ('ddg = inf', "line 4: [tst]: ΔΔG‡ = G‡(b) − G‡(a) must be a finite number, got inf"),
    ('ddg = nan', "must be a finite number, got nan"),
    ('ddg = -60.0', "beyond ±50 kcal/mol"),
    ('ddg = 250.0\nunit = "kJ/mol"', "beyond ±50 kcal/mol"),  # 59.8 kcal/mol
    ('ddg = 1.0\ntemperature = 0', "positive number of kelvin"),
    ('ddg = 1.0\ntemperature = inf', "must be a finite number"),
    ('ddg = 1.0\nunit = "kcal"', "unknown energy unit"),
    ('ddg = "1.0 kcal"', "must be a number"),
])
def test_manifest_refuses_absurd_values_naming_file_and_line(tmp_path, text, message):
    (tmp_path / "basinmark-set.toml").write_text(f'[tst]\nmajor = "a"\nminor = "b"\n{text}\n')
    with pytest.raises(SetError) as err:
        load_layout(tmp_path)
    assert "basinmark-set.toml" in str(err.value) and message in str(err.value)


def test_unnamed_old_manifest_values_are_still_checked(tmp_path):
    (tmp_path / "basinmark-set.toml").write_text('[tst]\nddg = inf\n')
    with pytest.raises(SetError, match="basinmark-set.toml, line 2: .*finite number, got inf"):
        load_layout(tmp_path)


def test_barrier_spread_beyond_the_bound_is_refused(tmp_path):
    (tmp_path / "basinmark-set.toml").write_text('[tst.barriers]\na = 10.0\nb = 70.5\n')
    with pytest.raises(SetError, match=r"line 1: \[tst.barriers\].*G‡\(b\) − G‡\(a\) = 60.5 kcal/mol is beyond"):
        load_layout(tmp_path)


@pytest.mark.parametrize("args, message", [
    (["--ddg", "alpha", "beta", "inf"], "--ddg: ΔΔG‡ = G‡(beta) − G‡(alpha) must be a finite number, got inf"),
    (["--ddg", "alpha", "beta", "nan"], "must be a finite number, got nan"),
    (["--ddg", "alpha", "beta", "51"], "beyond ±50 kcal/mol"),
    (["--ddg", "alpha", "beta", "0.5", "--temperature", "0"], "positive number of kelvin"),
    (["--ddg", "alpha", "beta", "0.5", "--temperature", "-3"], "positive number of kelvin"),
    (["--barrier", "alpha", "1", "--barrier", "beta", "nan"], "--barrier: the barrier of beta must be a finite"),
    (["--ddg", "alpha", "alpha", "1"], "name two different products"),
])
def test_command_line_refuses_absurd_values(ringfork, capsys, args, message):
    assert main(["summary", str(ringfork), "-q", "--no-cache", *args]) == 2
    assert message in capsys.readouterr().err


def test_the_bound_is_fifty_kcal_per_mol():
    assert MAX_DDG_KCAL == 50.0
    TSTEstimate.pair("a", "b", 50.0)  # at the bound: accepted
    with pytest.raises(TSTError):
        TSTEstimate.pair("a", "b", 50.001)


# --- one barrier per product ------------------------------------------------------------------


def test_three_product_barriers_give_boltzmann_shares():
    barriers = {"alpha": 14.0, "beta": 14.6, "gamma": 15.3}  # kcal/mol, invented
    t = 310.0
    est = TSTEstimate.from_barriers(barriers, "kcal/mol", t)
    # by hand: k_i ∝ exp(−ΔG‡_i / RT) with R from CODATA (scipy.constants); the k_B T / h prefactor cancels
    w = {k: math.exp(-g / rt_kcal(t)) for k, g in barriers.items()}
    total = sum(w.values())
    shares = est.shares()
    for k in barriers:
        assert shares[k] == pytest.approx(w[k] / total, rel=1e-9)
    assert sum(shares.values()) == pytest.approx(1.0, abs=1e-15)
    assert est.ratio("beta", "gamma") == pytest.approx(w["beta"] / w["gamma"], rel=1e-9)
    assert est.ratio("gamma", "beta") == pytest.approx(w["gamma"] / w["beta"], rel=1e-9)
    # the same barriers in kJ/mol give the same shares
    kj = TSTEstimate.from_barriers({k: g * 4.184 for k, g in barriers.items()}, "kJ/mol", t)
    assert kj.shares() == pytest.approx(shares, rel=1e-12)


def test_summary_shows_every_products_tst_share(tmp_path):
    barriers = {"alpha": 14.0, "beta": 14.6, "gamma": 15.3}
    est = TSTEstimate.from_barriers(barriers, temperature=298.15)
    s = build_summary(labels({"alpha": 60, "beta": 25, "gamma": 15, "recrossing": 5}), list(barriers),
                      "beta", "gamma", tst=est, temperature=298.15)
    shares = s.shares.set_index("product")
    assert list(shares.index) == ["alpha", "beta", "gamma"] and shares["count"].sum() == 100
    assert shares.loc["alpha", "share"] == pytest.approx(0.60)
    for k, v in est.shares().items():
        assert shares.loc[k, "tst_share"] == pytest.approx(v)
    assert s.tst_ratio == pytest.approx(est.ratio("beta", "gamma"))
    text = s.to_text()
    assert "Product shares among the 100 reactive runs" in text and "TST share" in text
    assert "from per-product barriers" in text
    frame = s.to_frame()
    assert (frame["quantity"] == "tst_share").sum() == 3
    data = s.to_dict()
    assert data["tst"]["barriers"] == barriers and len(data["shares"]) == 3


def test_manifest_barriers_reach_the_summary(ringfork, capsys):
    (ringfork / "basinmark-set.toml").write_text(
        '[tst]\ntemperature = 300\nsource = "invented"\n[tst.barriers]\nalpha = 12.0\nbeta = 12.4\n')
    assert main(["summary", str(ringfork), "-q", "--no-cache", "--ratio", "beta", "alpha"]) == 0
    out = capsys.readouterr().out
    assert f"predicts {math.exp(-0.4 / rt_kcal(300.0)):.2f}" in out and "at 300.00 K" in out


# --- a measured ratio beside the runs and TST --------------------------------------------------


def test_experiment_is_shown_in_the_order_asked(ringfork, capsys):
    (ringfork / "basinmark-set.toml").write_text(
        '[tst]\nmajor = "alpha"\nminor = "beta"\nddg = 0.5\n'
        '[tst.experiment]\nnumerator = "alpha"\ndenominator = "beta"\nratio = 3.0\nuncertainty = 0.5\n'
        'source = "invented measurement"\n')
    assert main(["summary", str(ringfork), "-q", "--no-cache", "--ratio", "alpha", "beta"]) == 0
    out = capsys.readouterr().out
    assert "Experiment: alpha : beta = 3.00 (from 2.50 to 3.50) (invented measurement)" in out
    assert main(["summary", str(ringfork), "-q", "--ratio", "beta", "alpha", "--format", "json"]) == 0
    import json
    data = json.loads(capsys.readouterr().out)
    assert data["experiment_ratio"]["value"] == pytest.approx(1 / 3)
    assert data["experiment_ratio"]["lo"] == pytest.approx(1 / 3.5) and data["experiment_ratio"]["hi"] == pytest.approx(1 / 2.5)
