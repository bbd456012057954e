"""The map of all runs: one path per run in its label's colour, picking, current run and frame, labels live."""

from __future__ import annotations


import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from PySide6.QtCore import QPoint, QSettings, Qt
from PySide6.QtWidgets import QApplication

from basinmark.core.geometry import distance
from basinmark.gui.colours import outcome_colour
from basinmark.gui.main_window import MainWindow
from basinmark.gui.map_view import (MapAxis, MapData, basin_regions, decimated_indices, grouped_paths,
                                    install_map_dock, map_axes, nearest_on_paths)

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished", "left", "left"]  # toy-002 is the only "right"


@pytest.fixture
def win(qtbot, tmp_path):
    root = make_toy_set(tmp_path / "toyset", OUTCOMES)
    w = MainWindow(QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat))
    qtbot.addWidget(w)
    dock = install_map_dock(w)
    w.show()
    qtbot.waitExposed(w)
    with qtbot.waitSignal(w.set_loaded, timeout=20000):
        w.open_set(root, use_cache=False)
    dock.show()
    dock.raise_()
    qtbot.wait(20)
    yield w
    w.close()


def _curve_points(curve) -> int:
    x, _y = curve.getData()
    return int(np.isfinite(x).sum())


def test_one_path_per_run_in_label_colours(win):
    canvas = win.map_panel.canvas
    products = win.state.rules.products
    labels = dict(zip(win.state.labels["run"], win.state.labels["final_label"]))
    expected = {lab: sum(1 for v in labels.values() if v == lab) for lab in set(labels.values())}
    assert canvas.counts == expected
    assert sum(canvas.counts.values()) == len(OUTCOMES)
    for label, curve in canvas.curves.items():
        x, _ = curve.getData()
        # runs are separated by exactly one NaN each: number of NaN-separated pieces = runs of that label
        pieces = np.count_nonzero(np.isfinite(x[:-1]) & ~np.isfinite(x[1:])) + int(np.isfinite(x[-1]))
        assert pieces == expected[label]
        colour = curve.opts["pen"].color()
        want = outcome_colour(label, products)
        assert (colour.red(), colour.green(), colour.blue()) == (want.red(), want.green(), want.blue())
    # the legend names each label with its count
    texts = [lbl.text for _sample, lbl in canvas.legend.items]
    assert "left (3)" in texts and "right (1)" in texts


def test_map_values_are_the_core_monitors(win):
    data = win.map_panel.canvas.data
    assert (data.x_axis.key, data.y_axis.key) == ("d_left", "d_right")  # the first two monitors of the rules
    traj = win.state.tset["toy-002"]
    x, y = data.run_xy("toy-002")
    # reference: core.geometry.distance, itself checked against ase in test_geometry
    np.testing.assert_allclose(x, distance(traj.positions, 0, 1))
    np.testing.assert_allclose(y, distance(traj.positions, 0, 2))


def _click_data_point(qtbot, canvas, x: float, y: float) -> None:
    scene = canvas.view_point(x, y)
    pos = canvas.mapFromScene(scene)
    qtbot.mouseMove(canvas.viewport(), pos)
    qtbot.mouseClick(canvas.viewport(), Qt.MouseButton.LeftButton, pos=QPoint(pos.x(), pos.y()))


def test_click_on_a_path_selects_that_run(win, qtbot):
    canvas = win.map_panel.canvas
    assert win.state.run_id == "toy-001"
    # the forward half of run toy-002 ("right": towards d_left 3.0, d_right 1.5) is no other run's path;
    # a frame where it is still moving (the toy runs reach their end value half-way through a half)
    x, y = canvas.data.run_xy("toy-002")
    k = win.state.tset["toy-002"].ts_index + 12
    _click_data_point(qtbot, canvas, float(x[k]), float(y[k]))
    assert win.state.run_id == "toy-002"
    assert win.state.frame == k  # and the frame under the cursor
    # the highlight follows: thick curve over the picked run, marker at the current frame
    hx, _hy = canvas.highlight.getData()
    assert len(hx) == win.state.tset["toy-002"].n_frames
    mx, my = canvas.marker.getData()
    assert (mx[0], my[0]) == (pytest.approx(x[k]), pytest.approx(y[k]))


