"""Comparing two labelers reads the label tables column by column, never run by run, and gives what a plain
per-run comparison gives.

Found at 10,000 runs with two labelers: comparing them took 450 ms of the window's thread, most of it pandas
look-ups made once per run (``.at[run, column]``, ``series[run]``)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from pandas.core.frame import DataFrame

from basinmark.core.review import compare_labels

LABELS = ["amber", "teal", "recrossing", "unfinished"]


def _side(rng: np.random.Generator, runs: list[str], who: str, dtype) -> pd.DataFrame:
    keep = [r for r in runs if rng.random() > 0.1]
    labels = rng.choice(LABELS, len(keep)).astype(object)
    labels[rng.random(len(keep)) < 0.05] = None   # a run listed without a label is not labeled
    return pd.DataFrame({"run": pd.array(keep, dtype=dtype), "label": pd.array(labels, dtype=dtype),
                         "labeler": who, "reason": pd.array([f"why {r}" for r in keep], dtype=dtype)})


def _plain(a: pd.DataFrame, b: pd.DataFrame) -> tuple[list, list, list, list]:
    """The comparison written run by run with dicts (the reference)."""
    def rows(df):
        return {str(r): (str(l), w, s) for r, l, w, s in zip(df["run"].tolist(), df["label"].tolist(),
                                                              df["labeler"].tolist(), df["reason"].tolist())
                if l is not None and l is not pd.NA and l == l}

    ra, rb = rows(a), rows(b)
    common = [r for r in ra if r in rb]
    differ = [[r, ra[r][0], ra[r][1], ra[r][2], rb[r][0], rb[r][1], rb[r][2]] for r in common if ra[r][0] != rb[r][0]]
    return common, differ, [r for r in ra if r not in rb], [r for r in rb if r not in ra]


@pytest.mark.parametrize("dtype", [object, "string", "str"])
@pytest.mark.parametrize("seed", [0, 1])
def test_comparison_equals_a_run_by_run_reference(dtype, seed):
    rng = np.random.default_rng(seed)
    runs = [f"run-{i:04d}" for i in rng.permutation(500)]
    a, b = _side(rng, runs, "ana", dtype), _side(rng, list(reversed(runs)), "bo", dtype)
    review = compare_labels(a, b, name_a="ana", name_b="bo", order=LABELS)
    common, differ, only_a, only_b = _plain(a, b)
    assert review.n == len(common)
    assert review.only_a == only_a and review.only_b == only_b
    assert review.disagreements.values.tolist() == differ
    assert int(review.confusion.to_numpy().sum()) == len(common)
    assert int(np.trace(review.confusion.to_numpy())) == len(common) - len(differ)


def test_comparison_reads_columns_whole(monkeypatch):
    rng = np.random.default_rng(3)
    runs = [f"run-{i:05d}" for i in range(3000)]
    a, b = _side(rng, runs, "ana", "str"), _side(rng, runs, "bo", "str")
    looked_up = [0]
    real = DataFrame._get_value

    def counting(self, *args, **kw):
        looked_up[0] += 1
        return real(self, *args, **kw)

    monkeypatch.setattr(DataFrame, "_get_value", counting)
    review = compare_labels(a, b)
    assert len(review.disagreements) > 1000
    assert looked_up[0] < 20, f"{looked_up[0]} single-cell look-ups for 3,000 runs"
