"""A large map's paths are one picture drawn in a worker thread: same look as the curves, redrawn after pan and
zoom, never stroked on the window's thread; a click before the pick index exists waits for a thread to build it."""

from __future__ import annotations

import threading

import numpy as np
import pytest
import pyqtgraph as pg
from PySide6.QtCore import QPoint, QRectF, QSettings, Qt
from PySide6.QtGui import QColor, QImage, QPainter, QPen

from basinmark.gui import map_data, map_layer, map_view
from basinmark.gui.main_window import MainWindow
from basinmark.gui.map_data import MapAxis, MapData
from basinmark.gui.map_layer import PathGroup, ViewKey, _chunks, render_paths
from basinmark.gui.map_view import MapCanvas, install_map_dock

from gui_fixtures import make_toy_set

pytestmark = pytest.mark.gui

OUTCOMES = ["left", "right", "recrossing", "unfinished", "left", "left"]


def _array(image: QImage) -> np.ndarray:
    """(h, w, 3) uint8 RGB of a QImage (the red, green, blue bytes of 32-bit pixels)."""
    image = image.convertToFormat(QImage.Format.Format_RGB32)
    w, h = image.width(), image.height()
    raw = np.frombuffer(image.constBits(), dtype=np.uint8, count=image.sizeInBytes())
    rows = raw.reshape(h, image.bytesPerLine())[:, :w * 4].reshape(h, w, 4)
    return rows[:, :, [2, 1, 0]].astype(int)  # little-endian 0xAARRGGBB


def _zigzags(n_runs: int = 5, n: int = 120) -> tuple[MapData, dict[str, str]]:
    """Runs that never touch one another: each a zigzag in its own horizontal band (our own toy shapes)."""
    t = np.linspace(0.0, 1.0, n)
    xs, ys = [], []
    for k in range(n_runs):
        xs.append(1.0 + 2.0 * t)
        ys.append(1.0 + k + 0.35 * np.abs(((t * 7 + 0.1 * k) % 1.0) - 0.5))
    lengths = np.full(n_runs, n)
    ends = np.cumsum(lengths)
    data = MapData([f"z{k}" for k in range(n_runs)], np.concatenate(xs), np.concatenate(ys), ends - lengths, ends,
                   MapAxis("a", (1, 2)), MapAxis("b", (1, 3)))
    labels = {f"z{k}": ("left", "right", "recrossing")[k % 3] for k in range(n_runs)}
    return data, labels


def _canvas(qtbot, data, labels, picture: bool) -> MapCanvas:
    canvas = MapCanvas()
    canvas.PICTURE_FROM_POINTS = 0 if picture else 10 ** 9
    qtbot.addWidget(canvas)
    canvas.resize(420, 320)
    canvas.show()
    qtbot.waitExposed(canvas)
    canvas.set_data(data, labels, products=["left", "right"])
    qtbot.waitUntil(canvas.drawn, timeout=10000)
    return canvas


def test_the_picture_looks_like_the_curves(qtbot):
    data, labels = _zigzags()
    curves = _canvas(qtbot, data, labels, picture=False)
    picture = _canvas(qtbot, data, labels, picture=True)
    assert curves.layer is None and curves.curves
    assert picture.layer is not None and not picture.curves
    assert picture.counts == curves.counts
    assert {k: c.rgba() for k, c in picture.label_colours().items()} == \
        {k: c.rgba() for k, c in curves.label_colours().items()}
    a, b = _array(curves.grab().toImage()), _array(picture.grab().toImage())
    assert a.shape == b.shape
    background = _array(curves.grab().toImage())[2, 2]
    painted_a = np.any(np.abs(a - background) > 8, axis=2)
    painted_b = np.any(np.abs(b - background) > 8, axis=2)
    # the same pixels are painted (axes, legend and paths) and with the same colours, within rounding
    assert painted_a.sum() > 2000
    assert (painted_a != painted_b).sum() <= 0.01 * painted_a.sum()
    both = painted_a & painted_b
    assert np.percentile(np.abs(a - b)[both].max(axis=1), 99) <= 3


