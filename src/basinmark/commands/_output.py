"""Printing DataFrames as a readable table, CSV or JSON (``--format table|csv|json``)."""

from __future__ import annotations

import json
import sys
from typing import TextIO

import numpy as np
import pandas as pd

from basinmark.core.text import printable

FORMATS = ("table", "csv", "json")


def add_format_option(parser) -> None:
    parser.add_argument("--format", choices=FORMATS, default="table", help="output format (default: table)")


def _fmt(value, floatfmt: str) -> str:
    if value is None or (isinstance(value, float) and np.isnan(value)):
        return ""
    if isinstance(value, (float, np.floating)):
        return format(float(value), floatfmt)
    return printable(value)  # a newline or escape from an older file must not fake rows or colours


def table_text(df: pd.DataFrame, floatfmt: str = ".3f", max_width: int = 60) -> str:
    """A plain-text table with aligned columns (numbers right, text left)."""
    cols = [printable(c) for c in df.columns]
    cells = [[_fmt(v, floatfmt)[:max_width] for v in row] for row in df.itertuples(index=False)]
    widths = [max([len(c)] + [len(r[i]) for r in cells]) for i, c in enumerate(cols)]
    numeric = [pd.api.types.is_numeric_dtype(df[c]) and not pd.api.types.is_bool_dtype(df[c]) for c in df.columns]

    def line(values):
        parts = [v.rjust(w) if num else v.ljust(w) for v, w, num in zip(values, widths, numeric)]
        return "  ".join(parts).rstrip()

    out = [line(cols), "  ".join("-" * w for w in widths)]
    out += [line(r) for r in cells]
    return "\n".join(out)


def emit(df: pd.DataFrame, fmt: str = "table", stream: TextIO | None = None, floatfmt: str = ".3f") -> None:
    stream = stream or sys.stdout
    if fmt == "csv":
        from basinmark.core.csv_safe import csv_text

        stream.write(csv_text(df))  # text cells a spreadsheet would run get a leading quote
    elif fmt == "json":
        records = json.loads(df.to_json(orient="records"))
        json.dump(records, stream, indent=2)
        stream.write("\n")
    else:
        stream.write(table_text(df, floatfmt) + "\n")


def progress_printer(quiet: bool, verb: str = "loading"):
    """A progress callback ``(done, total, run_id)`` printing one updating line on stderr (terminals only)."""
    if quiet or not sys.stderr.isatty():
        return None

    def show(done: int, total: int, run_id) -> None:
        end = "\n" if done == total else ""
        print(f"\r{verb} {done}/{total} runs", end=end, file=sys.stderr, flush=True)

    return show
