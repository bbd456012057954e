"""Time gaps and concerted fraction on constructed runs with known gaps; commit-time tables; the sweep."""

from __future__ import annotations

import json
import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, strategies as st
from scipy.stats import binomtest

from basinmark.core import stats
from basinmark.core.classify import classify_set, prepare
from basinmark.core.model import Trajectory
from basinmark.core.rules import RulesError, parse_rules
from basinmark.core.sweep import count_column, sweep_threshold, sweep_values
from basinmark.core.timing import (commit_time_histogram, commit_time_summary, concerted_fraction,
                                   first_stretch_times, gap_mode, time_gaps)
from test_classify import CASES, RULES, A, B, N, R, make_run, place, write_set

INF = -math.inf
T = np.arange(-200.0, 201.0)


def bonds_run(run_id: str, t_a: float, t_b: float, *, blip: tuple[float, float] | None = None,
              backward: bool = False) -> Trajectory:
    """A reactive run into alpha where r_a forms at t_a and r_b at t_b (elapsed fs from the TS).

    The backward half sits in the reactant.  ``blip`` = (start, end): r_b dips below 1.75 Å briefly
    (shorter than the dwell) before it really forms.  ``backward`` mirrors the run in time.
    """
    e = np.abs(T) if backward else T
    prod = (e >= 0) if backward else (T >= 0)
    ra = np.where(prod & (e >= t_a), 1.5, 2.2)
    rb = np.where(prod & (e >= t_b), 1.5, 2.2)
    if blip:
        rb = np.where(prod & (e >= blip[0]) & (e < blip[1]), 1.5, rb)
    react = ~prod if not backward else (T > 0)
    ra = np.where(react & (np.abs(T) >= 50), 3.0, ra)
    rc = np.full_like(T, 3.0)
    return Trajectory(run_id, [6] * 9, place(ra, rb, rc), T)


@pytest.fixture(scope="module")
def rules():
    return parse_rules(RULES)


@pytest.mark.parametrize("t_a, t_b, gap, mode", [
    (40.0, 40.0, 0.0, "concerted"),
    (40.0, 70.0, 30.0, "concerted"),
    (40.0, 99.0, 59.0, "concerted"),
    (40.0, 100.0, 60.0, "stepwise"),  # gap < concerted_fs is concerted; exactly 60 is not
    (40.0, 150.0, 110.0, "stepwise"),
    (120.0, 30.0, -90.0, "stepwise"),  # r_b first: signed gap is negative
])
def test_known_gaps(rules, t_a, t_b, gap, mode):
    run = bonds_run("g", t_a, t_b)
    tg = time_gaps([run], rules)
    row = tg.iloc[0]
    assert row["outcome"] == "alpha" and row["half"] == "forward"
    assert row["t_r_a_fs"] == t_a and row["t_r_b_fs"] == t_b
    assert row["gap_fs"] == gap and row["mode"] == mode
    assert classify_set([run], rules)["time_gap_fs"].iloc[0] == abs(gap)


def test_brief_dip_does_not_count(rules):
    # r_b dips below 1.75 Å for 10 fs (< dwell 20 fs) at 20 fs, then forms for good at 90 fs
    tg = time_gaps([bonds_run("b", 40.0, 90.0, blip=(20.0, 30.0))], rules)
    assert tg["t_r_b_fs"].iloc[0] == 90.0 and tg["gap_fs"].iloc[0] == 50.0


def test_backward_product_half(rules):
    run = bonds_run("m", 40.0, 130.0, backward=True)
    tg = time_gaps([run], rules)
    assert tg["outcome"].iloc[0] == "alpha" and tg["half"].iloc[0] == "backward"
    assert (tg["t_r_a_fs"].iloc[0], tg["t_r_b_fs"].iloc[0], tg["gap_fs"].iloc[0]) == (40.0, 130.0, 90.0)


