"""Export current labels (CSV, or Parquet when pyarrow is installed) and import labels from a CSV.

An import is all or nothing: every row is checked first (known run, allowed label, reason for
``excluded``, each run once), and if anything is wrong nothing is written and
:class:`LabelImportError` lists every bad row with its file and line.

The export imports as it is: its ``label`` column holds the label a person set (hand, import or
review), empty where a run has only an automatic label; such rows are skipped on import (automatic
labels come from ``basinmark classify``), so exporting a set and importing the file into a fresh,
classified copy gives the same final labels, hand labels, labelers and reasons.  Text cells that a
spreadsheet would run as formulas are written with a leading quote (:mod:`basinmark.core.csv_safe`)
and the quote is taken off again on import.
"""

from __future__ import annotations

import csv
import importlib.util
from pathlib import Path
from typing import Mapping, Sequence

import pandas as pd

from basinmark.core.atomic_write import write_text_atomic, write_with
from basinmark.core.csv_safe import csv_text, restore_cell
from basinmark.core.errors import BasinmarkError
from basinmark.core.fs_errors import file_error
from basinmark.core.journal import LabelJournal
from basinmark.core.labels import LabelError, check_labeler_name, check_reason, validate_label

IMPORT_COLUMNS = ("run", "label")
OPTIONAL_COLUMNS = ("labeler", "reason")


class LabelImportError(BasinmarkError):
    """A label CSV cannot be imported; ``problems`` holds one sentence per bad row."""

    def __init__(self, path: str | Path, problems: list[str]):
        self.path = Path(path)
        self.problems = problems
        shown = "\n  ".join(problems[:50])
        more = f"\n  ... and {len(problems) - 50} more" if len(problems) > 50 else ""
        super().__init__(f"{self.path}: nothing was imported, {len(problems)} problem(s):\n  {shown}{more}")


def export_table(journal: LabelJournal, current_hashes: Mapping[str, str] | None = None) -> pd.DataFrame:
    """The current labels (``journal.state``) with, second, the ``label`` column that an import records:
    the person's label, empty (missing) where the run has only an automatic label.  When some run has a note, a
    last column ``note`` holds each run's note (empty when none); a run with a note and no label has a row of its
    own."""
    table = journal.state(current_hashes)
    table.insert(1, "label", table["hand_label"])
    notes = journal.notes()
    extra = [r for r in notes.index if r not in set(table["run"])]
    if extra:
        rows = pd.DataFrame({"run": extra}).reindex(columns=table.columns)
        table = pd.concat([table.astype({"events": "Int64"}), rows.astype({"events": "Int64"})], ignore_index=True)
        table["events"] = table["events"].fillna(0).astype("int64")  # no label events in a note-only row
    if len(notes):  # the column is there when some run has a note (exports without notes keep their columns)
        table["note"] = [notes.at[r, "note"] if r in notes.index else "" for r in table["run"]]
    return table


def export_labels(journal: LabelJournal, path: str | Path,
                  current_hashes: Mapping[str, str] | None = None) -> Path:
    """Write :func:`export_table` to ``path``: ``.parquet`` needs pyarrow, else CSV (text cells neutralised).

    The file is written whole or not at all; a folder that is missing or cannot be written gives an
    error naming the file and what to do.
    """
    path = Path(path).expanduser()
    table = export_table(journal, current_hashes)
    if path.suffix.lower() == ".parquet":
        if importlib.util.find_spec("pyarrow") is None:
            raise BasinmarkError(f"{path}: writing Parquet needs the pyarrow package, which is not installed; "
                                 "use a .csv file name")
        return write_with(path, lambda tmp: table.to_parquet(tmp, index=False), what="the label table")
    return write_text_atomic(path, csv_text(table), what="the label table")


