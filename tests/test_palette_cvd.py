"""Outcome, trace and cursor colours stay apart for normal vision and under simulated colour-vision deficiency.

Simulation: Machado, Oliveira and Fernandes (2009), "A physiologically-based model for simulation of color
vision deficiency", IEEE TVCG 15(6), severity 100 (dichromacy), as implemented by colorspacious
("sRGB1+CVD").  Distance: CIEDE2000 (Sharma, Wu and Dalal 2005) as implemented by colour-science, on CIELAB
(D65) from colorspacious.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

colorspacious = pytest.importorskip("colorspacious")
# importing colour-science switches numpy's print options to its 1.13 legacy mode for the whole
# process (floats then print, and pandas writes CSV floats, with 12 significant digits): put them back
_print_options = np.get_printoptions()
colour = pytest.importorskip("colour")
np.set_printoptions(**_print_options)

from basinmark.core.labels import FIXED_LABELS  # noqa: E402
from basinmark.gui import colours  # noqa: E402

VISIONS = {"normal": None, "deuteranopia": "deuteranomaly", "protanopia": "protanomaly"}


def _lab(hexes: list[str], cvd: str | None) -> np.ndarray:
    rgb = np.array([[int(h[i:i + 2], 16) / 255 for i in (1, 3, 5)] for h in hexes])
    if cvd is not None:
        space = {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}
        rgb = np.clip(colorspacious.cspace_convert(rgb, space, "sRGB1"), 0, 1)
    return colorspacious.cspace_convert(rgb, "sRGB1", "CIELab")


def _de00(a: np.ndarray, b: np.ndarray) -> float:
    return float(colour.delta_E(a, b, method="CIE 2000"))


def _outcomes() -> dict[str, str]:
    products = [f"product{i + 1}" for i in range(colours.CVD_SAFE_PRODUCTS)]
    out = {p: colours.outcome_colour(p, products).name() for p in products}
    out.update({f: colours.outcome_colour(f, products).name() for f in FIXED_LABELS})
    out["reactant"] = colours.basin_colour("start", ["start", *products], "start").name()
    return out


def _traces() -> dict[str, str]:
    """Every trace line's colour: the monitors' (all the distinct ones) and the three energies'."""
    n = len({colours.trace_colour(i).name() for i in range(64)})
    out = {f"trace{i}": colours.trace_colour(i).name() for i in range(n)}
    out.update({f"E_{k}": colours.energy_colour(k).name() for k in ("potential", "kinetic", "total")})
    return out


def test_there_are_enough_monitor_colours():
    """The rules' monitors and a dozen added ones each get a colour of their own."""
    assert colours.DISTINCT_TRACES >= 16
    assert len({colours.trace_colour(i).name() for i in range(colours.DISTINCT_TRACES)}) == colours.DISTINCT_TRACES


def test_every_two_trace_lines_differ():
    """Monitors and energies (normal vision): no two trace lines can be taken for each other."""
    traces = _traces()
    names, lab = list(traces), _lab(list(traces.values()), None)
    close = [(names[i], names[j], round(_de00(lab[i], lab[j]), 1))
             for i, j in itertools.combinations(range(len(names)), 2)
             if _de00(lab[i], lab[j]) < colours.MIN_TRACE_PAIR_DE00]
    assert not close, f"trace colours closer than ΔE00 {colours.MIN_TRACE_PAIR_DE00}: {close}"


def test_the_distance_is_ciede2000():
    """colour-science against the first pair of Sharma, Wu and Dalal's (2005) test data (ΔE00 = 2.0425)."""
    assert _de00(np.array([50.0, 2.6772, -79.7751]), np.array([50.0, 0.0, -82.7485])) == pytest.approx(2.0425,
                                                                                                    abs=1e-4)


def test_the_simulation_moves_red_and_green_together():
    """Sanity: under simulated deuteranopia a pure red and a pure green come far closer than for normal vision."""
    red_green = ["#ff0000", "#00c000"]
    normal = _lab(red_green, None)
    deut = _lab(red_green, "deuteranomaly")
    assert _de00(deut[0], deut[1]) < 0.5 * _de00(normal[0], normal[1])


@pytest.mark.parametrize("vision", VISIONS)
def test_every_pair_of_outcome_colours_stays_apart(vision):
    names, hexes = zip(*_outcomes().items())
    lab = _lab(list(hexes), VISIONS[vision])
    close = [(names[i], names[j], round(_de00(lab[i], lab[j]), 1))
             for i, j in itertools.combinations(range(len(names)), 2)
             if _de00(lab[i], lab[j]) < colours.MIN_OUTCOME_DE00]
    assert not close, f"outcome colours closer than ΔE00 {colours.MIN_OUTCOME_DE00} ({vision}): {close}"


@pytest.mark.parametrize("vision", VISIONS)
def test_no_trace_and_not_the_cursor_looks_like_an_outcome(vision):
    outcomes = _outcomes()
    others = {**_traces(), "cursor": colours.cursor_colour().name()}
    lo = _lab(list(outcomes.values()), VISIONS[vision])
    lt = _lab(list(others.values()), VISIONS[vision])
    close = [(o, t, round(_de00(lo[i], lt[j]), 1))
             for i, o in enumerate(outcomes) for j, t in enumerate(others)
             if _de00(lo[i], lt[j]) < colours.MIN_TRACE_DE00]
    assert not close, f"trace/cursor colours closer than ΔE00 {colours.MIN_TRACE_DE00} to an outcome ({vision}): {close}"


def test_the_cursor_is_not_a_trace_colour():
    lab = _lab([colours.cursor_colour().name(), *_traces().values()], None)
    assert min(_de00(lab[0], lab[j]) for j in range(1, len(lab))) >= colours.MIN_TRACE_DE00