def test_never_formed(rules):
    run = make_run("u", [(INF, R), (-50, N)])
    tg = time_gaps([run], rules)
    assert tg["mode"].iloc[0] == "not formed" and np.isnan(tg["gap_fs"].iloc[0])
    assert gap_mode(float("nan")) == "not formed"


def test_first_stretch_times_many_runs():
    # two runs stacked: run 0 forward, run 1 backward; exact dwell boundary counts
    t = np.concatenate([np.arange(-3.0, 6.0), np.arange(-6.0, 3.0)])
    m0 = np.array([0, 0, 0, 0, 1, 0, 1, 1, 1], bool)  # forward: true at 1, then 3..5 (dwell 2)
    m1 = np.array([1, 1, 1, 0, 1, 0, 0, 0, 0], bool)  # backward: true at -2 (1 frame), -6..-4 (dwell 2)
    starts, ends = np.array([0, 9]), np.array([9, 18])
    ts = np.array([3, 15])
    out = first_stretch_times(np.concatenate([m0, m1]), t, starts, ends, ts, np.array([1, -1]), 2.0)
    np.testing.assert_array_equal(out, [3.0, 4.0])
    out0 = first_stretch_times(np.concatenate([m0, m1]), t, starts, ends, ts, np.array([1, -1]), 0.0)
    np.testing.assert_array_equal(out0, [1.0, 2.0])


def test_concerted_fraction_counts_and_interval():
    gaps = [0.0, 10.0, 59.9, 60.0, 200.0, -30.0, float("nan")]
    res = concerted_fraction(gaps, concerted_fs=60.0)
    assert (res["n_formed"], res["n_not_formed"], res["concerted"], res["stepwise"]) == (6, 1, 4, 2)
    assert res["fraction_concerted"] == pytest.approx(4 / 6)
    # reference library: scipy.stats.binomtest(...).proportion_ci(method="wilson") (Wilson 1927)
    ci = binomtest(4, 6).proportion_ci(confidence_level=0.95, method="wilson")
    assert (res["lo"], res["hi"]) == pytest.approx((ci.low, ci.high), abs=1e-9)
    assert res["warnings"] and "Only 6 runs" in res["warnings"][0]  # few runs are said plainly
    none = concerted_fraction([float("nan")])
    assert none["n_formed"] == 0 and math.isnan(none["fraction_concerted"]) and none["warnings"]


def test_concerted_fraction_from_table(rules):
    runs = [bonds_run(f"c{i}", 40.0, 40.0 + 20 * i) for i in range(6)]  # gaps 0, 20, ..., 100
    res = concerted_fraction(time_gaps(runs, rules), concerted_fs=rules.time_gap.concerted_fs)
    assert (res["concerted"], res["stepwise"]) == (3, 3)


def test_time_gaps_needs_the_table(rules):
    r = parse_rules(RULES.split("[time_gap]")[0])
    with pytest.raises(ValueError, match="time_gap"):
        time_gaps([bonds_run("x", 1.0, 2.0)], r)


def test_commit_time_summary_and_histogram(rules):
    runs = [make_run(k, CASES[k][0]) for k in ("to_alpha", "late", "to_beta", "unfinished", "wanderer")]
    table = classify_set(runs, rules)
    s = commit_time_summary(table).set_index("outcome")
    assert s.loc["alpha", "n"] == 2 and s.loc["alpha", "median_fs"] == pytest.approx(105.0)  # 40 and 170
    assert s.loc["alpha", "max_fs"] == 170.0 and s.loc["unfinished", "n"] == 0
    # reference: numpy percentile of the same values
    assert s.loc["beta", "p10_fs"] == pytest.approx(np.percentile([40.0, 90.0], 10))
    h = commit_time_histogram(table, bins=5)
    assert h.groupby("outcome")["count"].sum().to_dict() == {"alpha": 2, "beta": 2}
    assert h["bin_lo_fs"].min() == 40.0 and h["bin_hi_fs"].max() == 170.0
    b = commit_time_histogram(table, column="backward_commit_time_fs", bins=[0, 100])
    assert b["count"].sum() == 5  # |t| of backward commits


