"""Every trace line the traces view draws has a colour of its own: added monitors (a dozen of them) never take an
energy's colour, another monitor's colour or an outcome's colour.

Distance: CIEDE2000 (Sharma, Wu and Dalal 2005) as implemented by colour-science, on CIELAB (D65) from
colorspacious; the palette's own distinctness under simulated colour-vision deficiency is in
tests/test_palette_cvd.py.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

colorspacious = pytest.importorskip("colorspacious")
_print_options = np.get_printoptions()
colour = pytest.importorskip("colour")   # (changes numpy's print options: put them back)
np.set_printoptions(**_print_options)

from basinmark.core.labels import FIXED_LABELS  # noqa: E402
from basinmark.gui import colours  # noqa: E402
from basinmark.gui.traces import TracesView  # noqa: E402

from gui_fixtures import stretched_ethylene  # noqa: E402

pytestmark = pytest.mark.gui

#: twelve measures a chemist might add on ethylene's six atoms: distances, angles and dihedrals (1-based)
ADDED = [(1, 2), (1, 3), (2, 5), (3, 4), (1, 5), (2, 6), (3, 1, 4), (5, 2, 6), (1, 2, 5), (3, 1, 2, 5),
         (4, 1, 2, 6), (2, 1, 3)]


def _lab(qcolours) -> np.ndarray:
    rgb = np.array([[c.redF(), c.greenF(), c.blueF()] for c in qcolours])
    return colorspacious.cspace_convert(rgb, "sRGB1", "CIELab")


def _de00(a, b) -> float:
    return float(colour.delta_E(a, b, method="CIE 2000"))


@pytest.mark.parametrize("n_added", [1, 4, len(ADDED)])
def test_added_traces_differ_from_every_other_trace(qtbot, n_added):
    view = TracesView()
    qtbot.addWidget(view)
    traj = stretched_ethylene()
    view.set_run(traj, user_monitors=ADDED[:n_added])
    pens = {name: curve.opts["pen"].color() for name, curve in view.curves.items()}
    assert {"E_pot", "E_kin", "E_total"} <= set(pens)
    assert len(pens) == n_added + 3, sorted(pens)
    names = list(pens)
    lab = _lab(pens.values())
    close = [(names[i], names[j], round(_de00(lab[i], lab[j]), 1))
             for i, j in itertools.combinations(range(len(names)), 2)
             if _de00(lab[i], lab[j]) < colours.MIN_TRACE_PAIR_DE00]
    assert not close, f"trace lines too alike (ΔE00 < {colours.MIN_TRACE_PAIR_DE00}): {close}"
    # and none is an outcome's colour (products, fixed labels, the reactant)
    products = [f"p{i}" for i in range(colours.CVD_SAFE_PRODUCTS)]
    outcomes = [colours.outcome_colour(p, products) for p in [*products, *FIXED_LABELS]]
    outcomes.append(colours.basin_colour("start", ["start", *products], "start"))
    lo = _lab(outcomes)
    near = [(names[i], round(_de00(lab[i], lo[j]), 1)) for i in range(len(names)) for j in range(len(lo))
            if _de00(lab[i], lo[j]) < colours.MIN_TRACE_DE00]
    assert not near, f"trace lines that look like an outcome: {near}"
    view.close()
