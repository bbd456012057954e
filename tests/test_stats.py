"""Tests of basinmark.core.stats: intervals, ratios, TST, convergence, sample size, warnings."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, strategies as st

from basinmark.core import stats
from basinmark.core.units import convert_energy

scipy_stats = pytest.importorskip("scipy.stats")

# --- special functions --------------------------------------------------------------------


@given(st.floats(min_value=1e-300, max_value=1 - 1e-12))
def test_norm_ppf_matches_scipy(p):
    # reference library: scipy.stats.norm.ppf
    assert stats.norm_ppf(p) == pytest.approx(scipy_stats.norm.ppf(p), rel=1e-12, abs=1e-12)


def test_norm_ppf_edges():
    assert stats.norm_ppf(0.5) == 0.0
    assert stats.norm_ppf(0.0) == -math.inf and stats.norm_ppf(1.0) == math.inf
    with pytest.raises(ValueError):
        stats.norm_ppf(1.5)
    # reference library: scipy.stats.norm.ppf(0.975) = 1.959963984540054
    assert stats.z_value(0.95) == pytest.approx(scipy_stats.norm.ppf(0.975), rel=1e-14)


@given(st.floats(0.2, 500), st.floats(0.2, 500), st.floats(0.0, 1.0))
def test_betainc_matches_scipy(a, b, x):
    # reference library: scipy.special.betainc (regularized incomplete beta)
    from scipy.special import betainc
    assert stats.betainc(a, b, x) == pytest.approx(betainc(a, b, x), rel=1e-9, abs=1e-13)


@given(st.floats(0.5, 300), st.floats(0.5, 300), st.floats(1e-6, 1 - 1e-6))
def test_beta_ppf_matches_scipy(a, b, q):
    # reference library: scipy.stats.beta.ppf
    assert stats.beta_ppf(q, a, b) == pytest.approx(scipy_stats.beta.ppf(q, a, b), rel=1e-8, abs=1e-12)


# --- single proportions -------------------------------------------------------------------

# Newcombe, Stat. Med. 17 (1998) 857, Table I (95 % intervals), as given in REFERENCES.md
NEWCOMBE_TABLE_I = [
    (81, 263, (0.2553, 0.3662), (0.2527, 0.3676)),
    (15, 148, (0.0624, 0.1605), (0.0578, 0.1617)),
    (0, 20, (0.0000, 0.1611), (0.0000, 0.1684)),
    (1, 29, (0.0061, 0.1718), (0.0009, 0.1776)),
]


@pytest.mark.parametrize("k,n,wilson,exact", NEWCOMBE_TABLE_I)
def test_newcombe_table_one(k, n, wilson, exact):
    # source: Newcombe, Stat. Med. 17 (1998) 857, Table I, to 4 decimals
    lo, hi = stats.proportion_interval(k, n, 0.95, "wilson")
    assert (round(lo, 4), round(hi, 4)) == wilson
    lo, hi = stats.proportion_interval(k, n, 0.95, "exact")
    assert (round(lo, 4), round(hi, 4)) == exact


@st.composite
def k_and_n(draw, max_n=2000):
    n = draw(st.integers(1, max_n))
    return draw(st.integers(0, n)), n


@given(k_and_n(), st.sampled_from([0.8, 0.9, 0.95, 0.99]))
def test_wilson_matches_scipy(kn, confidence):
    k, n = kn
    # reference library: scipy.stats.binomtest(k, n).proportion_ci(method="wilson")
    ref = scipy_stats.binomtest(k, n).proportion_ci(confidence_level=confidence, method="wilson")
    lo, hi = stats.proportion_interval(k, n, confidence, "wilson")
    assert lo == pytest.approx(ref.low, abs=1e-12) and hi == pytest.approx(ref.high, abs=1e-12)


@given(k_and_n(), st.sampled_from([0.9, 0.95, 0.99]))
def test_exact_matches_scipy(kn, confidence):
    k, n = kn
    # reference library: scipy.stats.binomtest(k, n).proportion_ci(method="exact")
    # (scipy root-finds on the binomial CDF with its own tolerance, hence 1e-9)
    ref = scipy_stats.binomtest(k, n).proportion_ci(confidence_level=confidence, method="exact")
    lo, hi = stats.proportion_interval(k, n, confidence, "exact")
    assert lo == pytest.approx(ref.low, rel=1e-9, abs=1e-12)
    assert hi == pytest.approx(ref.high, rel=1e-9, abs=1e-12)


@given(k_and_n(300))
def test_intervals_contain_the_estimate(kn):
    k, n = kn
    for method in stats.METHODS:
        lo, hi = stats.proportion_interval(k, n, method=method)
        assert 0.0 <= lo <= k / n <= hi <= 1.0
    # at k = 0 the exact upper bound has the closed form 1 − (α/2)^(1/n) (Clopper & Pearson 1934)
    if k == 0:
        assert stats.proportion_interval(0, n, method="exact")[1] == pytest.approx(1 - 0.025 ** (1 / n), rel=1e-12)


def test_proportion_interval_input_checks():
    assert stats.proportion_interval(0, 0) == (0.0, 1.0)
    assert stats.proportion_interval(0, 0, method="exact") == (0.0, 1.0)
    for bad in [(3, 2), (-1, 5), (1.5, 3)]:
        with pytest.raises(ValueError):
            stats.proportion_interval(*bad)
    with pytest.raises(ValueError, match="method"):
        stats.proportion_interval(1, 3, method="normal")
    with pytest.raises(ValueError, match="confidence"):
        stats.proportion_interval(1, 3, confidence=95)


# --- several outcomes ---------------------------------------------------------------------


@given(st.lists(st.integers(0, 400), min_size=3, max_size=7).filter(lambda c: sum(c) > 0),
       st.sampled_from([0.9, 0.95]))
def test_goodman_matches_statsmodels(counts, confidence):
    from statsmodels.stats.proportion import multinomial_proportions_confint
    # reference library: statsmodels multinomial_proportions_confint(method="goodman")
    ref = multinomial_proportions_confint(counts, alpha=1 - confidence, method="goodman")
    got = stats.goodman_intervals(counts, confidence)
    np.testing.assert_allclose(got, np.clip(ref, 0, 1), rtol=1e-10, atol=1e-12)


def test_outcome_table_counts_fractions_and_simultaneous_columns():
    labels = ["alpha"] * 60 + ["beta"] * 20 + ["recrossing"] * 15 + ["unfinished"] * 5 + ["excluded"] * 4 + [None, ""]
    table = stats.outcome_table(labels)
    assert list(table["label"]) == ["alpha", "beta", "recrossing", "unfinished"]
    assert list(table["count"]) == [60, 20, 15, 5]
    assert table.attrs["n"] == 100 and table.attrs["n_excluded"] == 4 and table.attrs["n_missing"] == 2
    assert table["fraction"].tolist() == pytest.approx([0.6, 0.2, 0.15, 0.05])
    assert (table.loc[0, "lo"], table.loc[0, "hi"]) == stats.proportion_interval(60, 100)
    # simultaneous intervals are wider than one-at-a-time ones (Goodman 1965: Bonferroni-type level α/k)
    assert (table["simultaneous_lo"] <= table["lo"]).all() and (table["simultaneous_hi"] >= table["hi"]).all()


def test_outcome_table_order_keeps_zero_rows_and_two_outcomes_have_no_simultaneous():
    table = stats.outcome_table(pd.Series(["alpha", "alpha", "beta"]), order=["beta", "alpha", "gamma"])
    assert list(table["label"]) == ["beta", "alpha", "gamma"]
    assert list(table["count"]) == [1, 2, 0]
    assert "simultaneous_lo" in table
    two = stats.outcome_table(["alpha", "beta", "beta"])
    assert "simultaneous_lo" not in two and list(two["label"]) == ["beta", "alpha"]
    empty = stats.outcome_table([])
    assert empty.empty and empty.attrs["n"] == 0


# --- ratios and TST -----------------------------------------------------------------------


@given(st.integers(0, 500), st.integers(0, 500), st.sampled_from(stats.METHODS))
def test_ratio_interval_is_the_transformed_binomial_interval(k1, k2, method):
    ratio, lo, hi = stats.ratio_interval(k1, k2, method=method)
    if k1 + k2 == 0:
        assert all(math.isnan(v) for v in (ratio, lo, hi))
        return
    p_lo, p_hi = stats.proportion_interval(k1, k1 + k2, method=method)
    assert lo == pytest.approx(p_lo / (1 - p_lo)) if p_lo < 1 else math.isinf(lo)
    if k2 == 0:
        assert math.isinf(ratio) and math.isinf(hi)
    else:
        assert ratio == pytest.approx(k1 / k2)
        assert hi == pytest.approx(p_hi / (1 - p_hi))
        assert lo <= ratio <= hi
    if k1 == 0:
        assert ratio == 0 and lo == 0


def test_tst_ratio_values():
    # common practice, no source; computed: 1.364 kcal/mol at 298.15 K gives 9.996
    assert stats.tst_ratio(1.364, "kcal/mol", 298.15) == pytest.approx(9.996, abs=5e-4)
    # two barriers of equal height predict 50:50 (fact of the trade)
    assert stats.tst_ratio(0.0) == 1.0
    # 1 kcal = 4.184 kJ (thermochemical calorie): the same barrier in kJ/mol gives the same ratio
    assert stats.tst_ratio(1.364 * 4.184, "kJ/mol") == pytest.approx(stats.tst_ratio(1.364), rel=1e-12)
    assert stats.tst_ratio(-1.364) == pytest.approx(1 / stats.tst_ratio(1.364))
    # reference library: scipy.constants.R (CODATA 2018, 8.314462618... in SI units) for RT
    from scipy.constants import R
    assert stats.GAS_CONSTANT_SI == pytest.approx(R, rel=1e-15)
    assert round(stats.GAS_CONSTANT_SI, 9) == 8.314462618
    assert stats.tst_ratio(2.0, temperature=350.0) == pytest.approx(math.exp(2000 * 4.184 / (R * 350.0)), rel=1e-12)
    with pytest.raises(ValueError):
        stats.tst_ratio(1.0, temperature=0)
    with pytest.raises(ValueError):
        stats.tst_ratio(1.0, unit="furlongs")


def test_effective_ddg_values():
    # derived check (REFERENCES.md): a 95:5 ratio is RT ln 19 = 1.745 kcal/mol at 298.15 K
    assert stats.effective_ddg(95 / 5) == pytest.approx(1.745, abs=5e-4)
    assert stats.effective_ddg(19, "kJ/mol") == pytest.approx(convert_energy(stats.effective_ddg(19), "kcal/mol", "kJ/mol"))
    assert stats.effective_ddg(stats.tst_ratio(0.8)) == pytest.approx(0.8, rel=1e-12)  # inverse functions
    assert stats.effective_ddg(1.0) == 0.0
    assert stats.effective_ddg(0.0) == -math.inf and stats.effective_ddg(math.inf) == math.inf
    assert math.isnan(stats.effective_ddg(math.nan))
    ddg, lo, hi = stats.effective_ddg_interval(95, 5)
    r, rlo, rhi = stats.ratio_interval(95, 5)
    assert (ddg, lo, hi) == (stats.effective_ddg(r), stats.effective_ddg(rlo), stats.effective_ddg(rhi))
    assert lo < ddg < hi


# --- convergence and sample size ----------------------------------------------------------


@given(st.lists(st.sampled_from(["alpha", "beta", "recrossing", "unfinished", None]), min_size=1, max_size=200),
       st.sampled_from(stats.METHODS))
def test_convergence_last_row_is_the_overall_interval(labels, method):
    table = stats.convergence(labels, "alpha", "beta", method=method)
    assert len(table) == len(labels) and table["n"].iloc[-1] == len(labels)
    ka, kb = labels.count("alpha"), labels.count("beta")
    last = table.iloc[-1]
    assert (last["n_a"], last["n_b"]) == (ka, kb)
    if ka + kb == 0:
        assert math.isnan(last["fraction_a"]) and math.isnan(last["ratio"])
        return
    lo, hi = stats.proportion_interval(ka, ka + kb, method=method)
    assert last["fraction_a"] == pytest.approx(ka / (ka + kb))
    assert last["lo"] == pytest.approx(lo, abs=1e-12) and last["hi"] == pytest.approx(hi, abs=1e-12)
    ratio, rlo, rhi = stats.ratio_interval(ka, kb, method=method)
    assert last["ratio"] == pytest.approx(ratio) and last["ratio_lo"] == pytest.approx(rlo)
    assert last["ratio_hi"] == pytest.approx(rhi)


def test_convergence_early_rows_are_undefined_until_a_product_appears():
    table = stats.convergence(["recrossing", "beta", "alpha", "alpha"], "alpha", "beta")
    assert math.isnan(table.loc[0, "fraction_a"])
    assert table.loc[1, "fraction_a"] == 0.0 and table.loc[1, "ratio"] == 0.0
    assert table["ratio"].tolist()[1:] == [0.0, 1.0, 2.0]


def test_runs_needed_hand_computed():
    # hand computation: z(0.975) = 1.959964; 1.959964² · 0.25 / 0.05² = 384.15 → 385
    assert stats.runs_needed(0.5, 0.05) == 385
    # 1.959964² · 0.8 · 0.2 / 0.03² = 682.95 → 683
    assert stats.runs_needed(0.8, 0.03) == 683
    # z(0.995) = 2.575829; 2.575829² · 0.1 · 0.9 / 0.02² = 1492.87 → 1493
    assert stats.runs_needed(0.1, 0.02, confidence=0.99) == 1493
    assert stats.runs_needed(0.0, 0.05) == 1
    with pytest.raises(ValueError):
        stats.runs_needed(0.5, 0.0)


# --- warnings -----------------------------------------------------------------------------


def test_warnings_for_thin_data():
    counts = {"alpha": 12, "beta": 2, "recrossing": 3, "unfinished": 4, "excluded": 1, "ambiguous": 1}
    ratio = stats.ratio_interval(12, 2)
    text = " ".join(stats.reliability_warnings(counts, ["alpha", "beta"], ratio=ratio, pair=("alpha", "beta")))
    assert "Only 14 runs reached a product" in text
    assert "Only 2 runs gave beta" in text
    assert "unfinished" in text and "4 of 22" in text
    assert "1 run was excluded" in text
    assert "ambiguous" in text
    assert "wider than the ratio itself" in text


def test_warnings_for_missing_product_unknown_labels_and_nothing():
    text = " ".join(stats.reliability_warnings({"alpha": 50, "gamma": 3}, ["alpha", "beta"],
                                               ratio=stats.ratio_interval(50, 0), pair=("alpha", "beta")))
    assert "No run gave beta" in text and "gamma (3)" in text
    assert stats.reliability_warnings({}, ["alpha", "beta"])[0].startswith("No labeled runs")


def test_no_warnings_for_ample_data():
    counts = {"alpha": 400, "beta": 300, "recrossing": 80, "unfinished": 20}
    ratio = stats.ratio_interval(400, 300)
    assert stats.reliability_warnings(counts, ["alpha", "beta"], ratio=ratio, pair=("alpha", "beta")) == []


def test_core_statistics_do_not_need_scipy_at_run_time():
    import subprocess
    import sys
    code = ("import sys, basinmark.core.stats, basinmark.core.summary; "
            "bad = [m for m in sys.modules if m.split('.')[0] in ('scipy', 'statsmodels')]; "
            "sys.exit(1 if bad else 0)")
    assert subprocess.run([sys.executable, "-c", code]).returncode == 0