# --- sweep -------------------------------------------------------------------------------------------

def _sweep_runs():
    """Runs whose alpha commitment depends on the r_b threshold: r_b settles at 1.5, 1.9 or 2.1 Å."""
    runs = []
    for i, rb in enumerate([1.5, 1.5, 1.9, 1.9, 2.1]):
        runs.append(make_run(f"a{i}", [(INF, R), (-50, N), (40, (1.5, rb, 3.0))]))
    runs += [make_run(f"b{i}", [(INF, R), (-50, N), (40, B)]) for i in range(3)]
    return runs


def test_sweep_matches_independent_classification(rules):
    runs = _sweep_runs()
    values = sweep_values(1.6, 2.2, 4)  # 1.6, 1.8, 2.0, 2.2
    df = sweep_threshold(runs, rules, "alpha", "r_b", "below", values)
    assert list(df["value"]) == pytest.approx([1.6, 1.8, 2.0, 2.2])
    assert list(df[count_column("alpha")]) == [2, 2, 4, 5]  # r_b settles at 1.5 (x2), 1.9 (x2), 2.1
    for v, row in zip(values, df.itertuples(index=False)):
        independent = classify_set(runs, rules.with_threshold("alpha", "r_b", "below", v, check=False))
        counts = independent["outcome"].value_counts()
        for lab in rules.outcome_labels + ["ambiguous"]:
            assert getattr(row, count_column(lab)) == counts.get(lab, 0)
        ratio = stats.ratio_interval(counts.get("alpha", 0), counts.get("beta", 0))
        assert (row.ratio, row.ratio_lo, row.ratio_hi) == pytest.approx(ratio)
    assert df.attrs["a"] == "alpha" and df.attrs["b"] == "beta"
    assert all("rough guide" in n for n in df["note"])  # 8 runs: too few, said plainly


def test_sweep_reuses_prepared_monitors(rules):
    runs = _sweep_runs()
    prep = prepare(runs, rules)
    a = sweep_threshold(runs, rules, "alpha", "r_b", "below", [1.8, 2.0], prepared=prep)
    b = sweep_threshold(runs, rules, "alpha", "r_b", "below", [1.8, 2.0])
    pd.testing.assert_frame_equal(a, b)


def test_sweep_notes_overlap_and_invalid_values(rules):
    runs = _sweep_runs()
    df = sweep_threshold(runs, rules, "alpha", "r_a", "below", [1.7, 3.0])
    assert "can both hold" not in df["note"][0] and "'reactant' and 'alpha'" in df["note"][1]
    rb = parse_rules(RULES.replace("r_a = { above = 2.6 }", "r_a = { between = [2.6, 9.0] }"))
    bad = sweep_threshold(runs, rb, "reactant", "r_a", "above", [2.8, 9.5])
    assert "not ordered" in bad["note"][1] and np.isnan(bad["ratio"][1])
    with pytest.raises(RulesError):
        sweep_threshold(runs, rules, "alpha", "r_z", "below", [1.0])
    with pytest.raises(RulesError):
        sweep_threshold(runs, rules, "alpha", "r_a", "below", [1.0], a="gamma")
    with pytest.raises(ValueError):
        sweep_values(1.0, 2.0, 0)


