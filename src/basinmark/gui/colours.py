"""Categorical colours for basins, outcomes and traces (our own choice).

Mid-tone, fairly saturated colours that read on both light and dark
backgrounds; everything else (backgrounds, text, grid) comes from the
Qt palette so dark mode keeps working.

Every outcome colour (run table, outcome band, map, traces' basin bands, summary) comes from
:func:`outcome_colour`; :func:`basin_colour` only adds the reactant's grey-blue.  Changing the
palette (e.g. for colour-blind safety) means changing :data:`_PRODUCT` alone.
"""

from __future__ import annotations

import colorsys
from typing import Sequence

from PySide6.QtGui import QColor

#: product colours in rules-file order: twelve, all pairwise apart by more than 20 CIE 1976 ΔE units and
#: apart from the fixed labels' greys (checked in tests/test_colours.py), so rules with up to twelve
#: products never share a colour
_PRODUCT = ("#2f7fd0", "#e0762a", "#2aa876", "#c8459a", "#8a6fd8", "#c9a227", "#3fb0c8", "#b85450",
            "#5c6f1e", "#1d4f91", "#e8839e", "#8c5a2b")
_TRACE = ("#3b82c4", "#d9622b", "#37a169", "#b5479b", "#7d6bd0", "#c79a1e", "#2ea3b8", "#a8553f")
_FIXED = {"recrossing": "#8c8c8c", "unfinished": "#b0a080", "ambiguous": "#9a7fb8", "excluded": "#707070"}
REACTANT_COLOUR = "#9aa4ae"
MAX_DISTINCT_PRODUCTS = len(_PRODUCT)


def product_colour(index: int) -> QColor:
    """Colour of the product at ``index`` (rules-file order, 0-based).

    Past the table, hues step by the golden angle at alternating lightness: still all different,
    but no longer checked to be far apart.
    """
    if index < len(_PRODUCT):
        return QColor(_PRODUCT[index])
    k = index - len(_PRODUCT)
    hue = (0.11 + k * 0.381966) % 1.0
    r, g, b = colorsys.hls_to_rgb(hue, 0.42 if k % 2 else 0.58, 0.55)
    return QColor.fromRgbF(r, g, b)


def outcome_colour(label: str, products: Sequence[str]) -> QColor:
    """Colour of an outcome/label: each product its own (rules-file order), fixed labels their own greys.

    A label that is neither (e.g. a product of older rules) takes the first colour after the products.
    """
    if label in _FIXED:
        return QColor(_FIXED[label])
    products = list(products)
    return product_colour(products.index(label) if label in products else len(products))


def basin_colour(name: str, basin_names: Sequence[str], reactant: str | None = None) -> QColor:
    """Colour of a basin: the reactant grey-blue, each product the colour of its outcome."""
    if name == reactant:
        return QColor(REACTANT_COLOUR)
    return outcome_colour(name, [b for b in basin_names if b != reactant])


def trace_colour(i: int) -> QColor:
    return QColor(_TRACE[i % len(_TRACE)])
