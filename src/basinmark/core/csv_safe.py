"""CSV cells that a spreadsheet will not run as formulas, and the exact way back.

Following OWASP's guidance on CSV injection (owasp.org, "CSV Injection"): a text cell beginning with
``=``, ``+``, ``-``, ``@``, a tab or a carriage return is written with a single quote in front, so a
spreadsheet shows it as text instead of evaluating it.  Numbers are never touched (a negative number
in a numeric column stays a number); only text cells are.

To make the way back exact, a text cell that already begins with quotes followed by one of those
characters gets one more quote; :func:`restore_cell` removes exactly one leading quote from any cell of
that shape.  So ``restore_cell(neutralise_cell(s)) == s`` for every string ``s``, and a cell such as
``'quoted`` (a quote not followed by a trigger) is left alone both ways.
"""

from __future__ import annotations

import re

import pandas as pd

#: characters that make a spreadsheet treat a cell as a formula (OWASP, "CSV Injection")
TRIGGERS = "=+-@\t\r"
_NEEDS_QUOTE = re.compile(r"'*[=+\-@\t\r]")
_NEUTRALISED = re.compile(r"'+[=+\-@\t\r]")


def neutralise_cell(value: object) -> object:
    """``value`` with a quote in front when it is text a spreadsheet would run; anything else unchanged."""
    if isinstance(value, str) and _NEEDS_QUOTE.match(value):
        return "'" + value
    return value


def restore_cell(value: str) -> str:
    """Undo :func:`neutralise_cell` (drop one leading quote before quotes-then-trigger)."""
    if _NEUTRALISED.match(value):
        return value[1:]
    return value


def neutralise_frame(df: pd.DataFrame) -> pd.DataFrame:
    """A copy of ``df`` whose text cells are neutralised; numeric and boolean columns are left as they are."""
    out = df.copy()
    for col in out.columns:
        series = out[col]
        if pd.api.types.is_numeric_dtype(series) or pd.api.types.is_bool_dtype(series):
            continue
        if pd.api.types.is_datetime64_any_dtype(series) or pd.api.types.is_timedelta64_dtype(series):
            continue
        if isinstance(series.dtype, pd.CategoricalDtype):
            series = series.astype(object)
        out[col] = series.map(neutralise_cell, na_action="ignore")
    out.columns = [neutralise_cell(str(c)) if isinstance(c, str) else c for c in out.columns]
    return out


def _shortest(x: float) -> str:
    return repr(float(x))


def csv_text(df: pd.DataFrame, **kwargs) -> str:
    """``df`` as CSV text (no index) with its text cells neutralised.

    Floats are written as Python's shortest round-trip text unless ``float_format`` is given: pandas'
    own default goes through numpy's print options, which another library in the same process can set
    to a 12-digit legacy mode (one did, in the test suite), and then values would be cut silently.
    """
    kwargs.setdefault("index", False)
    kwargs.setdefault("float_format", _shortest)
    return neutralise_frame(df).to_csv(**kwargs)