def test_click_far_from_any_path_changes_nothing(win, qtbot):
    canvas = win.map_panel.canvas
    _click_data_point(qtbot, canvas, 1.55, 1.55)  # bottom-left corner: no run passes there
    assert win.state.run_id == "toy-001"


def test_marker_moves_with_the_frame(win):
    canvas = win.map_panel.canvas
    x, y = canvas.data.run_xy("toy-001")
    win.state.set_frame(5)
    mx, my = canvas.marker.getData()
    assert (mx[0], my[0]) == (pytest.approx(x[5]), pytest.approx(y[5]))


def test_hand_label_recolours_the_map(win, qtbot):
    st_ = win.state
    st_.journal.record("toy-003", "left", content_hash=st_.tset["toy-003"].content_hash, reason="looks reactive")
    st_.refresh_labels()
    qtbot.waitUntil(lambda: win.map_panel.canvas.counts.get("left") == 4)
    assert "recrossing" not in win.map_panel.canvas.counts


def test_labels_recolour_the_map_in_a_turn_of_their_own(win, qtbot, monkeypatch):
    """The label's own turn (table, panel, journal) stays short: at 10,000 runs regrouping the map's paths took
    a third of it (26 of 67 ms under a profiler).  Two labels in one turn are drawn once, both shown."""
    st_, canvas = win.state, win.map_panel.canvas
    calls = []
    real = canvas.set_labels
    monkeypatch.setattr(canvas, "set_labels", lambda labels: (calls.append(dict(labels)), real(labels)))
    st_.journal.record("toy-003", "left", content_hash=st_.tset["toy-003"].content_hash)
    st_.refresh_labels()
    assert calls == []
    st_.journal.record("toy-002", "recrossing", content_hash=st_.tset["toy-002"].content_hash)
    st_.refresh_labels()
    assert calls == []
    qtbot.waitUntil(lambda: bool(calls))
    qtbot.wait(30)
    assert len(calls) == 1
    assert calls[0]["toy-003"] == "left" and calls[0]["toy-002"] == "recrossing"
    assert canvas.counts["left"] == 4 and canvas.counts["recrossing"] == 1 and "right" not in canvas.counts


def test_labels_waiting_for_their_turn_give_way_to_a_new_map(win, qtbot, monkeypatch):
    """Labels asked for before the map is measured again are not drawn over the newer map afterwards."""
    st_, panel = win.state, win.map_panel
    st_.journal.record("toy-003", "left", content_hash=st_.tset["toy-003"].content_hash)
    st_.refresh_labels()
    panel.refresh(force=True)   # a new map of the same labels (other axes, rules or set), in this turn
    calls = []
    monkeypatch.setattr(panel.canvas, "set_labels", lambda labels: calls.append(labels))
    qtbot.wait(50)
    assert calls == []
    assert panel.canvas.counts["left"] == 4


def test_axis_choice_and_added_monitor(win):
    panel = win.map_panel
    win.state.add_monitor((2, 3))
    assert panel.x_combo.count() == 3
    panel.set_axes("d_left", "d(2-3)")
    data = panel.canvas.data
    assert data.y_axis.key == "d(2-3)" and not data.y_axis.from_rules
    traj = win.state.tset["toy-001"]
    np.testing.assert_allclose(data.run_xy("toy-001")[1], distance(traj.positions, 1, 2))
    assert panel.canvas.region_items == []  # basins are defined on rules monitors only


def test_basin_regions_from_rules(win):
    regions = {r.basin: r for r in basin_regions(win.state.rules, "d_left", "d_right")}
    assert (regions["left"].x1, regions["left"].y0) == (1.75, 2.3)
    assert regions["left"].x0 == -np.inf and regions["left"].y1 == np.inf
    assert (regions["reactant"].x0, regions["reactant"].y0) == (2.6, 2.6)
    assert len(win.map_panel.canvas.region_items) == 3


def test_view_menu_has_the_map_toggle(win):
    view = next(a.menu() for a in win.menu_bar.actions() if a.menu() and a.text().replace("&", "") == "View")
    assert any(a.text() == "&Map of Runs" for a in view.actions())


# --- pure helpers ----------------------------------------------------------------------------

def _data(lengths, seed=0):
    rng = np.random.default_rng(seed)
    lengths = np.asarray(lengths)
    ends = np.cumsum(lengths)
    n = int(ends[-1])
    ax = MapAxis("a", (1, 2))
    return MapData([f"r{i}" for i in range(len(lengths))], rng.normal(size=n), rng.normal(size=n),
                   ends - lengths, ends, ax, MapAxis("b", (1, 3)))


