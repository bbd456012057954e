"""The summary's column-at-a-time masks agree with the rules read one row at a time (a reference written here,
straight from the docstrings of `build_summary` and `flag_warnings`), on random label tables holding every kind
of "no label" a table can carry: None, NaN, pandas' NA, empty and blank text."""

from __future__ import annotations

import math
from collections import Counter

import pandas as pd
from hypothesis import given, settings
from hypothesis import strategies as st

from basinmark.core.summary import build_summary, flag_warnings, flag_words

PRODUCTS = ["amber", "teal"]
NOTHING = [None, math.nan, pd.NA, "", "  "]
FINAL = st.sampled_from(PRODUCTS + ["recrossing", "unfinished", "excluded", "ambiguous"] + NOTHING)
HAND = st.sampled_from(["amber", None, "", " ", pd.NA])
FLAGS = st.sampled_from(["", None, "energy_drift", "late_commit", "energy_drift;late_commit", "several_visits",
                         "late_commit;several_visits", "data_changed", "energy_drift_x", "x_energy_drift"])


def _blank(v) -> bool:
    return v is None or v is pd.NA or (isinstance(v, float) and math.isnan(v)) or str(v).strip() == ""


def reference(rows):
    """Per-row reading: (counts of counted labels, unlabeled runs, drifting runs, runs awaiting a look, its tally)."""
    counts, unlabeled, drift, waiting, tally = Counter(), [], [], [], Counter()
    for run, final, hand, flags in rows:
        if _blank(final):
            unlabeled.append(run)
            continue
        if str(final) == "excluded":
            continue
        counts[str(final)] += 1
        parts = [] if flags is None else str(flags).split(";")
        if "energy_drift" in parts:
            drift.append(run)
        if _blank(hand):
            mine = [f for f in parts if f and f not in ("energy_drift", "data_changed")]
            tally.update(mine)
            if mine:
                waiting.append(run)
    return counts, unlabeled, drift, waiting, tally


@settings(max_examples=150, deadline=None)
@given(st.lists(st.tuples(FINAL, HAND, FLAGS), min_size=1, max_size=40))
def test_column_masks_equal_the_row_by_row_rules(rows):
    rows = [(f"r{i:03d}",) + r for i, r in enumerate(rows)]
    table = pd.DataFrame(rows, columns=["run", "final_label", "hand_label", "flags"], dtype=object)
    table.index = [f"i{len(rows) - i}" for i in range(len(rows))]  # the index must not matter
    counts, unlabeled, drift, waiting, tally = reference(rows)

    s = build_summary(table, PRODUCTS)
    got = {r["label"]: r["count"] for _, r in s.table.iterrows() if r["count"]}
    assert got == dict(counts)
    assert s.n_unlabeled == len(unlabeled)
    no_label = [w for w in s.warnings if "no label yet" in w]
    assert [list(w.run_ids) for w in no_label] == ([unlabeled] if unlabeled else [])

    flagged = flag_warnings(table)
    by_drift = [w for w in flagged if "energy check" in w]
    assert [list(w.run_ids) for w in by_drift] == ([drift] if drift else [])
    look = [w for w in flagged if "flagged for a look" in w]
    assert [list(w.run_ids) for w in look] == ([waiting] if waiting else [])
    if waiting:
        listed = ", ".join(f"{flag_words(name)} {k}" for name, k in sorted(tally.items()))
        assert f"({listed})" in str(look[0])

    for w in s.warnings:  # a reliability warning about one product is about that product's runs
        if "amber" in w and "teal" not in w and "no label" not in w:
            assert set(w.run_ids) <= {r for r, f, *_ in rows if not _blank(f) and str(f) == "amber"}
