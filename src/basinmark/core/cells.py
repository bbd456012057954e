"""A table column's values as plain Python objects, and which of them are missing.

pandas 3 keeps text in its own string type, read cell by cell through two Python calls a cell (at 10,000 runs that was
most of several pauses of the window); its missing text is ``pd.NA``, beside the None and NaN of other columns.
Columns are taken out whole here, and one rule says what is missing, for every reader of label tables.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd


def column_values(column: pd.Series) -> list:
    """The values of ``column`` as plain Python objects, missing ones (NA, NaN, None) as None; one conversion."""
    return column.to_numpy(dtype=object, na_value=None).tolist()


def is_missing(value: object) -> bool:
    """None, pandas' NA or a float NaN."""
    return value is None or value is pd.NA or (isinstance(value, float) and math.isnan(value))


def is_blank(value: object) -> bool:
    """Missing, or text of nothing but white space (what a label table holds for "no label")."""
    return is_missing(value) or str(value).strip() == ""


def label_texts(values) -> np.ndarray:
    """Labels as an object array of ``str``, blank ones (:func:`is_blank`) as None, with no Python call per cell
    (at 10,000 runs a per-cell test was most of the summary's time): a column holds a handful of distinct labels,
    so each distinct one is tested once and the answers are spread back by their codes."""
    if not isinstance(values, pd.Series):
        arr = np.empty(len(values), dtype=object)
        arr[:] = list(values)
        values = arr
    codes, distinct = pd.factorize(values)  # missing values (None, NaN, NA) get the code -1
    names = np.empty(len(distinct) + 1, dtype=object)  # the last slot (None) is what code -1 picks
    names[:-1] = [None if is_blank(v) else str(v) for v in distinct]
    return names[codes]