def test_render_paths_matches_qpainter_strokes_of_the_same_paths():
    """Reference: QPainter stroking each label's path with its translucent pen (what a curve item does)."""
    data, labels = _zigzags(4, 60)
    key = ViewKey.covering(QRectF(0.5, 0.5, 3.0, 4.5), 300, 240)
    groups = []
    colours = {"left": QColor(200, 40, 40, 150), "right": QColor(30, 90, 210, 150), "recrossing": QColor(20, 150, 60, 150)}
    for label in ("left", "right", "recrossing"):
        runs = [i for i, r in enumerate(data.run_ids) if labels[r] == label]
        x = np.concatenate([np.append(data.x[data.starts[i]:data.ends[i]], np.nan) for i in runs])
        y = np.concatenate([np.append(data.y[data.starts[i]:data.ends[i]], np.nan) for i in runs])
        groups.append(PathGroup(label, x, y, colours[label]))
    got = render_paths(groups, key, chunk=25)   # many pieces: cut between runs and inside them
    stroked = render_paths(groups, key, chunk=25, by_path=True)
    want = QImage(300, 240, QImage.Format.Format_ARGB32_Premultiplied)
    want.fill(0)
    p = QPainter(want)
    p.setRenderHint(QPainter.RenderHint.Antialiasing, False)
    for g in groups:
        pen = QPen(g.colour)
        pen.setCosmetic(True)
        p.setPen(pen)
        px = (g.x - 0.5) * (300 / 3.0)
        py = (0.5 + 4.5 - g.y) * (240 / 4.5)
        p.drawPath(pg.functions.arrayToQPath(px, py, connect="finite"))
    p.end()
    b = _array(want)
    alpha_b = np.frombuffer(want.constBits(), np.uint8).reshape(240, 300, 4)[:, :, 3]
    assert (alpha_b > 0).sum() > 500
    # stroked as paths: the same pixels as the reference
    s_ = _array(stroked)
    alpha_s = np.frombuffer(stroked.constBits(), np.uint8).reshape(240, 300, 4)[:, :, 3]
    assert np.array_equal(alpha_s > 0, alpha_b > 0)
    assert np.abs(s_ - b).max() <= 2 and np.abs(alpha_s.astype(int) - alpha_b).max() <= 2
    # drawn as line segments (the default, faster): every pixel of the reference, plus at most the one pixel at a
    # vertex that a stroked path leaves out where its segments meet
    a = _array(got)
    alpha_a = np.frombuffer(got.constBits(), np.uint8).reshape(240, 300, 4)[:, :, 3]
    assert not ((alpha_b > 0) & (alpha_a == 0)).any()
    extra = np.argwhere((alpha_a > 0) & (alpha_b == 0))   # (row, column)
    vx = np.concatenate([(g.x - 0.5) * (300 / 3.0) for g in groups])
    vy = np.concatenate([(0.5 + 4.5 - g.y) * (240 / 4.5) for g in groups])
    vx, vy = vx[np.isfinite(vx)], vy[np.isfinite(vy)]
    if extra.size:
        reach = np.maximum(np.abs(extra[:, 1, None] + 0.5 - vx[None]), np.abs(extra[:, 0, None] + 0.5 - vy[None]))
        assert (reach.min(axis=1) <= 1.5).all()
    assert len(extra) <= vx.size
    both = (alpha_a > 0) & (alpha_b > 0)
    assert np.abs(a - b)[both].max() <= 2 and np.abs(alpha_a.astype(int) - alpha_b)[both].max() <= 2


@pytest.mark.parametrize("limit", [1, 3, 7, 50])
def test_pieces_cover_every_segment(limit):
    x = np.array([0, 1, 2, np.nan, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, np.nan, 14, 15], dtype=float)
    pieces = _chunks(x, limit)
    assert pieces[0][0] == 0 and pieces[-1][1] == x.size
    segments = set()
    for s, e in pieces:
        assert e > s
        segments.update((i, i + 1) for i in range(s, e - 1) if np.isfinite(x[i]) and np.isfinite(x[i + 1]))
    assert segments == {(i, i + 1) for i in range(x.size - 1) if np.isfinite(x[i]) and np.isfinite(x[i + 1])}


