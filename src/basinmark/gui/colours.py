"""Categorical colours for outcomes, traces, thresholds and the time cursor (one place for all of them).

Outcome colours are reserved for outcomes: every outcome colour (run table, outcome band, map, basin
bands, summary) comes from :func:`outcome_colour`; :func:`basin_colour` only adds the reactant's colour.
Nothing else (trace lines, thresholds, cursor, other plots) may use them.

* Products 1–7 take the seven chromatic colours of the Okabe–Ito palette (M. Okabe and K. Ito, "Color
  Universal Design (CUD): How to make figures and presentations that are friendly to colorblind people",
  2008), published as safe for the common colour-vision deficiencies.
* The labels that are not products (reactant, recrossing, unfinished, ambiguous, excluded) take low-chroma
  colours of different lightness, chosen (our own search) to sit between the seven products.
* Trace lines take a separate set of darker colours (CIE L* 20–62) that no outcome colour comes near: three for
  the energies, sixteen for monitors, all different from each other.
* Thresholds are drawn neutral (a grey dash, labeled with their monitor), the cursor in its own blue.

tests/test_palette_cvd.py checks, under normal vision and under simulated deuteranopia and protanopia (Machado,
Oliveira and Fernandes 2009, severity 100, as implemented by colorspacious), that every pair of outcome
colours (seven products and the fixed labels) differs by at least :data:`MIN_OUTCOME_DE00` CIEDE2000 units
and every outcome/trace pair and the cursor by at least :data:`MIN_TRACE_DE00`.

Products 8–12 take further colours that are far apart for normal colour vision only; past twelve, hues step
by the golden angle.  Changing the palette means changing the tables below alone.
"""

from __future__ import annotations

import colorsys
from typing import Sequence

from PySide6.QtGui import QColor

#: products in rules-file order: Okabe–Ito's seven chromatic colours (blue, orange, bluish green, reddish
#: purple, sky blue, vermillion, yellow), then five more apart for normal vision only
_PRODUCT = ("#0072b2", "#e69f00", "#009e73", "#cc79a7", "#56b4e9", "#d55e00", "#f0e442",
            "#00e10f", "#873c5a", "#87960f", "#ff1e4b", "#c31eff")
#: products 1..CVD_SAFE_PRODUCTS keep apart under simulated deuteranopia and protanopia (tested)
CVD_SAFE_PRODUCTS = 7
#: the labels that are not products: neutral-looking, told apart by lightness and a faint tint
_FIXED = {"recrossing": "#3c3c3c", "unfinished": "#c3a5a5", "ambiguous": "#5a6969", "excluded": "#f0d2d2"}
REACTANT_COLOUR = "#a5c3d2"
#: the energy lines (potential, kinetic, total): their own three, never a monitor's
_ENERGY = {"potential": "#694b2d", "kinetic": "#0f3c96", "total": "#5a694b"}
#: monitor lines (the rules' monitors, then the ones the chemist added) and other curves, in order of use: dark
#: (CIE L* 20–62), so lines never read as an outcome's fill.  Our own greedy search over an sRGB grid (steps of 15):
#: each colour kept at least MIN_TRACE_DE00 from every outcome colour and the cursor (normal vision, simulated
#: deuteranopia and protanopia) and as far as possible (normal vision) from the energies and the colours before it
_TRACE = ("#961e00", "#004b69", "#3c00d2", "#870069", "#003c00", "#4b4b00", "#c32d3c", "#4b4b69",
          "#69000f", "#00693c", "#4b1e69", "#874b3c", "#692d00", "#3c5a1e", "#693c69", "#2d2d5a")
#: the time cursor (playback position) in every plot
CURSOR_COLOUR = "#3c87ff"
#: threshold lines: a neutral grey (drawn dashed and labeled with their monitor)
THRESHOLD_COLOUR = "#808080"
MAX_DISTINCT_PRODUCTS = len(_PRODUCT)
#: CIEDE2000 distances the palette keeps (tests/test_palette_cvd.py); about 10 reads as "clearly another colour"
#: at a glance (common practice, no source)
MIN_OUTCOME_DE00 = 10.0
MIN_TRACE_DE00 = 12.0
#: every two trace lines (the monitors' and the energies') differ at least this much for normal vision; under
#: simulated colour-vision deficiency they are told apart by the legend, the readout and, for added monitors,
#: their dashed line (so many dark colours cannot all stay apart there)
MIN_TRACE_PAIR_DE00 = 10.0
#: monitor lines with a colour of their own; past that the colours repeat
DISTINCT_TRACES = len(_TRACE)


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
    """Colour of an outcome/label: each product its own (rules-file order), fixed labels their own.

    A label that is neither (e.g. a product of older rules) takes the first colour after the products.
    """
    if label in _FIXED:
        return QColor(_FIXED[label])
    products = list(products)
    return product_colour(products.index(label) if label in products else len(products))


def basin_colour(name: str, basin_names: Sequence[str], reactant: str | None = None) -> QColor:
    """Colour of a basin: the reactant's own, each product the colour of its outcome."""
    if name == reactant:
        return QColor(REACTANT_COLOUR)
    return outcome_colour(name, [b for b in basin_names if b != reactant])


def trace_colour(i: int) -> QColor:
    """Colour of the ``i``-th monitor line (cycles after :data:`DISTINCT_TRACES`); never an outcome colour nor
    an energy's."""
    return QColor(_TRACE[i % len(_TRACE)])


def energy_colour(key: str) -> QColor:
    """Colour of an energy line: ``potential``, ``kinetic`` or ``total``; never a monitor's nor an outcome's."""
    return QColor(_ENERGY[key])


def cursor_colour() -> QColor:
    return QColor(CURSOR_COLOUR)


def threshold_colour() -> QColor:
    return QColor(THRESHOLD_COLOUR)
