"""Timing: commit-time distributions and the bond-formation time gap.

A bond has *formed* at the first time, counted from the transition state along one half,
that its distance drops below ``form_below`` and then stays below for at least ``dwell_fs``.
The gap of a run is measured in the half that ends in a product (the forward half when both
or neither do); times are elapsed fs from t = 0, so the backward half counts |t|.

Runs whose two bonds form less than ``concerted_fs`` apart are called dynamically concerted,
the others dynamically stepwise (threshold 60 fs by default: common practice, from memory).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np
import pandas as pd

from basinmark.core.rules import DEFAULT_CONCERTED_FS

_TOL_FS = 1e-6  # times compare equal within 1e-6 fs (float noise from summed time steps)

#: the commit time the run table, the C key, ``late_commit`` and the histograms use unless told otherwise:
#: the product end's final entry, |t| from the TS (docs/commit-times.md)
DEFAULT_COMMIT_COLUMN = "product_final_entry_fs"
#: column -> the definition in words, as shown beside any number or figure that uses it
COMMIT_DEFINITIONS = {
    "product_final_entry_fs": "product side, final entry",
    "product_first_arrival_fs": "product side, first arrival",
    "reactant_final_entry_fs": "reactant side, final entry",
    "reactant_first_arrival_fs": "reactant side, first arrival",
}

MIN_RUNS_FOR_FRACTION = 30  # fewer runs with a gap than this gets a plain warning; common practice, no source


def first_stretch_times(mask: np.ndarray, times: np.ndarray, starts: np.ndarray, ends: np.ndarray,
                        ts: np.ndarray, direction: np.ndarray, dwell_fs: float) -> np.ndarray:
    """For many runs stacked end to end: elapsed time from the TS at which ``mask`` first becomes true
    and stays true for ``dwell_fs`` within one half.

    ``starts``/``ends`` (exclusive) delimit each run in the stacked arrays, ``ts`` is the absolute index of
    each run's TS frame, ``direction`` is +1 (forward half, frames ts..end-1) or -1 (backward half,
    frames ts down to start).  Returns ``(R,)`` float64, NaN where it never happens.  Vectorised over all
    runs: no Python loop per run.
    """
    mask = np.asarray(mask, dtype=bool)
    t = np.asarray(times, dtype=np.float64)
    starts, ends, ts = (np.asarray(a, dtype=np.intp) for a in (starts, ends, ts))
    direction = np.asarray(direction)
    n = mask.size
    out = np.full(starts.size, np.nan)
    if n == 0 or starts.size == 0:
        return out
    # Only the places where the mask changes are visited (sparse), not every frame.
    change = np.flatnonzero(mask[1:] != mask[:-1]) + 1
    for sign in (1, -1):
        chosen = direction == sign
        if not chosen.any():
            continue
        # forward halves split stays just before the TS frame, backward halves just after it
        cut = ts if sign > 0 else ts + 1
        bounds = np.union1d(np.union1d(change, starts), cut[cut < n])
        last = np.append(bounds[1:] - 1, n - 1)
        true = mask[bounds]
        st, en = bounds[true], last[true]
        run = np.searchsorted(starts, st, side="right") - 1
        in_half = (st >= ts[run]) if sign > 0 else (en <= ts[run])
        ok = in_half & chosen[run] & (np.abs(t[en] - t[st]) >= dwell_fs - _TOL_FS)
        st, en, run = st[ok], en[ok], run[ok]
        if run.size == 0:
            continue
        if sign > 0:  # earliest stay per run: its first occurrence
            u, pick = np.unique(run, return_index=True)
            out[u] = t[st[pick]] - t[ts[u]]
        else:  # the stay nearest the TS per run: its last occurrence
            u, rpick = np.unique(run[::-1], return_index=True)
            pick = run.size - 1 - rpick
            out[u] = t[ts[u]] - t[en[pick]]
    return out


def gap_mode(gap_fs: float, concerted_fs: float = DEFAULT_CONCERTED_FS) -> str:
    """"concerted", "stepwise" or "not formed" (NaN gap)."""
    if gap_fs is None or not np.isfinite(gap_fs):
        return "not formed"
    return "concerted" if abs(gap_fs) < concerted_fs else "stepwise"


def time_gaps(tset, rules) -> pd.DataFrame:
    """One row per run: run, outcome, half, t_first_fs, t_second_fs (formation times of the two
    ``[time_gap].bonds`` monitors), gap_fs (second − first, signed), mode (concerted/stepwise/not formed).

    Raises ValueError when the rules have no ``[time_gap]`` table.
    """
    from basinmark.core.classify import prepare, classify_prepared  # late import: classify uses this module

    if rules.time_gap is None:
        raise ValueError("the rules have no [time_gap] table naming the two bonds")
    prep = prepare(tset, rules)
    res = classify_prepared(prep, rules)
    g = rules.time_gap
    t1, t2, half = formation_pair(prep, res, rules)
    gap = t2 - t1
    return pd.DataFrame({
        "run": prep.run_ids,
        "outcome": res.outcome,
        "half": np.where(half > 0, "forward", "backward"),
        f"t_{g.bonds[0]}_fs": t1,
        f"t_{g.bonds[1]}_fs": t2,
        "gap_fs": gap,
        "mode": [gap_mode(x, g.concerted_fs) for x in gap],
    })


def formation_pair(prep, res, rules) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Formation times of the two time-gap bonds for prepared runs, and the half used (+1/-1)."""
    g = rules.time_gap
    products = set(rules.products)
    fwd_prod = np.array([b in products for b in res.forward_basin], dtype=bool)
    bwd_prod = np.array([b in products for b in res.backward_basin], dtype=bool)
    direction = np.where(~fwd_prod & bwd_prod, -1, 1)
    t1 = first_stretch_times(prep.monitors[g.bonds[0]] < g.form_below, prep.times, prep.starts, prep.ends,
                             prep.ts, direction, rules.dwell_fs)
    t2 = first_stretch_times(prep.monitors[g.bonds[1]] < g.form_below, prep.times, prep.starts, prep.ends,
                             prep.ts, direction, rules.dwell_fs)
    return t1, t2, direction