def test_pan_and_zoom_draw_a_new_picture_for_the_new_view(qtbot):
    data, labels = _zigzags()
    canvas = _canvas(qtbot, data, labels, picture=True)
    first = canvas.layer.renders
    vb = canvas.plot_item.vb
    vb.setRange(QRectF(1.5, 2.0, 1.0, 1.5), padding=0)   # zoom (the old picture is shown scaled until the new one)
    # (a new picture of a toy map may come before a poll could see the old one shown: wait for the new one instead)
    qtbot.waitUntil(lambda: canvas.layer.renders > first and canvas.drawn(), timeout=10000)
    r = canvas.layer.image_key.qrect()
    view = vb.viewRect()   # the picture covers the view (to whole pixels)
    assert r.contains(view) and r.width() < view.width() * 1.02
    # the zoomed picture still looks like the curves at the same zoom
    curves = _canvas(qtbot, data, labels, picture=False)
    curves.plot_item.vb.setRange(QRectF(1.5, 2.0, 1.0, 1.5), padding=0)
    qtbot.wait(50)
    a, b = _array(curves.grab().toImage()), _array(canvas.grab().toImage())
    background = a[2, 2]
    pa, pb = np.any(np.abs(a - background) > 8, axis=2), np.any(np.abs(b - background) > 8, axis=2)
    assert (pa != pb).sum() <= 0.01 * pa.sum()
    n = canvas.layer.renders
    vb.translateBy(x=0.3)   # pan
    qtbot.waitUntil(lambda: canvas.layer.renders > n and canvas.drawn(), timeout=10000)
    n = canvas.layer.renders
    canvas.resize(300, 260)   # resize
    qtbot.waitUntil(lambda: canvas.layer.renders > n and canvas.drawn(), timeout=10000)
    assert vb.width() <= canvas.layer.image.width() <= vb.width() + 2


def test_one_step_after_a_quiet_spell_is_drawn_at_once(qtbot, monkeypatch):
    """A single zoom, pan or resize (a wheel click, the panel shown) is drawn at the end of its turn, not after the
    settle delay that a drag's many steps wait for (at 10,000 runs that delay was a fifth of the map's 300 ms)."""
    monkeypatch.setattr(map_layer.PathLayer, "SETTLE_MS", 5000)   # far longer than the test waits
    data, labels = _zigzags()
    canvas = _canvas(qtbot, data, labels, picture=True)
    layer = canvas.layer
    layer._last_change = float("-inf")   # a quiet spell since the first picture
    n = layer.renders
    canvas.plot_item.vb.setRange(QRectF(1.5, 2.0, 1.0, 1.5), padding=0)   # one zoom (several signals, one turn)
    qtbot.waitUntil(lambda: layer.renders > n and canvas.drawn(), timeout=3000)
    assert layer.shows_current_view()


def test_a_burst_of_steps_asks_for_one_picture_then_one_when_it_settles(qtbot, monkeypatch):
    """A drag: the first step of a quiet spell may be drawn at once, the later ones wait until the view settles; never a
    picture per step."""
    monkeypatch.setattr(map_layer.PathLayer, "SETTLE_MS", 300)
    data, labels = _zigzags()
    canvas = _canvas(qtbot, data, labels, picture=True)
    layer = canvas.layer
    layer._last_change = float("-inf")
    asked = []
    real = layer._renderer.request
    monkeypatch.setattr(layer._renderer, "request", lambda groups, key: asked.append(key) or real(groups, key))
    vb = canvas.plot_item.vb
    for _ in range(12):   # steps 20 ms apart: one drag
        vb.translateBy(x=0.02)
        qtbot.wait(20)
    # the steps just after the quiet spell at most (FOLLOW_MS); the rest wait for the view to settle
    assert len(asked) <= 1 + map_layer.PathLayer.FOLLOW_MS // 20
    during = len(asked)
    qtbot.waitUntil(lambda: canvas.drawn(), timeout=5000)
    assert during + 1 <= len(asked) <= during + 2 and asked[-1] == layer.current_key()


@pytest.mark.parametrize("seed", range(4))
def test_random_pans_zooms_and_resizes_end_with_a_picture_of_the_view_as_it_is(qtbot, seed):
    """Random view changes at random pauses (single steps, bursts, waits longer and shorter than the settle delay):
    whatever the order, the pictures delivered are never older than one shown before, and once the changes stop
    the picture shown is of the view as it is then."""
    import random

    rng = random.Random(seed)
    data, labels = _zigzags()
    canvas = _canvas(qtbot, data, labels, picture=True)
    layer = canvas.layer
    vb = canvas.plot_item.vb
    delivered = []
    layer.delivered.connect(lambda g, k, im: delivered.append(g))
    for _ in range(25):
        kind = rng.choice(["zoom", "pan", "resize", "wait"])
        if kind == "zoom":
            f = rng.choice([0.8, 1.25])
            vb.scaleBy((f, f))
        elif kind == "pan":
            vb.translateBy(x=rng.uniform(-0.3, 0.3), y=rng.uniform(-0.3, 0.3))
        elif kind == "resize":
            canvas.resize(rng.randrange(300, 480), rng.randrange(240, 360))
        qtbot.wait(rng.choice([0, 5, 20, 45, 80, 150]))
    qtbot.waitUntil(canvas.drawn, timeout=10000)
    assert layer.image_key == layer.current_key() and layer.wanted is None
    shown = [g for g in delivered]
    assert shown == sorted(shown)   # the renderer numbers its pictures in the order asked


