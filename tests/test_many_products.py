"""Rules with many product basins (a generated seven-product set): classification, shares with
simultaneous intervals, any pair's ratio, the review matrix, and a distinct colour for every product.

The set is our own toy: a centre atom surrounded by seven acceptor sites on a circle.  Backward, every
run drifts away from all sites (the reactant); forward it bonds to one site (that site's product), or
drifts away again (recrossing), or stays at the transition state (unfinished).
"""

from __future__ import annotations

import itertools
import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from basinmark.core import stats
from basinmark.core.summary import build_summary

SITES = [f"site_{c}" for c in "abcdefg"]
#: designed outcomes: a lopsided spread over seven products, plus recrossings and an unfinished run
DESIGN = {"site_a": 7, "site_b": 5, "site_c": 4, "site_d": 3, "site_e": 2, "site_f": 2, "site_g": 1,
          "recrossing": 2, "unfinished": 1}
N_HALF, DT = 21, 2.0


def rules_text() -> str:
    lines = ['name = "sevenfold"', 'reactant = "reactant"', "dwell_fs = 10.0", "", "[monitors]"]
    lines += [f"d_{s[-1]} = [1, {k + 2}]" for k, s in enumerate(SITES)]
    lines += ["", "[basins.reactant]"] + [f"d_{s[-1]} = {{ above = 2.6 }}" for s in SITES]
    for s in SITES:
        lines += ["", f"[basins.{s}]", f"d_{s[-1]} = {{ below = 1.75 }}"]
        lines += [f"d_{o[-1]} = {{ above = 2.3 }}" for o in SITES if o != s]
    return "\n".join(lines) + "\n"


def _half(ends: np.ndarray) -> np.ndarray:
    """Distances (frames, sites): from 2.1 Å at the TS to ``ends``, reached half-way and then kept."""
    ramp = np.minimum(1.0, np.linspace(0.0, 1.0, N_HALF) * 2.0)[:, None]
    return 2.1 + (ends[None, :] - 2.1) * ramp


def _positions(dist: np.ndarray) -> np.ndarray:
    angles = 2 * np.pi * np.arange(len(SITES)) / len(SITES)
    u = np.column_stack([np.cos(angles), np.sin(angles), np.zeros(len(SITES))])
    pos = np.zeros((dist.shape[0], len(SITES) + 1, 3))
    pos[:, 1:, :] = dist[:, :, None] * u[None]
    return pos


def _write(path: Path, pos: np.ndarray) -> None:
    symbols = ["C"] + ["O"] * len(SITES)
    out = []
    for k, frame in enumerate(pos):
        out += [str(len(symbols)), f"time={k * DT:.3f} epot=0.0 ekin=0.5"]
        out += [f"{s} {x:.6f} {y:.6f} {z:.6f}" for s, (x, y, z) in zip(symbols, frame)]
    path.write_text("\n".join(out) + "\n")


def make_set(root: Path) -> tuple[Path, dict[str, str]]:
    """Write the set; returns its folder and each run's designed outcome."""
    root.mkdir(parents=True, exist_ok=True)
    (root / "basins.toml").write_text(rules_text())
    designed = {}
    runs = [name for name, k in DESIGN.items() for _ in range(k)]
    for i, outcome in enumerate(runs):
        run = f"m-{i + 1:03d}"
        designed[run] = outcome
        far = np.full(len(SITES), 3.0)
        fwd = far.copy()
        if outcome in SITES:
            fwd[SITES.index(outcome)] = 1.5
        elif outcome == "unfinished":
            fwd[:] = 2.1
        _write(root / f"{run}.bwd.xyz", _positions(_half(far)))
        _write(root / f"{run}.fwd.xyz", _positions(_half(fwd)))
    return root, designed


@pytest.fixture(scope="module")
def seven(tmp_path_factory):
    return make_set(tmp_path_factory.mktemp("many") / "sevenfold")


def _summary_of(root: Path):
    from basinmark.core.classify import classify_set
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import open_set

    tset = open_set(root, use_cache=False)
    rules = load_rules(root / "basins.toml", n_atoms=tset.n_atoms)
    table = classify_set(tset, rules)
    return tset, rules, table


def test_every_run_is_classified_as_designed(seven):
    root, designed = seven
    _tset, rules, table = _summary_of(root)
    assert rules.products == SITES
    assert dict(zip(table["run"], table["outcome"])) == designed


