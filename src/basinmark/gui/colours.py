"""Categorical colours for basins, outcomes and traces (our own choice).

Mid-tone, fairly saturated colours that read on both light and dark
backgrounds; everything else (backgrounds, text, grid) comes from the
Qt palette so dark mode keeps working.
"""

from __future__ import annotations

from typing import Sequence

from PySide6.QtGui import QColor

_CATEGORICAL = ("#2f7fd0", "#e0762a", "#2aa876", "#c8459a", "#8a6fd8", "#c9a227", "#3fb0c8", "#b85450")
_TRACE = ("#3b82c4", "#d9622b", "#37a169", "#b5479b", "#7d6bd0", "#c79a1e", "#2ea3b8", "#a8553f")
_FIXED = {"recrossing": "#8c8c8c", "unfinished": "#b0a080", "ambiguous": "#9a7fb8", "excluded": "#707070"}
REACTANT_COLOUR = "#9aa4ae"


def basin_colour(name: str, basin_names: Sequence[str], reactant: str | None = None) -> QColor:
    """Colour of a basin (the reactant grey-blue, products from the categorical list in file order)."""
    if name == reactant:
        return QColor(REACTANT_COLOUR)
    products = [b for b in basin_names if b != reactant]
    i = products.index(name) if name in products else len(products)
    return QColor(_CATEGORICAL[i % len(_CATEGORICAL)])


def outcome_colour(label: str, products: Sequence[str]) -> QColor:
    """Colour of an outcome/label: products as their basin, fixed labels their own greys."""
    if label in _FIXED:
        return QColor(_FIXED[label])
    i = list(products).index(label) if label in products else len(products)
    return QColor(_CATEGORICAL[i % len(_CATEGORICAL)])


def trace_colour(i: int) -> QColor:
    return QColor(_TRACE[i % len(_TRACE)])
