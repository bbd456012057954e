"""The summary view shows the core's numbers on the window's labels, and follows label changes."""

from __future__ import annotations

import math

import numpy as np
import pytest
from PySide6.QtCore import QSettings

from basinmark.core import stats
from basinmark.core.summary import build_summary
from basinmark.core.timing import commit_time_histogram, concerted_fraction
from basinmark.gui.main_window import MainWindow
from basinmark.gui.summary_view import install_summary_dock

from gui_fixtures import TOY_RULES, make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished", "left", "right", "left", "left", "right", "left"]
GAP_RULES = TOY_RULES + '\n[time_gap]\nbonds = ["d_left", "d_right"]\nform_below = 1.8\nconcerted_fs = 60.0\n'


@pytest.fixture
def win(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES, drift_runs=[4])
    (root / "basins.toml").write_text(GAP_RULES)
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    dock = install_summary_dock(w)
    w.show()
    qtbot.waitExposed(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    dock.show()
    yield w
    w.close()


def _core(win, **kw):
    labels = win.state.labels.copy()
    for col in ("final_label", "hand_label"):  # the window's table writes "" where the core expects None
        labels[col] = [v if v else None for v in labels[col]]
    return build_summary(labels, win.state.rules.products, **kw)


def _shown_table(panel) -> dict[str, tuple[int, str, str]]:
    t = panel.table
    return {t.item(i, 0).text(): (int(t.item(i, 1).text()), t.item(i, 2).text(), t.item(i, 3).text())
            for i in range(t.rowCount())}


def _expected_table(summary) -> dict[str, tuple[int, str, str]]:
    return {r.label: (int(r.count), f"{r.fraction:.3f}", f"{r.lo:.3f}–{r.hi:.3f}")
            for r in summary.table.itertuples(index=False)}


def test_numbers_equal_the_core_summary(win):
    panel = win.summary_panel
    core = _core(win)
    assert _shown_table(panel) == _expected_table(core)
    for line in core.lines():
        assert line in panel.lines.text()
    for w in core.warnings:  # thin numbers are said plainly, in the warning box
        assert w in panel.warnings.text()
    assert panel.warnings.isVisible() and "rough guide" in panel.warnings.text()
    # run toy-005 drifts ~5 kcal/mol and nobody has looked at it: said so, not "kept by hand"
    assert "failed the energy check" in panel.warnings.text()
    assert "none of them looked at by hand" in panel.warnings.text()
    # the bars and their error bars are the core's fractions and intervals
    np.testing.assert_allclose(panel.bars.opts["height"], core.table["fraction"])
    np.testing.assert_allclose(panel.error_bars.opts["top"], core.table["hi"] - core.table["fraction"])
    np.testing.assert_allclose(panel.error_bars.opts["bottom"], core.table["fraction"] - core.table["lo"])
    # the convergence curve is the core's running ratio
    x, y = panel.conv_curve.getData()
    ratio = core.convergence["ratio"].to_numpy(float)
    np.testing.assert_allclose(y[np.isfinite(ratio)], ratio[np.isfinite(ratio)])


def test_hand_label_changes_the_summary(win, qtbot):
    panel = win.summary_panel
    before = panel.summary.ratio
    st = win.state
    with qtbot.waitSignal(panel.updated, timeout=2000):
        st.journal.record("toy-003", "right", content_hash=st.tset["toy-003"].content_hash, reason="reactive late")
        st.refresh_labels()
    assert _shown_table(panel)["right"][0] == 4
    assert "recrossing" not in _shown_table(panel)
    core = _core(win)
    assert panel.summary.ratio == core.ratio != before
    assert _shown_table(panel) == _expected_table(core)


def test_tst_ratio_and_effective_ddg(win):
    panel = win.summary_panel
    panel.set_tst(1.364, "kcal/mol", 298.15)
    s = panel.summary
    # common practice, no source (REFERENCES.md): 1.364 kcal/mol at 298.15 K gives a TST ratio of about 10.0
    assert s.tst_ratio == pytest.approx(9.996, abs=0.01)
    assert s.tst_ratio == stats.tst_ratio(1.364, "kcal/mol", 298.15)
    assert "predicts 10.0" in panel.lines.text()
    core = _core(win, a=s.a, b=s.b, ddg=1.364, unit="kcal/mol", temperature=298.15)
    assert s.effective_ddg == core.effective_ddg
    # the ΔΔG‡ names its pair: asking for the ratio the other way round gives the reciprocal prediction
    first, second = s.a, s.b
    panel.set_pair(second, first)
    assert (panel.summary.a, panel.summary.b) == (second, first)
    assert panel.summary.tst_ratio == pytest.approx(1 / 9.996, abs=1e-4)
    panel.set_pair(None, None)
    # switching the unit keeps the same energy: 1 cal = 4.184 J exactly (thermochemical calorie)
    panel.unit.setCurrentText("kJ/mol")
    assert panel.ddg.value() == pytest.approx(1.364 * 4.184, abs=0.006)
    assert panel.summary.tst_ratio == pytest.approx(9.996, abs=0.02)
    assert "kJ/mol" in panel.lines.text()


def test_runs_needed_follows_the_half_width(win):
    panel = win.summary_panel
    panel.half_width.setValue(0.1)
    core = _core(win, half_width=0.1)
    assert panel.summary.runs_needed == core.runs_needed
    assert f"about {core.runs_needed} counted runs" in panel.lines.text()


def test_histograms_come_from_core_timing(win):
    panel = win.summary_panel
    lab = win.state.labels
    # the product side's final entry, whichever end holds the product
    table = lab.rename(columns={"final_label": "outcome"})[["outcome", "product_final_entry_fs"]]
    expected = commit_time_histogram(table, bins=20)
    assert expected.attrs["definition"] == "product side, final entry"
    assert "product side, final entry" in panel.p_commit.titleLabel.text.replace("<br>", " ")  # (titles wrap)
    assert panel.commit_hist.reset_index(drop=True).equals(expected.reset_index(drop=True))
    cls = win.state.classification
    products = cls[cls["outcome"].isin(win.state.rules.products)]
    want = concerted_fraction(products["time_gap_fs"], 60.0)
    got = panel.gap_stats
    assert got["n_formed"] == want["n_formed"] and got["concerted"] == want["concerted"]
    if want["n_formed"] == 0:  # the toy products form only one of the two bonds
        assert "no product run formed both bonds" in panel.p_gap.titleLabel.text.replace("<br>", " ")


def test_no_two_products_says_so(win, qtbot):
    st = win.state
    for rid in ("toy-002", "toy-006", "toy-009"):
        st.journal.record(rid, "excluded", content_hash=st.tset[rid].content_hash, reason="bad start")
    st.refresh_labels()
    s = win.summary_panel.summary
    assert s.k_b == 0 and math.isinf(s.ratio[2])
    assert any("No run gave right" in w for w in s.warnings)
    assert "No run gave right" in win.summary_panel.warnings.text()


def test_view_menu_has_the_summary_toggle(win):
    view = next(a.menu() for a in win.menu_bar.actions() if a.menu() and a.text().replace("&", "") == "View")
    assert any(a.text() == "S&ummary" for a in view.actions())


def test_exports_of_the_summary_and_label_table(win, tmp_path):
    import xml.etree.ElementTree as ET

    import pandas as pd
    from PIL import Image

    from basinmark.gui.exports import export_figure, export_label_table, export_summary

    panel = win.summary_panel
    panel.set_tst(0.8)
    md = export_summary(win.state, tmp_path / "s.md", panel).read_text(encoding="utf-8")
    assert md == panel.summary.to_markdown() and "TST with ΔΔG‡ = 0.80" in md
    back = pd.read_csv(export_summary(win.state, tmp_path / "s.csv", panel))
    assert back["quantity"].tolist() == panel.summary.to_frame()["quantity"].tolist()
    labels = pd.read_csv(export_label_table(win.state, tmp_path / "labels.csv"), keep_default_na=False)
    assert labels["run"].tolist() == win.state.labels["run"].tolist()
    assert labels["final_label"].tolist() == win.state.labels["final_label"].tolist()
    png = export_figure(panel.plots, tmp_path / "plots.png", size=(800, 600))
    with Image.open(png) as im:  # reference reader: Pillow
        assert im.size == (800, 600)
    svg = export_figure(panel.plots, tmp_path / "plots.svg")
    assert ET.parse(svg).getroot().tag == "{http://www.w3.org/2000/svg}svg"


def test_choosing_the_pair(win):
    panel = win.summary_panel
    assert [panel.a_combo.itemText(i) for i in range(panel.a_combo.count())] == ["automatic", "left", "right"]
    panel.set_pair("right", "left")
    core = _core(win, a="right", b="left")
    assert (panel.summary.a, panel.summary.b) == ("right", "left")
    assert panel.summary.ratio == core.ratio
    panel.set_pair("left", "left")  # the core refuses; the view says why instead of showing numbers
    assert panel.summary is None and "itself" in panel.lines.text()
    panel.set_pair(None, None)
    assert panel.summary.a == "left"


def test_dragged_threshold_reclassifies_and_updates(win, qtbot):
    from basinmark.gui.map_view import install_map_dock

    dock = install_map_dock(win)
    dock.show()
    dock.raise_()
    before = dict(zip(win.summary_panel.summary.table["label"], win.summary_panel.summary.table["count"]))
    # a threshold no product run reaches: every left/right run becomes unfinished
    with qtbot.waitSignal(win.rules_applied, timeout=20000):
        assert win.move_threshold([("left", "d_left", "below"), ("right", "d_right", "below")], 1.2)
    after = dict(zip(win.summary_panel.summary.table["label"], win.summary_panel.summary.table["count"]))
    assert before.get("left", 0) > 0 and after.get("left", 0) == 0
    assert after["unfinished"] == before["unfinished"] + before["left"] + before["right"]
    regions = {r.toolTip().split(" ")[1]: r.rect() for r in win.map_panel.canvas.region_items}
    assert regions["left"].right() == pytest.approx(1.2)  # the shaded basin follows the rules


def test_hidden_summary_waits_and_catches_up(win, tmp_path):
    from basinmark.gui.exports import export_summary

    panel = win.summary_panel
    win.docks["summary"].hide()
    st = win.state
    st.journal.record("toy-004", "left", content_hash=st.tset["toy-004"].content_hash, reason="late ring")
    st.refresh_labels()
    assert panel.stale  # nothing computed while nobody looks
    md = export_summary(st, tmp_path / "s.md", panel).read_text(encoding="utf-8")
    assert "| left | 6 |" in md and not panel.stale  # an export brings it up to date first
    win.docks["summary"].show()
    assert _shown_table(panel)["left"][0] == 6


def test_narrow_summary_stacks_its_plots_and_the_wheel_scrolls_past_them(win, qtbot):
    """In a narrow dock the plots stand in one column (the view scrolls down, never sideways); a plain wheel over
    a plot scrolls the view instead of zooming the plot, Ctrl+wheel still zooms."""
    from PySide6.QtCore import QPoint, QPointF, Qt
    from PySide6.QtGui import QWheelEvent
    from PySide6.QtWidgets import QApplication

    dock = win.docks["summary"]
    panel = win.summary_panel
    dock.raise_()
    win.resizeDocks([dock], [380], Qt.Orientation.Horizontal)
    for _ in range(3):
        QApplication.processEvents()
        qtbot.wait(20)
    area = dock.widget()
    assert panel.narrow and panel.width() < panel.NARROW_PLOTS_PX
    cols = {c for p in panel.all_plots for _r, c in panel.plots.ci.items[p]}
    assert cols == {0}, "the plots should stand in one column"
    assert not area.horizontalScrollBar().isVisible()
    bar = area.verticalScrollBar()
    assert bar.maximum() > 0, "the stacked plots should make the view scroll down"
    bar.setValue(0)
    before = panel.p_out.viewRange()
    vp = panel.plots.viewport()
    at = QPointF(vp.width() / 2, 40)

    def wheel(mods):
        ev = QWheelEvent(at, QPointF(vp.mapToGlobal(QPoint(int(at.x()), int(at.y())))), QPoint(0, 0), QPoint(0, -120),
                         Qt.MouseButton.NoButton, mods, Qt.ScrollPhase.NoScrollPhase, False)
        QApplication.sendEvent(vp, ev)

    wheel(Qt.KeyboardModifier.NoModifier)
    assert bar.value() > 0, "a plain wheel over the plots did not scroll the view"
    assert panel.p_out.viewRange() == before, "a plain wheel zoomed the plot"
    # Ctrl+wheel over the middle of the first plot zooms it
    centre = panel.p_out.vb.sceneBoundingRect().center()
    at = QPointF(panel.plots.mapFromScene(centre))
    wheel(Qt.KeyboardModifier.ControlModifier)
    assert panel.p_out.viewRange() != before, "Ctrl+wheel should zoom the plot"


def test_a_long_convergence_is_drawn_thinned_with_its_start_and_end(win):
    """At 10,000 runs the convergence curve and its band were drawn through every run (the band's fill alone 37 ms
    of the summary's showing turn).  Drawn now through at most DRAW_POINTS points: every run of the noisy start,
    then evenly spaced runs, and always the last; every point drawn is the core's own value at that run."""
    import pandas as pd

    from basinmark.gui.summary_view import DRAW_POINTS

    panel = win.summary_panel
    n = 6000
    rng = np.random.default_rng(2)
    labels = pd.DataFrame({"run": [f"r{i:05d}" for i in range(n)],
                           "final_label": rng.choice(["left", "right", "recrossing"], n, p=[0.5, 0.3, 0.2])})
    core = build_summary(labels, ["left", "right"])
    panel._draw_convergence(core)
    x, y = panel.conv_curve.getData()
    assert len(x) <= DRAW_POINTS
    conv = core.convergence
    assert x[-1] == conv["n"].iloc[-1]
    start = conv["n"].to_numpy(float)[:100]
    np.testing.assert_array_equal(x[:100], start)
    at = {float(k): v for k, v in zip(conv["n"].to_numpy(float), conv["ratio"].to_numpy(float))}
    want = np.array([at[float(k)] for k in x])
    np.testing.assert_allclose(y[np.isfinite(want)], want[np.isfinite(want)])