@given(st.lists(st.integers(1, 400), min_size=1, max_size=12), st.integers(2, 50))
def test_decimation_keeps_ends_and_bounds_points(lengths, max_points):
    d = _data(lengths)
    keep = decimated_indices(d.starts, d.ends, max_points)
    assert np.all(np.diff(keep) > 0)
    assert set(d.starts).issubset(keep) and set(d.ends - 1).issubset(keep)
    per_run = np.bincount(np.searchsorted(d.ends, keep, side="right"), minlength=len(lengths))
    assert np.all(per_run <= max_points + 1)


@given(st.lists(st.integers(1, 60), min_size=1, max_size=8), st.integers(0, 1000))
def test_nearest_segment_matches_a_plain_loop(lengths, seed):
    d = _data(lengths, seed)
    rng = np.random.default_rng(seed + 1)
    px, py, sx, sy = rng.normal(), rng.normal(), 0.01 * (1 + rng.random()), 0.01 * (1 + rng.random())
    r, _frame, dist = nearest_on_paths(d, px, py, sx, sy)
    best = np.inf  # reference: point-to-segment distance by a plain loop (textbook projection)
    for k in range(d.n_runs):
        xs = (d.x[d.starts[k]:d.ends[k]] - px) / sx
        ys = (d.y[d.starts[k]:d.ends[k]] - py) / sy
        if len(xs) == 1:
            best = min(best, float(np.hypot(xs[0], ys[0])))
        for i in range(len(xs) - 1):
            a, b = np.array([xs[i], ys[i]]), np.array([xs[i + 1], ys[i + 1]])
            seg = b - a
            t = 0.0 if seg @ seg == 0 else float(np.clip(-(a @ seg) / (seg @ seg), 0, 1))
            best = min(best, float(np.linalg.norm(a + t * seg)))
    assert dist == pytest.approx(best, rel=1e-9, abs=1e-9)


def test_grouped_paths_split_runs_with_nan():
    d = _data([5, 3, 4])
    groups = grouped_paths(d, {"r0": "alpha", "r1": "beta", "r2": "alpha"}, max_points=100)
    x, _y, n = groups["alpha"]
    assert n == 2 and np.isnan(x).sum() == 2 and np.isfinite(x).sum() == 9
    assert groups["beta"][2] == 1


def test_map_axes_lists_rules_then_added_monitors():
    class R:
        monitors = {"m1": type("M", (), {"atoms": (1, 2)})(), "m2": type("M", (), {"atoms": (2, 3, 4)})()}

    axes = map_axes(R(), [(2, 1), (1, 3)])
    assert [a.key for a in axes] == ["m1", "m2", "d(1-3)"]  # (2, 1) is m1 reversed
    assert [a.unit for a in axes] == ["Å", "°", "Å"]


# --- exports from the window -------------------------------------------------------------------

def test_export_map_figure_png_and_svg(win, tmp_path):
    import xml.etree.ElementTree as ET

    from PIL import Image

    from basinmark.gui.exports import export_figure, install_export_menu

    install_export_menu(win)
    canvas = win.map_panel.canvas
    png = export_figure(canvas, tmp_path / "map.png", size=(500, 400))
    with Image.open(png) as im:  # reference reader: Pillow
        assert im.size == (500, 400)
    svg = export_figure(canvas, tmp_path / "map.svg")
    assert ET.parse(svg).getroot().tag == "{http://www.w3.org/2000/svg}svg"  # reference parser: xml.etree
    assert canvas.curves["left"].cacheMode() == canvas.curves["left"].CacheMode.DeviceCoordinateCache  # restored
    names = [a.text() for a in win.export_menu.actions() if a.text()]
    assert "Map &Figure…" in names and "Current R&un (XYZ)…" in names


def test_export_current_frame_and_run(win, tmp_path):
    import ase.io

    from basinmark.gui.exports import NothingToExport, export_frame, export_run

    win.state.set_run("toy-002")
    win.state.set_frame(7)
    traj = win.state.tset["toy-002"]
    atoms = ase.io.read(export_frame(win.state, tmp_path / "f.xyz"))  # reference reader: ase.io
    np.testing.assert_allclose(atoms.positions, traj.positions[7], atol=1e-4)
    frames = ase.io.read(export_run(win.state, tmp_path / "r.xyz"), index=":")
    np.testing.assert_allclose(np.stack([a.positions for a in frames]), traj.positions, atol=1e-4)
    win.state.run_id = ""
    with pytest.raises(NothingToExport):
        export_frame(win.state, tmp_path / "g.xyz")


