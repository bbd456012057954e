"""Merge the automatic classification with the journal's current labels into the run table's rows.

The automatic outcome is the fresh classification of the runs on disk with
the current rules (falling back to the journal's recorded rule label when
there are no rules); the final label is the latest hand label, else the
automatic one (see the glossary).
"""

from __future__ import annotations

from collections import Counter
from typing import Iterable, Mapping, Sequence

import numpy as np
import pandas as pd

from basinmark.core.cells import column_values
from basinmark.core.labels import FIXED_LABELS
from basinmark.core.text import printable

#: what a run without any final label is counted as
UNCLASSIFIED = "unclassified"

LABEL_COLUMNS = ["run", "auto_label", "hand_label", "final_label", "product_end", "product_final_entry_fs",
                 "product_first_arrival_fs", "flags", "labeler", "reason", "data_changed", "note"]


def journal_notes(journal, labeler: str = "") -> dict[str, str]:
    """Each run's current note from the journal (run → text); with ``labeler``, only that person's notes
    (blind labeling shows nobody else's)."""
    if journal is None or not hasattr(journal, "notes"):
        return {}
    table = journal.notes()
    if table is None or table.empty:
        return {}
    if labeler:
        table = table[table["labeler"] == labeler]
    return {str(r): str(n) for r, n in zip(table["run"], table["note"]) if n}


def _text(value) -> str:
    if value is None or (isinstance(value, float) and pd.isna(value)):
        return ""
    return str(value)


def _by_run(frame: pd.DataFrame | None, index: pd.Index) -> pd.DataFrame | None:
    """``frame``'s rows in the order of ``index`` (missing runs: NaN); the last row of a run listed twice wins."""
    if frame is None or frame.empty or "run" not in frame.columns:
        return None
    return frame.drop_duplicates("run", keep="last").set_index("run").reindex(index)


def _column(frame: pd.DataFrame | None, name: str, index: pd.Index) -> pd.Series:
    """``frame[name]`` (already by run) as objects; None throughout when there is no such column."""
    if frame is None or name not in frame.columns:
        return pd.Series([None] * len(index), index=index, dtype=object)
    return frame[name].astype(object)


def _texts(values: pd.Series) -> np.ndarray:
    """:func:`_text` of every value (None, NaN and NA become ""), a whole column at once."""
    values = values.astype(object)
    missing = values.isna().to_numpy()
    out = values.to_numpy(dtype=object, copy=True)
    out[missing] = ""
    kept = out[~missing]
    if kept.size and not _all_str(kept):
        out[~missing] = kept.astype(str).astype(object)
    return out


def _all_str(values: np.ndarray) -> bool:
    """Every value is already a ``str`` (the usual case: then nothing is converted)."""
    return bool(pd.api.types.infer_dtype(values, skipna=False) == "string")


def _flags(values: pd.Series) -> np.ndarray:
    """:func:`_flag` of every value, a whole column at once (None, NaN and NA are False)."""
    values = values.astype(object)
    out = values.to_numpy(dtype=object, copy=True)
    out[values.isna().to_numpy()] = False
    return out.astype(bool)


def _printables(texts: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """``texts`` shown as they are (:func:`printable`) where ``rows`` holds, "" elsewhere; only those rows are looked
    at (a call per row of 10,000 runs was a cost of every label refresh)."""
    out = np.full(texts.size, "", dtype=object)
    for i in np.flatnonzero(rows).tolist():
        out[i] = printable(texts[i])
    return out


def build_label_table(run_ids: Sequence[str], classification: pd.DataFrame | None,
                      journal_state: pd.DataFrame | None, notes: Mapping[str, str] | None = None) -> pd.DataFrame:
    """One row per run id, in the given order, with the LABEL_COLUMNS; ``notes``: each run's note (run → text).

    Built a column at a time (a dict per run cost 0.7 s of the window's turn at 2,000 runs, profiled)."""
    index = pd.Index(np.asarray(run_ids, dtype=object).astype(str).astype(object) if len(run_ids) else [])
    if not len(index):
        return pd.DataFrame(columns=LABEL_COLUMNS)
    cls = _by_run(classification, index)
    jst = _by_run(journal_state, index)

    def c(name: str) -> pd.Series:
        return _column(cls, name, index)

    def j(name: str) -> pd.Series:
        return _column(jst, name, index)

    auto_c, auto_j = _texts(c("outcome")), _texts(j("auto_label"))
    auto = np.where(auto_c != "", auto_c, auto_j)
    hand = _texts(j("hand_label"))
    has_hand = hand != ""

    def own_text(name: str) -> np.ndarray:
        # free text from the journal, shown as it is (an older file's line breaks or overrides escaped)
        return _printables(_texts(j(name)), has_hand)

    def number(name: str) -> np.ndarray:
        return pd.to_numeric(c(name), errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)

    changed = _flags(j("data_changed"))
    note = np.full(len(index), "", dtype=object)
    if notes:  # a loop over the notes, not over the runs (run ids are unique in a set)
        at = dict(zip(index.tolist(), range(len(index))))
        for run, text in notes.items():
            i = at.get(str(run))
            if i is not None:
                note[i] = printable(_text(text))
    return pd.DataFrame({
        "run": np.array(index, dtype=object),
        "auto_label": auto,
        "hand_label": hand,
        "final_label": np.where(has_hand, hand, auto),
        "product_end": _texts(c("product_end")),  # the end committed to the product (docs/commit-times.md)
        "product_final_entry_fs": number("product_final_entry_fs"),
        "product_first_arrival_fs": number("product_first_arrival_fs"),
        "flags": _texts(c("flags")),
        "labeler": own_text("labeler"),
        "reason": own_text("reason"),
        "data_changed": changed,
        # free text beside the labels (never a label)
        "note": note,
    }, columns=LABEL_COLUMNS)


def final_label_map(labels: pd.DataFrame | None, blank: str | None = None) -> dict[str, str]:
    """Every run's final label by run id; a run without one gets ``blank``, or is left out when ``blank`` is None.

    The columns are taken out whole (one conversion each): read cell by cell, pandas text columns cost two Python
    calls a cell, 60 ms at 10,000 runs in the turn that shows the map (measured)."""
    if labels is None or labels.empty:
        return {}
    runs, finals = column_values(labels["run"]), column_values(labels["final_label"])
    if blank is None:
        return {str(r): str(f) for r, f in zip(runs, finals) if isinstance(f, str) and f}
    return {str(r): (str(f) if isinstance(f, str) and f else blank) for r, f in zip(runs, finals)}


def final_label_counts(final_labels: Iterable, products: Sequence[str] = ()) -> dict[str, int]:
    """Runs per final label: the products first (listed even at 0), then the fixed labels, then any other label
    in name order; a run without a label counts as ``unclassified``.

    The one count behind every "how many runs" the window shows per outcome (the run table's counts, the map's
    legend, the summary plots' legends), so that two of them never disagree.
    """
    labels = final_labels if isinstance(final_labels, pd.Series) else pd.Series(list(final_labels), dtype=object)
    text = labels.fillna("").astype(str)  # None, NaN: no label
    counts = Counter(text.replace("", UNCLASSIFIED).value_counts().to_dict())  # vectorised: 10^4 runs per event
    products = list(products or [])
    order = products + [x for x in FIXED_LABELS if x not in products] + sorted(
        k for k in counts if k not in products and k not in FIXED_LABELS)
    return {k: int(counts.get(k, 0)) for k in order if counts.get(k, 0) or k in products}
