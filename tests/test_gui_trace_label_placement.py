"""The traces' label layout finds the places that trying every candidate through Qt finds, with far fewer trips
through Qt.

The layout (``TracesView._place``) predicts each candidate's rectangle by arithmetic (a label moves linearly with its
fraction along its line) and measures only what it keeps or cannot decide; here it is compared, label by label
(text, side, fraction, shown or hidden, rectangle), with the first way of placing them, kept below as
``_every_candidate``, over randomly drawn runs, rules with many close thresholds, window sizes and zooms."""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtWidgets import QApplication

from basinmark.core.classify import classify_run
from basinmark.core.rules import parse_rules
from basinmark.gui import traces as traces_module
from basinmark.gui.traces import TracesView

from gui_fixtures import TOY_ENDS, TOY_RULES, toy_trajectory

pytestmark = pytest.mark.gui


def _every_candidate(label, texts, anchors, fractions, box, placed) -> bool:
    """The placement as first written: each (text, anchor, fraction) in turn, moved and measured through Qt."""
    label.setVisible(True)
    label.hidden_by_layout = False
    for text in texts:
        if label.format != text:
            label.setFormat(text)
        for anchor in anchors:
            label.anchors = [anchor, anchor]
            for f in fractions:
                label.setPosition(f)
                r = label.sceneBoundingRect()
                if box.contains(r) and not any(r.intersects(q) for q in placed):
                    placed.append(r.adjusted(-2, -1, 2, 1))
                    return True
    label.setFormat(texts[0])
    traces_module._hide(label)
    return False


def crowded_rules(rng: np.random.Generator) -> str:
    """Rules of our own for the three-atom toy with many basins whose thresholds lie close together (on both
    distances and on an angle), so that labels compete for room and fall back to shorter texts or none."""
    lines = ['name = "crowd"', 'reactant = "reactant"', "dwell_fs = 4.0", "allow_overlap = true", "", "[monitors]",
             "d_left = [1, 2]", "d_right = [1, 3]", "bend = [2, 1, 3]", "",
             "[basins.reactant]", "d_left = { above = 2.6 }", "d_right = { above = 2.6 }"]
    for k in range(int(rng.integers(3, 9))):
        lines.append(f"[basins.b{k}]")
        for mon, lo, hi in (("d_left", 1.4, 3.1), ("d_right", 1.4, 3.1), ("bend", 100.0, 140.0)):
            if rng.random() < 0.7:
                side = "above" if rng.random() < 0.5 else "below"
                lines.append(f"{mon} = {{ {side} = {rng.uniform(lo, hi):.3f} }}")
        if lines[-1].startswith("[basins"):
            lines.append(f"d_left = {{ below = {rng.uniform(1.4, 2.0):.3f} }}")
    return "\n".join(lines) + "\n"


def _state(view: TracesView) -> list:
    out = []
    for plot in (view.p_dist, view.p_angle):
        for lab in view.threshold_labels(plot) + view.mark_labels(plot):
            r = lab.sceneBoundingRect()
            out.append((lab.format, [tuple(a) for a in lab.anchors], float(lab.orthoPos), lab.isVisible(),
                        (r.x(), r.y(), r.width(), r.height())))
    return out


class _Counter:
    def __init__(self) -> None:
        self.n = 0

    def wrap(self, real):
        def counted(label, p):
            self.n += 1
            return real(label, p)
        return counted


def _laid_out(view: TracesView, monkeypatch, place) -> tuple[list, int]:
    counter = _Counter()
    with monkeypatch.context() as m:
        m.setattr(TracesView, "_place", staticmethod(place))
        m.setattr(traces_module.pg.InfLineLabel, "setPosition", counter.wrap(traces_module.pg.InfLineLabel.setPosition))
        view.layout_labels()
    return _state(view), counter.n


def test_placements_match_trying_every_candidate(qtbot, monkeypatch):
    view = TracesView()
    qtbot.addWidget(view)
    view.show()
    rng = np.random.default_rng(20261203)
    fast_total = slow_total = 0
    seen = {"hidden": 0, "short": 0, "other side": 0, "slid": 0, "labels": 0}
    for case in range(40):
        text = TOY_RULES if case % 4 == 0 else crowded_rules(rng)
        rules = parse_rules(text, n_atoms=3)
        traj = toy_trajectory(f"toy-{case:03d}", str(rng.choice(sorted(TOY_ENDS))))
        if case % 3 == 1:   # small: labels fall back to shorter texts
            view.resize(int(rng.integers(380, 560)), int(rng.integers(330, 450)))
        else:
            view.resize(int(rng.integers(420, 1400)), int(rng.integers(300, 950)))
        view.set_run(traj, classify_run(traj, rules), rules)
        QApplication.processEvents()
        if rng.random() < 0.6:   # zoomed and panned: lines leave the plot or crowd at its edges
            lo = rng.uniform(1.0, 2.6)
            view.p_dist.setYRange(lo, lo + rng.uniform(0.2, 2.0), padding=0)
            t0 = rng.uniform(-80, 40)
            view.p_dist.setXRange(t0, t0 + rng.uniform(10, 120), padding=0)
            QApplication.processEvents()
        slow, n_slow = _laid_out(view, monkeypatch, _every_candidate)
        fast, n_fast = _laid_out(view, monkeypatch, TracesView._place)
        assert fast == slow, f"case {case}: the placements differ"
        assert _laid_out(view, monkeypatch, _every_candidate)[0] == slow  # the same geometry both times
        fast_total += n_fast
        slow_total += n_slow
        for fmt, anchors, pos, shown, _r in fast:
            seen["labels"] += 1
            seen["hidden"] += not shown
            seen["short"] += shown and "(" not in fmt and "{value" in fmt
            seen["other side"] += shown and anchors[0] in ((0, 0),) and "{value" in fmt
            seen["slid"] += shown and not np.isclose(pos, 0.01) and "{value" in fmt
    # the cases exercised every way a label can end up
    assert all(v >= 3 for v in seen.values()), seen
    # far fewer trips through Qt (each a move and a measurement)
    assert fast_total * 4 < slow_total, (fast_total, slow_total)


def test_a_label_costs_a_few_measurements_however_crowded(qtbot, monkeypatch):
    """Per label at most two moves for each text and side tried, plus the one kept (or the hidden state)."""
    view = TracesView()
    qtbot.addWidget(view)
    view.show()
    view.resize(520, 380)
    rng = np.random.default_rng(7)
    rules = parse_rules(crowded_rules(rng), n_atoms=3)
    traj = toy_trajectory("toy-crowd", "left")
    view.set_run(traj, classify_run(traj, rules), rules)
    QApplication.processEvents()
    _state_after, n = _laid_out(view, monkeypatch, TracesView._place)
    labels = [lab for p in (view.p_dist, view.p_angle) if p.isVisible()
              for lab in view.threshold_labels(p) + view.mark_labels(p)]
    bound = sum(2 * 2 * len(view._label_texts.get(id(lab), [lab.format])) + 1 for lab in labels)
    assert n <= bound, (n, bound)