def test_hidden_map_waits_until_shown(win):
    panel = win.map_panel
    win.docks["map"].close()
    st_ = win.state
    st_.journal.record("toy-004", "right", content_hash=st_.tset["toy-004"].content_hash, reason="slow")
    st_.refresh_labels()
    assert panel.stale and "right" in panel.canvas.counts and panel.canvas.counts["right"] == 1
    win.docks["map"].show()
    assert not panel.stale and panel.canvas.counts["right"] == 2


def test_a_basin_across_180_degrees_is_two_rectangles():
    from basinmark.core.rules import parse_rules
    from basinmark.gui.map_data import basin_regions

    rules = parse_rules('reactant = "cis"\ndwell_fs = 2.0\n[monitors]\nw = [1, 2, 3, 4]\nd = [1, 2]\n'
                        '[basins.cis]\nw = { between = [-30, 30] }\n[basins.trans]\nw = { between = [150, -150] }\n')
    trans = [r for r in basin_regions(rules, "w", "d") if r.basin == "trans"]
    assert sorted((r.x0, r.x1) for r in trans) == [(-180.0, -150.0), (150.0, 180.0)]


@given(st.lists(st.integers(0, 300), min_size=1, max_size=10), st.integers(1, 60))
def test_decimation_is_every_stride_th_frame_plus_the_last(lengths, max_points):
    """Reference: a plain loop per run (frames 0, s, 2s, ... and the last, s = ceil(length / (max_points - 1)))."""
    lengths = np.asarray(lengths)
    ends = np.cumsum(lengths)
    starts = ends - lengths
    want, want_runs = [], []
    for r, (s0, n) in enumerate(zip(starts, lengths)):
        stride = max(1, int(np.ceil(n / max(1, max_points - 1))))
        local = sorted(set(range(0, n, stride)) | ({n - 1} if n else set()))
        want += [int(s0) + i for i in local]
        want_runs += [r] * len(local)
    keep, runs = decimated_indices(starts, ends, max_points, with_runs=True)
    assert keep.tolist() == want and runs.tolist() == want_runs


@pytest.mark.parametrize("x, y, want", [
    ([1.0, np.nan, 3.0], [2.0, 5.0, np.nan], (1.0, 3.0, 2.0, 5.0)),
    ([np.inf, 1.0, -2.0], [0.5, -np.inf, 4.0], (-2.0, 1.0, 0.5, 4.0)),   # infinities are not in the range
    ([np.nan, np.nan, np.nan], [1.0, 2.0, 3.0], None),
])
def test_finite_range_skips_nan_and_infinity(x, y, want):
    d = MapData(["r"], np.array(x), np.array(y), np.array([0]), np.array([3]), MapAxis("a", (1, 2)),
                MapAxis("b", (1, 3)))
    assert d.finite_range() == want


def test_a_map_tabbed_behind_the_traces_waits_until_its_tab_is_shown(win, monkeypatch):
    """Tabbed behind the traces (where the window puts it), the map reports itself visible to Qt at a place off the
    screen: it was measured after every load and drawn again after every hand label though nobody saw it (at 10,000
    runs 1.2 s of a worker and a 55-60 ms turn after each load).  It waits until its tab is brought to the front."""
    from basinmark.gui import map_view

    panel = win.map_panel
    traces, dock = win.docks["traces"], win.docks["map"]
    assert dock in win.tabifiedDockWidgets(traces)
    traces.raise_()
    QApplication.processEvents()
    built = []
    real = map_view.MapData.build
    monkeypatch.setattr(map_view.MapData, "build", staticmethod(lambda *a, **k: built.append(1) or real(*a, **k)))
    panel.refresh()
    st_ = win.state
    st_.journal.record("toy-004", "right", content_hash=st_.tset["toy-004"].content_hash, reason="behind")
    st_.refresh_labels()
    assert built == [] and panel.stale
    dock.raise_()   # its tab to the front
    QApplication.processEvents()
    assert built and not panel.stale and panel.canvas.counts["right"] == 2
