"""The trace view marks commits by the basin they lead into: the product commit at whichever end holds the
product, the reactant commit, and the product's first arrival when the run came back."""

from __future__ import annotations

import math

import pytest

from basinmark.core.classify import classify_run
from basinmark.core.rules import parse_rules
from basinmark.gui.traces import TracesView

from rules_examples import SCHEMA_EXAMPLE
from test_classify import A, N, R, make_run

pytestmark = pytest.mark.gui
INF = -math.inf


def _marks(qtbot, pieces) -> dict[str, float]:
    rules = parse_rules(SCHEMA_EXAMPLE)
    traj = make_run("m", pieces)
    v = TracesView()
    qtbot.addWidget(v)
    v.set_run(traj, classify_run(traj, rules), rules, [])
    return {k: line.value() for k, line in v.marks.items()}


def test_product_at_the_backward_end_is_marked_there(qtbot):
    marks = _marks(qtbot, [(INF, A), (-80, N), (30, R)])
    assert marks["commit"] == pytest.approx(-81.0)  # the product commit, at negative time
    assert marks["reactant_commit"] == pytest.approx(30.0)
    assert "forward_commit" not in marks and "backward_commit" not in marks


def test_first_arrival_is_marked_when_the_run_came_back(qtbot):
    marks = _marks(qtbot, [(INF, R), (-50, N), (40, A), (70, N), (100, A)])
    assert marks["commit"] == pytest.approx(100.0) and marks["product_first_arrival"] == pytest.approx(40.0)


def test_a_recrossing_keeps_a_mark_per_end(qtbot):
    marks = _marks(qtbot, [(INF, R), (-50, N), (30, R)])
    assert "commit" not in marks
    assert marks["forward_commit"] == pytest.approx(30.0) and marks["backward_commit"] == pytest.approx(-51.0)