def test_shares_have_goodman_simultaneous_intervals(seven):
    from statsmodels.stats.proportion import multinomial_proportions_confint

    root, designed = seven
    _tset, rules, table = _summary_of(root)
    s = build_summary(table.rename(columns={"outcome": "final_label"}), rules.products, confidence=0.95)
    counts = [DESIGN[p] for p in SITES]
    sh = s.shares.set_index("product")
    assert list(sh.index) == SITES and sh["count"].tolist() == counts
    # reference library: statsmodels multinomial_proportions_confint(method="goodman"), over the products
    ref = multinomial_proportions_confint(counts, alpha=0.05, method="goodman")
    assert np.allclose(sh[["lo", "hi"]].to_numpy(), ref, atol=1e-9)
    assert sh["share"].to_numpy() == pytest.approx(np.array(counts) / sum(counts))
    text = s.to_text()
    assert "Product shares among the 24 reactive runs" in text
    for p in SITES:
        assert any(line.startswith(p) for line in text.splitlines())
    frame = s.to_frame()
    assert (frame["quantity"] == "share").sum() == 7


def test_any_pair_has_its_ratio(seven):
    root, _designed = seven
    _tset, rules, table = _summary_of(root)
    labels = table.rename(columns={"outcome": "final_label"})
    for a, b in [("site_d", "site_g"), ("site_g", "site_d"), ("site_b", "site_f")]:
        s = build_summary(labels, rules.products, a, b)
        assert (s.k_a, s.k_b) == (DESIGN[a], DESIGN[b])
        assert s.ratio == stats.ratio_interval(DESIGN[a], DESIGN[b])
        assert f"{a} : {b} = " in s.to_text() and f"runs ending in {a} or {b}" in s.to_text()


def test_review_matrix_covers_every_product(seven):
    from basinmark.core.review import compare_labels

    root, designed = seven
    runs = list(designed)
    first = pd.Series([designed[r] for r in runs], index=runs)
    second = first.copy()
    second[runs[0]], second[runs[7]] = "site_b", "site_a"  # two disagreements between the two most common
    result = compare_labels(first, second, order=SITES + ["recrossing", "unfinished"])
    matrix = result.confusion
    assert list(matrix.index) == list(matrix.columns) == SITES + ["recrossing", "unfinished"]
    assert int(np.trace(matrix.to_numpy())) == len(runs) - 2
    assert matrix.loc["site_a", "site_b"] == 1 and matrix.loc["site_b", "site_a"] == 1


# --- colours ----------------------------------------------------------------------------------


def _lab(colours) -> np.ndarray:
    """CIELAB of QColors through Pillow's colour management (reference: littleCMS sRGB → Lab D65)."""
    from PIL import Image, ImageCms

    srgb, lab = ImageCms.createProfile("sRGB"), ImageCms.createProfile("LAB", colorTemp=6500)
    transform = ImageCms.buildTransform(srgb, lab, "RGB", "LAB")
    im = Image.new("RGB", (len(colours), 1))
    im.putdata([(c.red(), c.green(), c.blue()) for c in colours])
    out = np.asarray(ImageCms.applyTransform(im, transform), dtype=float)[0]
    return np.column_stack([out[:, 0] * 100 / 255, out[:, 1] - 128, out[:, 2] - 128])


@pytest.mark.gui
def test_ten_products_get_ten_distinct_colours_apart_from_the_fixed_ones():
    from basinmark.core.labels import FIXED_LABELS
    from basinmark.gui.colours import basin_colour, outcome_colour

    products = [f"p{i}" for i in range(10)]
    colours = [outcome_colour(p, products) for p in products]
    fixed = [outcome_colour(f, products) for f in FIXED_LABELS]
    lab = _lab(colours + fixed)
    worst = min(float(np.linalg.norm(lab[i] - lab[j]))
                for i, j in itertools.combinations(range(len(lab)), 2) if i < len(colours))
    assert worst > 20.0  # CIE 1976 ΔE: > 10 reads as clearly different (common practice, no source)
    # the basin colours (traces, map regions) are the outcome colours
    basins = ["start"] + products
    assert [basin_colour(p, basins, "start").name() for p in products] == [c.name() for c in colours]
    # past the checked table, colours still differ from one another
    many = [f"q{i}" for i in range(20)]
    assert len({outcome_colour(p, many).name() for p in many}) == 20


