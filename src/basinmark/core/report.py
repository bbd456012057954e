"""Table and text exports: the label table (CSV), the summary (Markdown, CSV), runs and frames as extended XYZ.

No Qt here: the window's Export menu and the command line both call these.  Extended XYZ is written
with ``ase.io`` (the reference writer of the format); the comment line carries ``time`` (fs) and,
when known, ``epot``/``ekin`` (eV) -- the keys a set is read with by default -- so an exported run can
be opened again as a one-run set, and ``run`` names where it came from.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
from ase import Atoms

from basinmark.core.atomic_write import check_target, write_text_atomic, write_with
from basinmark.core.csv_safe import csv_text
from basinmark.core.errors import BasinmarkError
from basinmark.core.fs_errors import FileSystemError

#: columns of the exported label table, in order (those present in the label table are written)
#: the commit columns are the product end's (docs/commit-times.md): which end, and |t| from the TS of the
#: final entry and of the first arrival
LABEL_EXPORT_COLUMNS = ["run", "final_label", "auto_label", "hand_label", "labeler", "reason", "product_end",
                        "product_final_entry_fs", "product_first_arrival_fs", "flags", "data_changed"]

SUMMARY_SUFFIXES = {".md": "markdown", ".markdown": "markdown", ".csv": "csv", ".txt": "text", ".json": "json"}


class ExportError(BasinmarkError):
    """An export cannot be written as asked (bad file name, frame out of range, unwritable place)."""


class ExportFileError(ExportError, FileSystemError):
    """An export's file cannot be written (missing or read-only folder, full disk); says which and what to do."""


def label_export_table(labels: pd.DataFrame) -> pd.DataFrame:
    """The label table as exported: the known columns in a fixed order, then any others."""
    if "run" not in labels:
        raise ExportError("the label table has no 'run' column")
    cols = [c for c in LABEL_EXPORT_COLUMNS if c in labels] + [c for c in labels if c not in LABEL_EXPORT_COLUMNS]
    return labels.loc[:, cols].reset_index(drop=True)


def _writable(path: str | Path) -> Path:
    return check_target(path, ExportFileError)


def _write_text(path: Path, text: str) -> Path:
    """Whole or not at all (a temporary file renamed into place); an error names the file and what to do."""
    return write_text_atomic(path, text, cls=ExportFileError)


def write_label_table(labels: pd.DataFrame, path: str | Path) -> Path:
    """Write the label table (one row per run) as CSV, text cells neutralised for spreadsheets; returns the path."""
    path = _writable(path)
    return _write_text(path, csv_text(label_export_table(labels)))


def summary_text(summary, fmt: str) -> str:
    """A :class:`~basinmark.core.summary.Summary` as ``markdown``, ``csv``, ``text`` or ``json``."""
    if fmt == "markdown":
        return summary.to_markdown()
    if fmt == "csv":
        return csv_text(summary.to_frame())
    if fmt == "text":
        return summary.to_text()
    if fmt == "json":
        return summary.to_json() + "\n"
    raise ExportError(f"unknown summary format {fmt!r}; use markdown, csv, text or json")


def write_summary(summary, path: str | Path, fmt: str | None = None) -> Path:
    """Write a summary; the format follows the suffix (.md, .csv, .txt, .json) unless ``fmt`` is given.

    The CSV is the tidy table of :meth:`Summary.to_frame`; warnings are in the Markdown and text forms,
    so the CSV gets a sibling note only through the caller (the command prints them).
    """
    path = _writable(path)
    if fmt is None:
        fmt = SUMMARY_SUFFIXES.get(path.suffix.lower())
        if fmt is None:
            raise ExportError(f"{path}: cannot tell the format from the suffix; use .md, .csv, .txt or .json")
    return _write_text(path, summary_text(summary, fmt))


def frame_atoms(traj, frame: int) -> Atoms:
    """One frame of a run as ``ase.Atoms`` with the comment keys of an exported file."""
    if not -traj.n_frames <= frame < traj.n_frames:
        raise ExportError(f"run {traj.run_id} has frames 1 to {traj.n_frames}; frame {frame + 1} does not exist")
    frame = frame % traj.n_frames
    atoms = Atoms(numbers=traj.numbers.astype(int), positions=traj.positions[frame].astype(np.float64))
    atoms.info["run"] = str(traj.run_id)
    atoms.info["frame"] = int(frame + 1)  # 1-based, as people count frames
    atoms.info["time"] = float(traj.times[frame])
    for key, name in (("potential", "epot"), ("kinetic", "ekin")):
        values = traj.energies.get(key)
        if values is not None and np.isfinite(values[frame]):
            atoms.info[name] = float(values[frame])
    return atoms


def write_run_xyz(traj, path: str | Path, frame: int | None = None) -> Path:
    """Write the whole run (``frame=None``) or one frame (0-based index) as extended XYZ."""
    from ase.io import write

    path = _writable(path)
    frames = [frame_atoms(traj, frame)] if frame is not None else [frame_atoms(traj, i) for i in range(traj.n_frames)]
    return write_with(path, lambda tmp: write(tmp, frames, format="extxyz"), what="the run", cls=ExportFileError)