def test_new_labels_are_drawn_after_the_turn_that_changed_them(qtbot, monkeypatch):
    """A hand label recolours the map: the picture is asked for once the label's turn and its paint are over, not in
    that turn (drawn at once, the worker held Python's lock against those paints: the gap around a hand label was
    77-100 ms with the map shown at 10,000 runs, the worker drawing for 104-132 ms of it)."""
    data, labels = _zigzags()
    canvas = _canvas(qtbot, data, labels, picture=True)
    layer = canvas.layer
    asked = []
    real = layer._renderer.request
    monkeypatch.setattr(layer._renderer, "request", lambda groups, key: asked.append(key) or real(groups, key))
    relabelled = dict(labels, z0="right")
    canvas.set_labels(relabelled)
    assert asked == []   # not in this turn
    qtbot.waitUntil(lambda: bool(asked) and canvas.drawn(), timeout=5000)
    assert len(asked) == 1 and layer.image_key.version == layer.version


def test_only_the_newest_view_is_drawn():
    got = []
    r = map_layer.LatestRenderer(lambda g, k, im: got.append((g, k, im)))
    data, labels = _zigzags()
    group = PathGroup("left", data.x, data.y, QColor(10, 20, 30, 150))
    keys = [ViewKey.covering(QRectF(0.0, 0.0, 4.0, 7.0), 100 + i, 80) for i in range(20)]
    for k in keys:
        last = r.request([group], k)
    assert r.wait(20)
    assert got[-1][0] == last and got[-1][1] == keys[-1] and got[-1][2].width() == keys[-1].width
    gens = [g for g, _k, _im in got]
    assert gens == sorted(set(gens)) and len(gens) < len(keys)   # never an older picture after a newer one
    # a drawing asked to stop half-way gives nothing
    calls = []
    assert render_paths([group], keys[0], cancelled=lambda: calls.append(1) or len(calls) > 1, chunk=10) is None


# --- in the window ---------------------------------------------------------------------------

@pytest.fixture
def win(qtbot, tmp_path, monkeypatch):
    monkeypatch.setattr(MapCanvas, "PICTURE_FROM_POINTS", 0)   # the toy set counts as a large map
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
    qtbot.waitUntil(lambda: w.map_panel.canvas.drawn(), timeout=20000)
    yield w
    w.close()


def test_window_map_as_a_picture_keeps_colours_regions_legend_and_clicks(win, qtbot):
    canvas = win.map_panel.canvas
    assert canvas.layer is not None and canvas.layer.image is not None
    products = win.state.rules.products
    for label, colour in canvas.label_colours().items():
        want = map_view.outcome_colour(label, products)
        assert (colour.red(), colour.green(), colour.blue(), colour.alpha()) == (want.red(), want.green(),
                                                                                  want.blue(), 150)
    assert canvas.counts == {"left": 3, "right": 1, "recrossing": 1, "unfinished": 1}
    texts = [lbl.text for _sample, lbl in canvas.legend.items]
    assert "left (3)" in texts and "right (1)" in texts
    assert len(canvas.region_items) == 3
    # the picture shows toy-002 ("right") in its colour where its forward half runs alone
    x, y = canvas.data.run_xy("toy-002")
    k = win.state.tset["toy-002"].ts_index + 12
    shot = canvas.grab().toImage()
    pos = canvas.mapFromScene(canvas.view_point(float(x[k]), float(y[k])))
    right = map_view.outcome_colour("right", products)
    near = [QColor(shot.pixel(pos.x() + dx, pos.y() + dy)) for dx in (-1, 0, 1) for dy in (-1, 0, 1)]
    assert any(abs(c.hue() - right.hue()) <= 12 and c.saturation() > 60 for c in near)
    # a click on it opens the run at that frame
    qtbot.mouseClick(canvas.viewport(), Qt.MouseButton.LeftButton, pos=QPoint(pos.x(), pos.y()))
    assert win.state.run_id == "toy-002" and win.state.frame == k


