"""The summary reads a label table's text columns whole, never cell by cell.

Found at 10,000 runs: showing the summary took a 124-143 ms turn of the window, half of it pandas calls made for
every cell of the label table's text columns (two per cell).  The window's label table holds pandas' text type,
so the test builds one like it and refuses any element-by-element iteration of such a column."""

from __future__ import annotations

import pandas as pd
import pytest
from pandas.core.arrays.base import ExtensionArray
from test_linear_labels import PRODUCTS, synthetic_labels

from basinmark.core.summary import build_summary, flag_warnings

N = 3000


def _as_text_columns(df: pd.DataFrame, dtype: str) -> pd.DataFrame:
    out = df.copy()
    for col in ("run", "final_label", "auto_label", "hand_label", "flags"):
        out[col] = out[col].astype(dtype)
    return out


@pytest.fixture
def no_cell_reads(monkeypatch):
    """Fails once text-column cells are read one at a time in bulk (a few, e.g. pandas building a small table of
    counts, are fine: the budget is a tenth of one column)."""
    real = ExtensionArray.__iter__
    seen = [0]

    def counting(self):
        for value in real(self):
            seen[0] += 1
            if seen[0] > N // 10:
                raise AssertionError("a text column of the label table was read one cell at a time")
            yield value

    monkeypatch.setattr(ExtensionArray, "__iter__", counting)


@pytest.mark.parametrize("dtype", ["string", "str"])
def test_summary_of_text_columns_equals_the_summary_of_objects(dtype):
    plain = synthetic_labels(N)
    want, got = build_summary(plain, PRODUCTS), build_summary(_as_text_columns(plain, dtype), PRODUCTS)
    assert got.table.equals(want.table)
    assert [(str(w), list(w.run_ids)) for w in got.warnings] == [(str(w), list(w.run_ids)) for w in want.warnings]
    assert [(str(w), list(w.run_ids)) for w in flag_warnings(_as_text_columns(plain, dtype))] == \
        [(str(w), list(w.run_ids)) for w in flag_warnings(plain)]


@pytest.mark.parametrize("dtype", ["string", "str"])
def test_summary_reads_text_columns_whole(dtype, no_cell_reads):
    labels = _as_text_columns(synthetic_labels(N), dtype)
    summary = build_summary(labels, PRODUCTS)
    assert summary.n_runs == N
    assert flag_warnings(labels)


def test_missing_labels_of_every_kind_are_not_outcomes():
    """pandas' own missing value (pd.NA, what a "string" column holds) is no label, like None, NaN and blanks:
    it was counted as an outcome called "<NA>" and named among the labels that are not products."""
    import numpy as np

    from basinmark.core.stats import outcome_table

    for values in (pd.Series(["amber", pd.NA, None, np.nan, " ", "teal"], dtype=object),
                   pd.Series(["amber", pd.NA, None, "", "teal", pd.NA], dtype="string")):
        table = outcome_table(values)
        assert sorted(table["label"]) == ["amber", "teal"]
        assert table.attrs["n_missing"] == 4


def test_summary_makes_no_python_call_per_run():
    """Found at 10,000 runs with two people's labels: bringing the summary to the front took a 65-151 ms turn,
    ~90 ms of it in `build_summary` making about 35 Python calls a run (a label tested for blankness, a flag list
    split and looked through, a run looked up per warning).  The whole table is now read column by column: the
    calls made for 8,000 runs are those made for 2,000 plus less than one per 20 added runs."""
    from test_linear_labels import count_calls

    def calls(n: int) -> int:
        labels = synthetic_labels(n)
        labels.loc[labels.index[::7], "hand_label"] = PRODUCTS[0]  # some hand labels, so both flag warnings show
        labels.loc[labels.index[3::40], "final_label"] = "  "  # blank text counts as no label
        return count_calls(lambda: build_summary(labels, PRODUCTS))

    small, large = calls(2000), calls(8000)
    assert large - small < 6000 / 20, (small, large)