def test_cli_sweep(tmp_path, capsys):
    from basinmark.cli import main

    root = write_set(tmp_path / "set", _sweep_runs())
    assert main(["sweep", str(root), "--basin", "alpha", "--monitor", "r_b", "--bound", "below",
                 "--from", "1.6", "--to", "2.2", "--steps", "4", "--format", "json", "-q"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert [r["n_alpha"] for r in rows] == [2, 2, 4, 5]
    assert main(["sweep", str(root), "--basin", "gamma", "--monitor", "r_b", "--bound", "below",
                 "--from", "1", "--to", "2", "-q"]) == 2
    assert "basins.gamma" in capsys.readouterr().err


def _first_stretch_reference(mask, t, ts, sign, dwell):
    """Plain loop: walk from the TS along one half, return the elapsed time of the first qualifying stay."""
    order = range(ts, len(mask)) if sign > 0 else range(ts, -1, -1)
    order = list(order)
    for pos, i in enumerate(order):
        if not mask[i] or (pos > 0 and mask[order[pos - 1]]):
            continue
        j = pos
        while j + 1 < len(order) and mask[order[j + 1]]:
            j += 1
        if abs(t[order[j]] - t[i]) >= dwell - 1e-6:
            return abs(t[i] - t[ts])
    return float("nan")


@given(st.lists(st.tuples(st.lists(st.booleans(), min_size=1, max_size=20), st.integers(0, 19),
                          st.sampled_from([1, -1])), min_size=1, max_size=5),
       st.sampled_from([0.0, 1.0, 2.0, 3.0]))
def test_first_stretch_times_matches_reference(specs, dwell):
    masks, times, ts, dirs, lengths = [], [], [], [], []
    for bits, k, sign in specs:
        f = len(bits)
        k = min(k, f - 1)
        masks.append(np.array(bits))
        times.append(np.arange(f, dtype=float) - k)
        ts.append(k)
        dirs.append(sign)
        lengths.append(f)
    ends = np.cumsum(lengths)
    starts = ends - np.array(lengths)
    got = first_stretch_times(np.concatenate(masks), np.concatenate(times), starts, ends, starts + np.array(ts),
                              np.array(dirs), dwell)
    want = [_first_stretch_reference(m, t, k, s, dwell) for m, t, k, s in zip(masks, times, ts, dirs)]
    np.testing.assert_array_equal(got, want)


def test_worked_example_of_the_docs(rules):
    """The run narrated in docs/rules-file.md ("Worked example: one run") gives what the text says."""
    t = np.arange(-300.0, 401.0)
    ra = np.where(t <= -48, 3.0, np.where(t >= 35, 1.5, 2.1))
    rb = np.where(t >= 62, 1.5, 2.1)
    rc = np.full_like(t, 3.0)
    run = Trajectory("run-17", [6] * 9, place(ra, rb, rc), t)
    from basinmark.core.classify import classify_run
    res = classify_run(run, rules)
    assert (res.outcome, res.backward_basin, res.forward_basin) == ("alpha", "reactant", "alpha")
    assert (res.forward_commit_time_fs, res.backward_commit_time_fs, res.flags) == (62.0, -48.0, [])
    assert (res.product_end, res.product_final_entry_fs, res.reactant_final_entry_fs) == ("forward", 62.0, 48.0)
    tg = time_gaps([run], rules).iloc[0]
    assert (tg["t_r_a_fs"], tg["t_r_b_fs"], tg["gap_fs"], tg["mode"]) == (35.0, 62.0, 27.0, "concerted")


def test_concerted_fraction_of_reactive_runs_only(rules):
    runs = [bonds_run("c0", 40.0, 40.0), bonds_run("s0", 40.0, 140.0),
            make_run("w", [(INF, R), (-50, N), (20, A), (60, N), (90, B)])]  # beta run, r_b formed in passing
    table = classify_set(runs, rules)
    everything = concerted_fraction(table)
    alpha_only = concerted_fraction(table, outcomes=["alpha"])
    assert everything["n_formed"] == 3 and (alpha_only["concerted"], alpha_only["stepwise"]) == (1, 1)


def test_cli_classify_prints_time_gap(tmp_path, capsys):
    from basinmark.cli import main

    root = write_set(tmp_path / "set", [bonds_run("c0", 40.0, 40.0), bonds_run("s0", 40.0, 140.0)])
    assert main(["classify", str(root), "--dry-run", "-q"]) == 0
    out = capsys.readouterr().out
    assert "1 of 2 reactive runs that formed both bonds are dynamically concerted" in out
    assert "Only 2 runs formed both bonds" in out  # too few, said plainly
