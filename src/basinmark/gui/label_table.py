"""Merge the automatic classification with the journal's current labels into the run table's rows.

The automatic outcome is the fresh classification of the runs on disk with
the current rules (falling back to the journal's recorded rule label when
there are no rules); the final label is the latest hand label, else the
automatic one (see the glossary).
"""

from __future__ import annotations

from collections import Counter
from typing import Iterable, Mapping, Sequence

import pandas as pd

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


def _num(value) -> float:
    return float("nan") if value is None or pd.isna(value) else float(value)


def _text(value) -> str:
    if value is None or (isinstance(value, float) and pd.isna(value)):
        return ""
    return str(value)


def _flag(value) -> bool:
    """True/False from a nullable boolean (pandas NA and None count as False)."""
    if value is None or value is pd.NA or (isinstance(value, float) and pd.isna(value)):
        return False
    return bool(value)


def build_label_table(run_ids: Sequence[str], classification: pd.DataFrame | None,
                      journal_state: pd.DataFrame | None, notes: Mapping[str, str] | None = None) -> pd.DataFrame:
    """One row per run id, in the given order, with the LABEL_COLUMNS; ``notes``: each run's note (run → text)."""
    notes = notes or {}
    cls = {} if classification is None else {r["run"]: r for r in classification.to_dict("records")}
    jst = {} if journal_state is None or journal_state.empty else {
        r["run"]: r for r in journal_state.to_dict("records")}
    rows = []
    for run in run_ids:
        c, j = cls.get(run, {}), jst.get(run, {})
        auto = _text(c.get("outcome")) or _text(j.get("auto_label"))
        hand = _text(j.get("hand_label"))
        rows.append({
            "run": run,
            "auto_label": auto,
            "hand_label": hand,
            "final_label": hand or auto,
            "product_end": _text(c.get("product_end")),  # the end committed to the product (docs/commit-times.md)
            "product_final_entry_fs": _num(c.get("product_final_entry_fs")),
            "product_first_arrival_fs": _num(c.get("product_first_arrival_fs")),
            "flags": _text(c.get("flags")),
            # free text from the journal, shown as it is (an older file's line breaks or overrides escaped)
            "labeler": printable(_text(j.get("labeler"))) if hand else "",
            "reason": printable(_text(j.get("reason"))) if hand else "",
            "data_changed": _flag(j.get("data_changed")),
            "note": printable(_text(notes.get(run))),  # free text beside the labels (never a label)
        })
    return pd.DataFrame(rows, columns=LABEL_COLUMNS)


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