def read_label_rows(path: str | Path) -> tuple[list[tuple[int, dict]], list[str]]:
    """Rows of a label CSV with their line numbers, and problems with its header."""
    path = Path(path)
    try:
        fh = open(path, newline="", encoding="utf-8-sig")
    except OSError as exc:
        raise file_error(exc, path, "read the label file") from None
    with fh:
        reader = csv.DictReader(fh)
        try:
            fields = [f.strip() for f in (reader.fieldnames or [])]
            reader.fieldnames = fields
            missing = [c for c in IMPORT_COLUMNS if c not in fields]
            if missing:
                return [], [f"{path}, line 1: the header lacks the column(s) {', '.join(missing)} "
                            f"(needed: run, label; optional: labeler, reason)"]
            rows = []
            for row in reader:
                # undo the spreadsheet safety quote of our own exports (csv_safe), exactly
                rows.append((reader.line_num, {k: restore_cell(v) if isinstance(v, str) else v
                                               for k, v in row.items()}))
        except (csv.Error, UnicodeDecodeError) as exc:
            raise BasinmarkError(f"{path}: not a readable CSV file ({exc})") from None
    return rows, []


def import_labels(journal: LabelJournal, path: str | Path, *, runs: Mapping[str, str],
                  allowed: Sequence[str], labeler: str | None = None,
                  notes: list[str] | None = None) -> list[dict]:
    """Import labels from a CSV as events with source ``import`` (one batch); returns the events.

    ``runs`` maps every known run id to its current content hash; ``allowed`` is the label
    vocabulary.  A row's own ``labeler`` column, when filled, names who labeled it.  Rows of an
    export that carry only an automatic label (empty ``label``, filled ``auto_label``) are skipped,
    and ``notes`` (if given) gets a sentence saying how many.
    """
    path = Path(path)
    rows, problems = read_label_rows(path)
    seen: dict[str, int] = {}
    entries = []
    automatic_only = 0
    for line, row in rows:
        where = f"{path}, line {line}"
        if None in row:
            problems.append(f"{where}: more cells than columns")
            continue
        run = (row.get("run") or "").strip()
        label = (row.get("label") or "").strip()
        reason = (row.get("reason") or "").strip()
        who = (row.get("labeler") or "").strip() or None
        if not run and not label:
            continue  # a blank line
        if run and not label and not (row.get("auto_label") or "").strip() and (row.get("note") or "").strip():
            continue  # an exported row carrying only a note: notes are not labels
        if run and not label and (row.get("auto_label") or "").strip():
            automatic_only += 1  # an exported row without a person's label: classify records these
            continue
        if not run:
            problems.append(f"{where}: no run id")
            continue
        if run not in runs:
            problems.append(f"{where}: unknown run {run!r} (not in the set)")
        try:
            label = validate_label(label, allowed, reason=reason)
        except LabelError as exc:
            problems.append(f"{where}: {exc}")
        for check in (lambda: check_reason(reason), lambda: who is not None and check_labeler_name(who)):
            try:
                check()
            except LabelError as exc:
                problems.append(f"{where}: {exc}")
        if run in seen:
            problems.append(f"{where}: run {run!r} appears again (first on line {seen[run]})")
        seen.setdefault(run, line)
        entries.append({"run_id": run, "label": label, "content_hash": runs.get(run, ""), "reason": reason,
                        "labeler": who or labeler})
    skipped = (f"{automatic_only} row(s) of {path} carry only an automatic label and were not imported "
               "(automatic labels are recorded by 'basinmark classify')") if automatic_only else ""
    if not entries and not problems:
        problems.append(f"{path}: no labels in the file" + (f"; {skipped}" if skipped else ""))
    if problems:
        raise LabelImportError(path, problems)
    events = journal.record_batch(entries, source="import", labeler=labeler)
    if skipped and notes is not None:
        notes.append(skipped)
    return events


def labels_frame(journal: LabelJournal, which: str = "final") -> pd.DataFrame:
    """One label per run (``final``, ``auto``, ``hand`` or a labeler name) as run, label, labeler, reason."""
    return journal.labels(which).reset_index(drop=True)[["run", "label", "labeler", "reason"]]