def concerted_fraction(gaps: Sequence[float] | pd.Series | pd.DataFrame,
                       concerted_fs: float = DEFAULT_CONCERTED_FS, confidence: float = 0.95,
                       outcomes: Sequence[str] | None = None) -> dict:
    """Counts of concerted and stepwise runs among those where both bonds formed.

    Returns ``{"n_formed", "n_not_formed", "concerted", "stepwise", "fraction_concerted", "lo", "hi",
    "concerted_fs", "warnings"}`` with a Wilson interval for the concerted fraction.  ``gaps`` may be
    the :func:`time_gaps` table (column ``gap_fs``), the :func:`~basinmark.core.classify.classify_set`
    table (column ``time_gap_fs``) or plain numbers (NaN = not formed).  With a table, ``outcomes``
    keeps only runs with those outcomes (e.g. ``rules.products`` for reactive runs).
    """
    from basinmark.core.stats import proportion_interval

    if isinstance(gaps, pd.DataFrame):
        rows = gaps if outcomes is None else gaps[gaps["outcome"].isin(list(outcomes))]
        g = rows["gap_fs"] if "gap_fs" in rows else rows["time_gap_fs"]
    else:
        g = gaps
    g = np.asarray(g, dtype=np.float64)
    formed = np.isfinite(g)
    n = int(formed.sum())
    k = int((np.abs(g[formed]) < concerted_fs).sum())
    warnings = []
    if n == 0:
        lo = hi = frac = float("nan")
        warnings.append("No run formed both bonds, so no concerted fraction can be given.")
    else:
        frac = k / n
        lo, hi = proportion_interval(k, n, confidence=confidence)
        if n < MIN_RUNS_FOR_FRACTION:
            warnings.append(f"Only {n} runs formed both bonds; the concerted fraction is uncertain "
                            f"(see the interval).")
    return {"n_formed": n, "n_not_formed": int((~formed).sum()), "concerted": k, "stepwise": n - k,
            "fraction_concerted": frac, "lo": lo, "hi": hi, "concerted_fs": float(concerted_fs),
            "warnings": warnings}


def commit_time_summary(table: pd.DataFrame, column: str = DEFAULT_COMMIT_COLUMN) -> pd.DataFrame:
    """Per outcome: n (runs with a commit time), median, mean, 10th and 90th percentile, max (fs) of
    |``column``|, by default the product end's final entry (see :data:`COMMIT_DEFINITIONS`)."""
    rows = []
    for outcome, grp in table.groupby("outcome", sort=False):
        v = pd.to_numeric(grp[column], errors="coerce").dropna().abs().to_numpy()
        if v.size == 0:
            rows.append({"outcome": outcome, "n": 0, "median_fs": np.nan, "mean_fs": np.nan,
                         "p10_fs": np.nan, "p90_fs": np.nan, "max_fs": np.nan})
            continue
        rows.append({"outcome": outcome, "n": int(v.size), "median_fs": float(np.median(v)),
                     "mean_fs": float(v.mean()), "p10_fs": float(np.percentile(v, 10)),
                     "p90_fs": float(np.percentile(v, 90)), "max_fs": float(v.max())})
    return pd.DataFrame(rows, columns=["outcome", "n", "median_fs", "mean_fs", "p10_fs", "p90_fs", "max_fs"])


def commit_time_histogram(table: pd.DataFrame, bins: int | Sequence[float] = 20,
                          column: str = DEFAULT_COMMIT_COLUMN) -> pd.DataFrame:
    """Histogram of |``column``| per outcome on shared bins: columns outcome, bin_lo_fs, bin_hi_fs, count.

    By default the product end's final entry; ``df.attrs["definition"]`` names the one used."""
    v = pd.to_numeric(table[column], errors="coerce").abs()
    ok = v.notna()
    if not ok.any():
        out = pd.DataFrame(columns=["outcome", "bin_lo_fs", "bin_hi_fs", "count"])
        out.attrs["definition"] = COMMIT_DEFINITIONS.get(column, column)
        return out
    edges = np.histogram_bin_edges(v[ok].to_numpy(), bins=bins)
    rows = []
    for outcome in dict.fromkeys(table.loc[ok, "outcome"]):
        counts, _ = np.histogram(v[ok & (table["outcome"] == outcome)].to_numpy(), bins=edges)
        for lo, hi, c in zip(edges[:-1], edges[1:], counts):
            rows.append({"outcome": outcome, "bin_lo_fs": float(lo), "bin_hi_fs": float(hi), "count": int(c)})
    out = pd.DataFrame(rows, columns=["outcome", "bin_lo_fs", "bin_hi_fs", "count"])
    out.attrs["definition"] = COMMIT_DEFINITIONS.get(column, column)
    return out
