"""Commit times at both ends of a run, by what they mean: the product-side and reactant-side commit,
each as *first arrival* and *final entry*, on hand-built runs whose answers are known to the frame.

Runs are built with 1 fs steps from -200 to 200 fs; ``dwell_fs`` = 20 and ``late_commit_fs`` = 150
(the shared schema example).  Times are |t| from the TS.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from basinmark.core.classify import TABLE_COLUMNS, classify_prepared, classify_run, classify_set, prepare
from basinmark.core.rules import parse_rules

from rules_examples import SCHEMA_EXAMPLE
from test_classify import A, B, N, R, make_run

INF = -math.inf

# run id: (pieces, outcome, product end, product (first arrival, final entry),
#          reactant end, reactant (first arrival, final entry), late_commit?)
CASES = {
    # the product at the backward end: the backward half leaves alpha at -81 fs (last frame in alpha)
    "bwd_product": ([(INF, A), (-80, N), (30, R)], "alpha", "backward", (81.0, 81.0), "forward", (30.0, 30.0),
                    False),
    # product at the forward end
    "fwd_product": ([(INF, R), (-60, N), (40, B)], "beta", "forward", (40.0, 40.0), "backward", (61.0, 61.0),
                    False),
    # forward re-entry: in alpha 40..69 fs, out 70..99, back in from 100 on and stays
    "fwd_reentry": ([(INF, R), (-50, N), (40, A), (70, N), (100, A)], "alpha", "forward", (40.0, 100.0),
                    "backward", (51.0, 51.0), False),
    # a 30 fs visit to beta between the two stays in alpha: the first arrival is the entry after it
    "fwd_reentry_via_beta": ([(INF, R), (-50, N), (20, A), (60, B), (90, N), (100, A)], "alpha", "forward",
                             (100.0, 100.0), "backward", (51.0, 51.0), False),
    # a 10 fs touch of beta (< dwell) is no visit: the first arrival stays at 20 fs
    "fwd_touch_beta": ([(INF, R), (-50, N), (20, A), (60, B), (70, N), (100, A)], "alpha", "forward",
                       (20.0, 100.0), "backward", (51.0, 51.0), False),
    # backward re-entry into the product: alpha -100..-61, out -120..-101, alpha again from -121 outwards
    "bwd_reentry": ([(INF, A), (-120, N), (-100, A), (-60, N), (40, R)], "alpha", "backward", (61.0, 121.0),
                    "forward", (40.0, 40.0), False),
    # backward re-entry into the reactant
    "bwd_reactant_reentry": ([(INF, R), (-130, N), (-110, R), (-60, N), (40, A)], "alpha", "forward",
                             (40.0, 40.0), "backward", (61.0, 131.0), False),
    # late_commit looks at the product side: a late product commit is flagged ...
    "late_product_bwd": ([(INF, B), (-170, N), (30, R)], "beta", "backward", (171.0, 171.0), "forward",
                         (30.0, 30.0), True),
    "late_product_fwd": ([(INF, R), (-50, N), (160, A)], "alpha", "forward", (160.0, 160.0), "backward",
                         (51.0, 51.0), True),
    # ... a late product first arrival with an early final entry is not (the flag uses the final entry) ...
    # ... and a late reactant commit with an early product commit is not
    "late_reactant_bwd": ([(INF, R), (-170, N), (30, A)], "alpha", "forward", (30.0, 30.0), "backward",
                          (171.0, 171.0), False),
    "late_reactant_fwd": ([(INF, A), (-50, N), (160, R)], "alpha", "backward", (51.0, 51.0), "forward",
                          (160.0, 160.0), False),
    # in alpha from the TS frame on: the backward half's one frame in alpha is no visit
    "at_ts": ([(INF, R), (0, A)], "alpha", "forward", (0.0, 0.0), "backward", (1.0, 1.0), False),
    # no product end: both ends in the reactant
    "recross": ([(INF, R), (-50, N), (30, R)], "recrossing", None, None, None, None, False),
    # an unfinished run still has a product end when one end committed to a product
    "unfinished_bwd_product": ([(INF, A), (-50, N)], "unfinished", "backward", (51.0, 51.0), None, None, False),
    # two different products: no single product end
    "two_products": ([(INF, A), (-50, N), (30, B)], "ambiguous", None, None, None, None, False),
}


@pytest.fixture(scope="module")
def rules():
    return parse_rules(SCHEMA_EXAMPLE)


def _same(got, want) -> bool:
    return (want is None and got is None) or (want is not None and got == pytest.approx(want, abs=1e-9))


@pytest.mark.parametrize("run_id", list(CASES))
def test_commit_times_to_the_frame(rules, run_id):
    pieces, outcome, p_end, p_times, r_end, r_times, late = CASES[run_id]
    res = classify_run(make_run(run_id, pieces), rules)
    assert res.outcome == outcome
    assert res.product_end == p_end and res.reactant_end == r_end
    got_p = None if res.product_end is None else (res.product_first_arrival_fs, res.product_final_entry_fs)
    got_r = None if res.reactant_end is None else (res.reactant_first_arrival_fs, res.reactant_final_entry_fs)
    assert got_p == (None if p_times is None else pytest.approx(p_times, abs=1e-9))
    assert got_r == (None if r_times is None else pytest.approx(r_times, abs=1e-9))
    if p_end is None:
        assert res.product_first_arrival_fs is None and res.product_final_entry_fs is None
    assert ("late_commit" in res.flags) is late


def test_first_arrival_never_after_final_entry(rules):
    runs = [make_run(k, v[0]) for k, v in CASES.items()]
    table = classify_set(runs, rules)
    for side in ("product", "reactant"):
        first, final = table[f"{side}_first_arrival_fs"], table[f"{side}_final_entry_fs"]
        ok = first.notna()
        assert (first[ok] <= final[ok]).all() and (first.isna() == final.isna()).all()
        assert (final.dropna() >= 0).all()  # |t| from the TS


def test_product_end_holds_the_outcome(rules):
    runs = [make_run(k, v[0]) for k, v in CASES.items()]
    table = classify_set(runs, rules).set_index("run")
    for run, row in table.iterrows():
        if row["outcome"] in rules.products:
            basin = row["backward_basin"] if row["product_end"] == "backward" else row["forward_basin"]
            assert basin == row["outcome"]
            # the per-half signed commit of that end is the product's final entry, with its sign
            signed = row[f"{row['product_end']}_commit_time_fs"]
            assert abs(signed) == pytest.approx(row["product_final_entry_fs"])
            assert (signed < 0) == (row["product_end"] == "backward") or signed == 0


def test_table_columns_are_named_for_what_they_mean(rules):
    assert "commit_time_fs" not in TABLE_COLUMNS
    for col in ("product_end", "product_first_arrival_fs", "product_final_entry_fs", "reactant_end",
                "reactant_first_arrival_fs", "reactant_final_entry_fs", "forward_commit_time_fs",
                "backward_commit_time_fs"):
        assert col in TABLE_COLUMNS
    table = classify_set([make_run("b", CASES["bwd_product"][0])], rules)
    assert list(table.columns) == TABLE_COLUMNS
    row = table.iloc[0]
    assert row["product_end"] == "backward" and row["product_final_entry_fs"] == pytest.approx(81.0)
    assert row["forward_commit_time_fs"] == pytest.approx(30.0)
    assert row["backward_commit_time_fs"] == pytest.approx(-81.0)


def test_signed_product_commit_time():
    from basinmark.core.classify import signed_commit_time

    assert signed_commit_time("backward", 81.0) == -81.0
    assert signed_commit_time("forward", 40.0) == 40.0
    assert signed_commit_time(None, 40.0) is None
    assert signed_commit_time("forward", float("nan")) is None


def test_vectorised_matches_per_run(rules):
    """All runs at once give the same times as one run at a time (the stacked arrays do not leak)."""
    runs = [make_run(k, v[0]) for k, v in CASES.items()]
    prep = prepare(runs, rules)
    res = classify_prepared(prep, rules)
    for k, run in enumerate(runs):
        one = classify_run(run, rules)
        for name in ("product_first_arrival_fs", "product_final_entry_fs", "reactant_first_arrival_fs",
                     "reactant_final_entry_fs"):
            many = getattr(res, name)[k]
            assert (np.isnan(many) and getattr(one, name) is None) or many == getattr(one, name)


def test_histogram_and_summary_default_to_the_product_side(rules):
    from basinmark.core.timing import commit_time_histogram, commit_time_summary

    keys = ("bwd_product", "late_product_bwd", "late_reactant_fwd", "fwd_product")
    table = classify_set([make_run(k, CASES[k][0]) for k in keys], rules)
    s = commit_time_summary(table).set_index("outcome")
    # alpha: backward products at 81 and 51 fs; beta: 171 (backward) and 40 (forward)
    assert s.loc["alpha", "median_fs"] == pytest.approx(66.0) and s.loc["beta", "max_fs"] == 171.0
    h = commit_time_histogram(table, bins=[0, 60, 120, 180])
    assert h.attrs["definition"] == "product side, final entry"
    counts = {(r.outcome, r.bin_lo_fs): r.count for r in h.itertuples()}
    assert counts[("alpha", 0.0)] == 1 and counts[("alpha", 60.0)] == 1 and counts[("beta", 120.0)] == 1
    r = commit_time_histogram(table, bins=[0, 60, 120, 180], column="reactant_first_arrival_fs")
    assert r.attrs["definition"] == "reactant side, first arrival"


def test_cli_classify_says_which_commit_time_it_shows(tmp_path, capsys):
    import json

    from basinmark.cli import main
    from test_classify import write_set

    keys = ("bwd_product", "late_product_bwd", "fwd_reentry", "fwd_product")
    # plain run names: words such as "bwd" or "fwd" in a file name would be read as half names
    root = write_set(tmp_path / "set", [make_run(f"run-{i}", CASES[k][0], dt=1.0) for i, k in enumerate(keys)])
    assert main(["classify", str(root), "--dry-run", "-q"]) == 0
    out = capsys.readouterr().out
    # alpha: 81 (backward) and 100 (forward, re-entered; first arrival 40); beta: 171 (backward) and 40
    assert "product side, final entry" in out and "|t| from the TS" in out
    assert "alpha median 90.5 fs (2 runs)" in out and "beta median 105.5 fs (2 runs)" in out
    assert "first arrival: alpha median 60.5 fs" in out
    assert main(["classify", str(root), "--dry-run", "-q", "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    by = {c["outcome"]: c for c in doc["commit_times"]["rows"]}
    assert doc["commit_times"]["definition"] == "product side, final entry"
    assert by["alpha"]["median_fs"] == 90.5 and by["beta"]["max_fs"] == 171.0
