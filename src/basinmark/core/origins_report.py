"""The origins analysis as files: the per-run table (CSV) and the whole result (JSON).

CSV: one row per run: run, outcome, whether it was compared, where its velocities came from, its RMSD from a
typical run's t = 0 geometry, then every starting coordinate (units in the column names).
JSON: the sentence, accuracy with its standard error and interval, baseline with its interval, the permutation
test, the ranked importances, the distributions per outcome, warnings, notes and the counts used.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Mapping

import numpy as np
import pandas as pd

from basinmark.core.atomic_write import write_text_atomic
from basinmark.core.csv_safe import csv_text
from basinmark.core.origins import C_GRID


def _num(v):
    """A JSON number, or None for NaN/inf (JSON has neither)."""
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        v = float(v)
        return v if math.isfinite(v) else None
    return v


def runs_table(a, start, outcome: Mapping[str, str]) -> pd.DataFrame:
    """The starting conditions of every run with its outcome and whether the analysis compared it."""
    table = start.table.copy()
    compared = set(a.run_ids)
    table.insert(1, "outcome", [outcome.get(r, "") or "" for r in table["run"]])
    table.insert(2, "compared", [r in compared for r in table["run"]])
    return table


def analysis_dict(a) -> dict:
    """Everything :func:`basinmark.core.origins.analyse` found, as plain JSON-able values."""
    s = a.settings
    return {
        "sentence": a.sentence,
        "runs_compared": len(a.run_ids),
        "outcomes": {k: int(v) for k, v in a.counts.items()},
        "classified": a.classified,
        "predictable": a.predictable,
        "classifier": "logistic regression on standardised coordinates (scikit-learn)",
        "regularisation": {"penalty": s.penalty, "C": "chosen by inner cross-validation" if s.C is None else s.C,
                           "inner_folds": s.inner_splits if s.C is None else None,
                           "C_grid": [float(c) for c in C_GRID] if s.C is None else None,
                           "chosen_C": [_num(c) for c in a.chosen_C],
                           "chosen_C_median": _num(float(np.median(a.chosen_C))) if a.chosen_C else None,
                           "sentence": a.regularisation()},
        "accuracy": {"value": _num(a.accuracy), "standard_error": _num(a.accuracy_se),
                     "interval": [_num(x) for x in a.accuracy_interval],
                     "per_repeat": [_num(x) for x in a.accuracy_repeats]},
        "baseline": {"value": _num(a.baseline), "majority": a.majority,
                     "interval": [_num(x) for x in a.baseline_interval]},
        "permutation_test": {"score": _num(a.permutation_score), "p_value": _num(a.p_value),
                             "permutations": int(len(a.permutation_scores)),
                             "chance_range": [_num(x) for x in a.chance_range]},
        "importance": [{k: _num(v) for k, v in row.items()} for row in a.importance.to_dict(orient="records")],
        "distributions": [{k: _num(v) for k, v in row.items()}
                          for row in a.distributions.to_dict(orient="records")],
        "warnings": [str(w) for w in a.warnings],
        "notes": [str(n) for n in a.notes],
        "settings": {"folds": s.n_splits, "repeats": s.n_repeats, "permutations": s.n_permutations,
                     "importance_shuffles": s.importance_repeats, "seed": s.seed, "confidence": s.confidence,
                     "C": s.C, "penalty": s.penalty, "inner_folds": s.inner_splits},
    }


def write_runs_csv(table: pd.DataFrame, path: str | Path) -> Path:
    return write_text_atomic(path, csv_text(table), what="the table of starting conditions")


def write_analysis_json(a, path: str | Path, runs: pd.DataFrame | None = None) -> Path:
    out = analysis_dict(a)
    if runs is not None:
        out["runs"] = [{k: _num(v) for k, v in row.items()} for row in runs.to_dict(orient="records")]
    text = json.dumps(out, indent=2, ensure_ascii=False, allow_nan=False)
    return write_text_atomic(path, text + "\n", what="the origins analysis")