def test_paths_are_never_stroked_on_the_windows_thread(win, qtbot, monkeypatch):
    stroked_here = []
    real = pg.functions.arrayToQPath

    def spy(*args, **kw):
        if threading.current_thread() is threading.main_thread():
            stroked_here.append(len(args[0]))
        return real(*args, **kw)

    monkeypatch.setattr(pg.functions, "arrayToQPath", spy)
    canvas = win.map_panel.canvas
    win.map_panel.refresh()   # measured and drawn again
    qtbot.waitUntil(canvas.drawn, timeout=20000)
    canvas.plot_item.vb.scaleBy((0.5, 0.5))
    qtbot.waitUntil(canvas.drawn, timeout=20000)
    canvas.repaint()
    win.state.journal.record("toy-003", "left", content_hash=win.state.tset["toy-003"].content_hash, reason="x")
    win.state.refresh_labels()   # recoloured (in the next turn): drawn again in the worker
    qtbot.waitUntil(lambda: canvas.counts.get("left") == 4 and canvas.drawn(), timeout=20000)
    # only the current run's highlight (one run) is a curve on the window's thread
    longest = max(win.state.tset[r].n_frames for r in win.state.tset.run_ids)
    assert all(n <= longest for n in stroked_here)


def test_a_click_before_the_pick_index_waits_for_a_thread(win, qtbot, monkeypatch):
    monkeypatch.setattr(map_view, "INDEX_FROM_POINTS", 0)   # every map counts as large for picking
    built_in = []
    real = map_data.PathIndex

    searched_in = []

    class Spy(real):
        def __init__(self, data):
            built_in.append(threading.current_thread())
            super().__init__(data)

        def nearest(self, *args, **kw):
            searched_in.append(threading.current_thread())
            return super().nearest(*args, **kw)

    monkeypatch.setattr(map_data, "PathIndex", Spy)
    canvas = win.map_panel.canvas
    data = canvas.data
    data.__dict__.pop("_pick_index", None)
    x, y = data.run_xy("toy-002")
    k = win.state.tset["toy-002"].ts_index + 12
    pos = canvas.mapFromScene(canvas.view_point(float(x[k]), float(y[k])))
    with qtbot.waitSignal(canvas.run_picked, timeout=20000):
        qtbot.mouseClick(canvas.viewport(), Qt.MouseButton.LeftButton, pos=QPoint(pos.x(), pos.y()))
        assert win.state.run_id == "toy-001"   # answered later, not in the click's turn
        assert "preparing" in win.map_panel.hint.text()
    assert built_in and threading.main_thread() not in built_in
    assert searched_in and threading.main_thread() not in searched_in   # the search too (it can be long)
    assert win.state.run_id == "toy-002" and win.state.frame == k
    # a second click, the index now there: still answered by a thread, at once
    win.state.set_run("toy-003")
    k1 = k + 4
    pos = canvas.mapFromScene(canvas.view_point(float(x[k1]), float(y[k1])))
    with qtbot.waitSignal(canvas.run_picked, timeout=20000):
        qtbot.mouseClick(canvas.viewport(), Qt.MouseButton.LeftButton, pos=QPoint(pos.x(), pos.y()))
        assert win.map_panel.hint.text() == win.map_panel.HINT   # nothing to prepare
    assert len(built_in) == 1 and threading.main_thread() not in searched_in
    assert win.state.run_id == "toy-002" and win.state.frame == k1


def test_export_of_a_picture_map(win, tmp_path):
    import xml.etree.ElementTree as ET

    from PIL import Image

    from basinmark.gui.exports import export_figure

    canvas = win.map_panel.canvas
    png = export_figure(canvas, tmp_path / "map.png", size=(500, 400))
    with Image.open(png) as im:  # reference reader: Pillow
        rgb = np.asarray(im.convert("RGB")).astype(int)
    left = map_view.outcome_colour("left", win.state.rules.products)
    # the paths are in the file (drawn at once for it), in their label's colour
    close = np.abs(rgb - np.array([left.red(), left.green(), left.blue()])).sum(axis=2) < 120
    assert close.sum() > 50
    svg = export_figure(canvas, tmp_path / "map.svg")
    root = ET.parse(svg).getroot()   # reference parser: xml.etree
    assert sum(1 for el in root.iter() if el.tag.endswith("path")) >= 4
