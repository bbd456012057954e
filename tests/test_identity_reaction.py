"""An identity reaction (reactant and product the same species, atom labels swapped): one product basin.

Hand-built runs of a three-atom toy of our own: atom 2 hops between atoms 1 and 3.  "start" has 1–2
bonded, "swapped" has 3–2 bonded; at the transition state both are 1.6 Å.  Each half ends on one side
or stays at the transition state; the outcomes are known by construction and counted by hand below.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from basinmark.cli import main
from basinmark.core.summary import KAPPA_DEFINITION, build_summary

RULES = """\
name = "hop"
reactant = "start"
dwell_fs = 6.0

[monitors]
d12 = [1, 2]
d32 = [3, 2]

[basins.start]
d12 = { below = 1.25 }
d32 = { above = 2.0 }
[basins.swapped]
d32 = { below = 1.25 }
d12 = { above = 2.0 }
"""

SIDE = {"start": (1.1, 2.4), "swapped": (2.4, 1.1), "ts": (1.6, 1.6)}
#: (backward end, forward end) of each hand-built run
RUNS = ([("start", "swapped")] * 5      # reactive, forward direction
        + [("swapped", "start")] * 3    # reactive, the other direction
        + [("start", "start")] * 2      # recrossing back to the reactant
        + [("swapped", "swapped")] * 2  # recrossing on the product side
        + [("start", "ts")] * 1)        # unfinished: the forward half never commits
N_HALF, DT = 16, 2.0


def _half(end: str) -> np.ndarray:
    d12, d32 = SIDE[end]
    ramp = np.minimum(1.0, np.linspace(0.0, 1.0, N_HALF) * 2.0)
    a, b = 1.6 + (d12 - 1.6) * ramp, 1.6 + (d32 - 1.6) * ramp
    # atoms on a line: 1 at the origin, 2 at d12, 3 at d12 + d32
    pos = np.zeros((N_HALF, 3, 3))
    pos[:, 1, 0] = a
    pos[:, 2, 0] = a + b
    return pos


def _write(path: Path, pos: np.ndarray) -> None:
    out = []
    for k, frame in enumerate(pos):
        out += ["3", f"time={k * DT:.3f} epot=0.0 ekin=0.4"]
        out += [f"{s} {x:.6f} {y:.6f} {z:.6f}" for s, (x, y, z) in zip(("N", "H", "N"), frame)]
    path.write_text("\n".join(out) + "\n")


@pytest.fixture(scope="module")
def hop(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("identity") / "hop"
    root.mkdir()
    (root / "basins.toml").write_text(RULES)
    for i, (bwd, fwd) in enumerate(RUNS):
        _write(root / f"h-{i + 1:02d}.bwd.xyz", _half(bwd))
        _write(root / f"h-{i + 1:02d}.fwd.xyz", _half(fwd))
    return root


# counts by hand from RUNS: reactive = 5 + 3 (both directions), recrossing = 2 + 2 (both kinds), unfinished = 1
REACTIVE, RECROSSING, COUNTED = 8, 4, 13


def test_runs_classify_as_built(hop):
    from basinmark.core.classify import classify_set
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import open_set

    tset = open_set(hop, use_cache=False)
    table = classify_set(tset, load_rules(hop / "basins.toml", n_atoms=3))
    expected = ["swapped" if "swapped" in ends and "start" in ends else
                "recrossing" if ends[0] == ends[1] else "unfinished" for ends in RUNS]
    assert list(table.sort_values("run")["outcome"]) == expected


def test_summary_reports_reactive_fraction_and_transmission_coefficient(hop, capsys):
    from statsmodels.stats.proportion import proportion_confint

    assert main(["summary", str(hop), "-q", "--no-cache", "--format", "json"]) == 0
    data = json.loads(capsys.readouterr().out)
    r = data["reactive"]
    assert (r["reactive_fraction"]["k"], r["reactive_fraction"]["n"]) == (REACTIVE, COUNTED)
    assert (r["recrossing_fraction"]["k"], r["recrossing_fraction"]["n"]) == (RECROSSING, COUNTED)
    assert (r["transmission_coefficient"]["k"], r["transmission_coefficient"]["n"]) == (REACTIVE, REACTIVE + RECROSSING)
    assert r["reactive_fraction"]["value"] == pytest.approx(8 / 13)
    assert r["transmission_coefficient"]["value"] == pytest.approx(8 / 12)
    # reference library: statsmodels proportion_confint(method="wilson")
    for key, (k, n) in {"reactive_fraction": (8, 13), "recrossing_fraction": (4, 13),
                        "transmission_coefficient": (8, 12)}.items():
        lo, hi = proportion_confint(k, n, alpha=0.05, method="wilson")
        assert (r[key]["lo"], r[key]["hi"]) == pytest.approx((lo, hi), abs=1e-9)
    assert r["definition"] == KAPPA_DEFINITION and "common practice" in KAPPA_DEFINITION
    assert data["ratio"] is None


def test_text_speaks_of_what_was_computed(hop, capsys):
    assert main(["summary", str(hop), "-q"]) == 0
    out = capsys.readouterr().out
    assert "Reactive fraction = 0.615" in out and "8 of 13 counted runs joined the reactant to swapped" in out
    assert "Recrossing fraction = 0.308" in out
    assert "Transmission coefficient = 0.667" in out and "from 8 reactive and 4 recrossing runs" in out
    assert "ratio" not in out.lower()  # no product ratio wording anywhere, warnings included
    assert "Only 8 runs reached a product; with fewer than 30 the reactive fraction and transmission " \
           "coefficient are rough guides only" in out


def test_one_product_warnings_have_no_ratio_wording():
    labels = pd.DataFrame({"run": [f"r{i}" for i in range(12)],
                           "final_label": ["swapped"] * 3 + ["recrossing"] * 2 + ["unfinished"] * 5
                           + ["ambiguous"] * 2})
    s = build_summary(labels, ["swapped"])
    text = " ".join(s.warnings)
    assert "ratio" not in text.lower() and "reactive fraction" in text
    assert any("unfinished" in w and "reactive fraction and transmission coefficient are biased" in w
               for w in s.warnings)
    assert any("ambiguous" in w and "left out of the transmission coefficient" in w for w in s.warnings)
    # the running transmission coefficient ends at the overall one: 3 reactive, 2 recrossing
    assert s.convergence.iloc[-1]["fraction_a"] == pytest.approx(3 / 5)
    none = build_summary(labels.assign(final_label=["recrossing"] * 12), ["swapped"])
    assert any("No run reached the product" in w for w in none.warnings)
    assert none.reactive["transmission_coefficient"]["value"] == 0.0


@pytest.mark.gui
def test_window_summary_shows_the_transmission_coefficient(qtbot, hop, tmp_path):
    from PySide6.QtCore import QSettings

    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.summary_view import install_summary_dock

    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    install_summary_dock(w)
    with qtbot.waitSignal(w.set_loaded, timeout=30000):
        w.open_set(hop, use_cache=False)
    qtbot.waitUntil(lambda: len(w.state.labels) == len(RUNS), timeout=20000)
    panel = w.summary_panel
    panel.refresh(force=True)
    text = panel.lines.text()
    assert "Transmission coefficient = 0.667" in text and "Reactive fraction = 0.615" in text
    assert "ratio" not in text.lower() and "ratio" not in panel.warnings.text().lower()
    # the convergence plot follows the transmission coefficient run by run, ending at 8 / 12
    assert "transmission coefficient" in panel.p_conv.titleLabel.text.replace("<br>", " ")  # (titles wrap)
    x, y = panel.conv_curve.getData()
    assert x[-1] == len(RUNS) and y[-1] == pytest.approx(8 / 12)
    w.close()
