"""Sensitivity of the outcome counts and the product ratio to one threshold.

The monitors of every run are computed once (:func:`basinmark.core.classify.prepare`); each
threshold value only re-evaluates basin membership and commitment, so a 20-step sweep costs
little more than one classification.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import pandas as pd

from basinmark.core.classify import Prepared, classify_prepared, prepare
from basinmark.core.rules import Rules, RulesError
from basinmark.core.stats import ratio_interval

MIN_RUNS_FOR_RATIO = 20  # fewer than this in a+b makes a ratio a rough guide; common practice, no source


def count_column(label: str) -> str:
    """Name of the count column for an outcome in a sweep table."""
    return f"n_{label}"


def sweep_threshold(tset, rules: Rules, basin: str, monitor: str, bound: str, values: Sequence[float],
                    a: str | None = None, b: str | None = None, confidence: float = 0.95,
                    prepared: Prepared | None = None) -> pd.DataFrame:
    """Counts per outcome and the ratio a/b for each value of one bound of one basin's condition.

    ``bound`` is "below" or "above" (see :meth:`Rules.with_threshold`).  ``a`` and ``b`` default to the
    first two products.  Columns: ``value``, ``n_<outcome>`` for every outcome (products, recrossing,
    unfinished, ambiguous), ``ratio``, ``ratio_lo``, ``ratio_hi`` (interval from
    :func:`basinmark.core.stats.ratio_interval`), ``note`` (plain sentence when the basins overlap at that
    value, the value is invalid, or a+b is small).  ``attrs``: a, b, basin, monitor, bound, count_columns.
    """
    labels = rules.outcome_labels + ["ambiguous"]
    products = rules.products
    a = a if a is not None else (products[0] if products else None)
    b = b if b is not None else (products[1] if len(products) > 1 else None)
    for name, key in ((a, "a"), (b, "b")):
        if name is not None and name not in labels:
            raise RulesError(rules.source, f"{key} = {name!r} is not an outcome; outcomes are {', '.join(labels)}")
    rules.threshold_target(basin, monitor, bound)  # wrong names fail here, before any work
    prep = prepared if prepared is not None else prepare(tset, rules)
    rows = []
    for v in values:
        v = float(v)
        row: dict = {"value": v}
        note = ""
        try:
            r = rules.with_threshold(basin, monitor, bound, v, check=False)
        except RulesError as exc:
            r = None
            note = exc.problem
        if r is None:
            row.update({count_column(lab): np.nan for lab in labels})
            row.update(ratio=np.nan, ratio_lo=np.nan, ratio_hi=np.nan, note=note)
            rows.append(row)
            continue
        overlaps = r.overlaps()
        if overlaps and not rules.allow_overlap:
            note = overlaps[0] + "; frames in both count as in neither"
        res = classify_prepared(prep, r, with_gap=False)
        counts = pd.Series(res.outcome, dtype=object).value_counts()
        for lab in labels:
            row[count_column(lab)] = int(counts.get(lab, 0))
        if a is not None and b is not None:
            ka, kb = row[count_column(a)], row[count_column(b)]
            row["ratio"], row["ratio_lo"], row["ratio_hi"] = ratio_interval(ka, kb, confidence=confidence)
            if ka + kb < MIN_RUNS_FOR_RATIO:
                few = f"only {ka + kb} runs gave {a} or {b}: the ratio is a rough guide"
                note = f"{note}; {few}" if note else few
        else:
            row.update(ratio=np.nan, ratio_lo=np.nan, ratio_hi=np.nan)
        row["note"] = note
        rows.append(row)
    cols = ["value"] + [count_column(lab) for lab in labels] + ["ratio", "ratio_lo", "ratio_hi", "note"]
    df = pd.DataFrame(rows, columns=cols)
    df.attrs.update(a=a, b=b, basin=basin, monitor=monitor, bound=bound,
                    count_columns={lab: count_column(lab) for lab in labels}, confidence=confidence)
    return df


def sweep_values(start: float, stop: float, steps: int) -> np.ndarray:
    """``steps`` evenly spaced values from ``start`` to ``stop`` inclusive."""
    if steps < 1:
        raise ValueError("steps must be at least 1")
    return np.linspace(float(start), float(stop), int(steps))