@pytest.mark.gui
def test_window_shows_seven_products_in_distinct_colours(qtbot, seven, tmp_path):
    from PySide6.QtCore import QSettings, Qt

    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.map_view import install_map_dock
    from basinmark.gui.summary_view import install_summary_dock

    root, designed = seven
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    install_summary_dock(w)
    install_map_dock(w)
    with qtbot.waitSignal(w.set_loaded, timeout=30000):
        w.open_set(root, use_cache=False)
    qtbot.waitUntil(lambda: len(w.state.labels) == len(designed), timeout=20000)
    panel = w.summary_panel
    panel.refresh(force=True)
    s = panel.summary
    assert s is not None and s.show_shares
    # summary: the outcome table and the shares table colour each product its own way
    shown = {panel.shares_table.item(i, 0).text(): panel.shares_table.item(i, 0).data(Qt.ItemDataRole.DecorationRole)
             for i in range(panel.shares_table.rowCount())}
    assert list(shown) == SITES and len({c.name() for c in shown.values()}) == 7
    sims = [panel.shares_table.item(i, 3).text() for i in range(7)]
    for text, (lo, hi) in zip(sims, s.shares[["lo", "hi"]].to_numpy()):
        assert text == f"{lo:.3f}–{hi:.3f}"
    outcome_rows = {panel.table.item(i, 0).text(): panel.table.item(i, 0).data(Qt.ItemDataRole.DecorationRole).name()
                    for i in range(panel.table.rowCount())}
    assert len(set(outcome_rows.values())) == len(outcome_rows) == 9  # 7 products, recrossing, unfinished
    assert all(outcome_rows[p] == shown[p].name() for p in SITES)
    # run table and its outcome band: the colour beside each final label is the product's, as in the summary
    model = w.run_table.model
    from basinmark.gui.run_table import COLUMNS

    final = [key for key, _title in COLUMNS].index("final_label")
    seen = {}
    for r in range(model.rowCount()):
        label = model.data(model.index(r, final))
        seen[label] = model.data(model.index(r, final), Qt.ItemDataRole.DecorationRole).name()
    assert all(seen[p] == shown[p].name() for p in SITES)
    assert model.products == SITES and w.run_table.count_bar.products == SITES  # the outcome band
    # map: paths coloured by final label with the same colours
    w.map_panel.refresh(force=True)
    canvas = w.map_panel.canvas
    qtbot.waitUntil(lambda: canvas.products == SITES, timeout=20000)
    assert set(canvas.curves) >= set(SITES)
    drawn = [canvas.curves[p].opts["pen"].color().name() for p in SITES]
    assert drawn == [shown[p].name() for p in SITES]
    w.close()


@pytest.mark.gui
def test_review_panel_matrix_with_seven_products(qtbot, seven, tmp_path):
    from PySide6.QtCore import QSettings

    from basinmark.core.journal import LabelJournal
    from basinmark.core.sets import journal_path, open_set
    from basinmark.gui.main_window import MainWindow
    from basinmark.gui.review_view import install_review_dock

    root, designed = seven
    work = tmp_path / "sevenfold"
    import shutil
    shutil.copytree(root, work, ignore=shutil.ignore_patterns(".basinmark-cache", "basinmark-labels.jsonl*"))
    hashes = dict(open_set(work, use_cache=False).content_hashes())
    runs = list(designed)
    other_labels = dict(designed)
    other_labels[runs[0]], other_labels[runs[7]] = "site_b", "site_a"
    other = tmp_path / "second-labels.jsonl"
    for path, who, labels in ((journal_path(work), "first", designed), (other, "second", other_labels)):
        with LabelJournal.open(path, labeler=who) as j:
            for run in runs:
                j.record(run, labels[run], content_hash=hashes[run])
    w = MainWindow(QSettings(str(tmp_path / "s.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    with qtbot.waitSignal(w.set_loaded, timeout=30000):
        w.open_set(work, use_cache=False)
    install_review_dock(w)
    panel = w.review_panel
    panel.set_sources(("final",), ("file", str(other)))
    review = panel.compare()
    assert review is not None and review.n == len(runs)
    for p in SITES:
        assert p in review.confusion.index and p in review.confusion.columns
    m = panel.matrix
    assert m.rowCount() >= len(review.confusion) and m.columnCount() >= len(review.confusion.columns)
    for p in SITES:
        i, k = review.confusion.index.get_loc(p), list(review.confusion.columns).index(p)
        assert m.item(i, k).text() == str(int(review.confusion.loc[p, p]))
    assert int(np.trace(review.confusion.to_numpy())) == len(runs) - 2
    w.close()
