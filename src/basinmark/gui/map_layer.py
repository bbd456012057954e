"""The paths of a large map drawn off the window's thread: one picture of the visible part, redrawn after pan,
zoom and resize.

Why not the plot's own curve items: at 10,000 runs (400,000 points drawn) building and stroking the curves took
about a second of the window's thread on first paint and again on every zoom or resize (bench_window_scale).
Stroking semi-transparent lines is the expensive part (75 ns a pixel against 6 ns for opaque ones, measured), and a
Qt drawing call holds Python's lock for its whole length, so a long call in any thread freezes the window.  Hence:

* :func:`render_paths` draws each label's paths *opaque* into a layer of its own, a few thousand points per call
  (every call a few ms, so the window's thread gets its turn in between), then lays the layers over each other
  with the label's transparency in the curves' order.  Where paths of one label cross, the picture is no darker
  (a curve item would blend each crossing again); runs of different labels still show through each other.
* :class:`PathLayer` is the item in the plot: it shows the newest picture at the data rectangle it was drawn for
  (scaled while a newer one is on its way) and asks :class:`LatestRenderer` for a new one when the view changes;
  the renderer drops requests overtaken by a newer one, also half-way through drawing.
* Exports (painting with no window behind the painter) draw at once: vectors into SVG, a picture of the export's
  size otherwise.
"""

from __future__ import annotations

import threading
import time
from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QLineF, QPointF, QRectF, QTimer, Signal
from PySide6.QtGui import QColor, QImage, QPainter, QPaintEngine, QPen

from basinmark.gui.give_way import give_way

#: points drawn per Qt call in the worker: ~1-3 ms of opaque stroking each, the longest the worker holds Python's lock
#: (our own choice, measured at 10,000 runs: 5,000 cost no more in all than 20,000)
CHUNK_POINTS = 5_000
#: between pieces the worker only offers Python's lock (``sleep(0)``).  It used to pause 1 ms after every 4 ms of
#: drawing: with the default 5 ms switch interval, ``sleep(0)`` alone took the lock straight back before the window's
#: thread could (a hand label with the map shown left the window 145-189 ms without a turn).  The window now switches
#: threads every 1 ms (``main_window.SWITCH_INTERVAL_S``), so a waiting window thread gets the lock within a piece
#: either way, and the pauses only made the picture later: at 10,000 runs (bench_window_scale's map steps, four
#: paired runs on 2 cores) the map showed in 184-305 ms without them against 245-337 ms with them, zooms in 253-358
#: against 307-543 ms, and the longest gap around a hand label was 86-108 against 78-125 ms.


try:   # the array of line segments that pyqtgraph's own curves hand to QPainter.drawLines
    from pyqtgraph.Qt.internals import PrimitiveArray as _Segments
except ImportError:  # pragma: no cover -- a pyqtgraph without it: paths stroked instead (slower; see _draw_piece)
    _Segments = None


def _draw_piece(painter: QPainter, px: np.ndarray, py: np.ndarray, segments) -> None:
    """The finite segments of one piece of paths: as line segments (``drawLines``) when ``segments`` (a reused
    array) is given, else as a path.  Segments rather than a path: 88 against 142 ms for 10,000 runs of 40 points
    at 1100 x 700 (opaque, 1-pixel cosmetic pen, no antialiasing; measured here).  The pictures differ only by a pixel
    at some vertices: where its segments meet, a stroked path leaves out a pixel that a segment draws."""
    if segments is None:
        painter.drawPath(pg.functions.arrayToQPath(px, py, connect="finite"))
        return
    ok = np.isfinite(px) & np.isfinite(py)
    both = ok[:-1] & ok[1:]
    n = int(np.count_nonzero(both))
    if not n:
        return
    segments.resize(n)
    m = segments.ndarray()
    m[:, 0] = px[:-1][both]
    m[:, 1] = py[:-1][both]
    m[:, 2] = px[1:][both]
    m[:, 3] = py[1:][both]
    painter.drawLines(*segments.drawargs())


@dataclass(frozen=True)
class PathGroup:
    """One label's paths: NaN-separated (x, y) in data units, drawn in ``colour`` (its alpha is the layer's)."""

    label: str
    x: np.ndarray
    y: np.ndarray
    colour: QColor


@dataclass(frozen=True)
class ViewKey:
    """What a picture was drawn for: data (x, y) lands on the window's pixel (sx x + ox, sy y + oy); the picture
    covers the pixels from (left, top), ``width`` x ``height`` of them (whole pixels, so that a picture of the view as
    it is lies on the window's pixel grid exactly as curves would), at ``dpr`` device pixels per pixel."""

    affine: tuple[float, float, float, float]   # sx, ox, sy, oy
    left: int
    top: int
    width: int
    height: int
    dpr: float
    version: int   # the groups' version (labels, colours)

    @classmethod
    def covering(cls, rect: QRectF, width: int, height: int, dpr: float = 1.0, version: int = 0) -> "ViewKey":
        """A picture of ``width`` x ``height`` pixels showing the data rectangle ``rect`` (y up)."""
        sx, sy = width / rect.width(), -height / rect.height()
        return cls((sx, -sx * rect.x(), sy, -sy * (rect.y() + rect.height())), 0, 0, width, height, dpr, version)

    def qrect(self) -> QRectF:
        """The data rectangle the picture covers."""
        sx, ox, sy, oy = self.affine
        x0, x1 = (self.left - ox) / sx, (self.left + self.width - ox) / sx
        y0, y1 = (self.top - oy) / sy, (self.top + self.height - oy) / sy
        return QRectF(min(x0, x1), min(y0, y1), abs(x1 - x0), abs(y1 - y0))


def _chunks(x: np.ndarray, limit: int) -> list[tuple[int, int]]:
    """(start, end) pieces of at most about ``limit`` points, cut after a NaN (between runs) where possible."""
    n = x.size
    if n <= limit:
        return [(0, n)] if n else []
    breaks = np.flatnonzero(~np.isfinite(x))
    limit = max(2, limit)   # a piece cut inside a run holds at least one segment
    out, s = [], 0
    while s < n:
        want = s + limit
        if want >= n:
            out.append((s, n))
            break
        k = int(np.searchsorted(breaks, want))
        e = int(breaks[k]) + 1 if k < breaks.size else n
        if e - s > 4 * limit:  # a single very long run: cut it anyway, the next piece starting at the cut's point
            out.append((s, want))
            s = want - 1
            continue
        out.append((s, e))
        s = e
    return out


def render_paths(groups: Sequence[PathGroup], key: ViewKey, cancelled: Callable[[], bool] = lambda: False,
                 chunk: int = CHUNK_POINTS, by_path: bool = False) -> QImage | None:
    """A transparent picture of ``key``'s size with ``groups`` drawn in order (see the module's note); None when
    ``cancelled()`` turned true meanwhile.  Any thread (Qt allows painting on a QImage off the GUI thread).
    ``by_path`` strokes each piece as a path (the slower way, kept for comparison: tests)."""
    dpr = key.dpr
    w, h = max(1, round(key.width * dpr)), max(1, round(key.height * dpr))
    out = QImage(w, h, QImage.Format.Format_ARGB32_Premultiplied)
    out.fill(0)
    sx, ox, sy, oy = key.affine
    if not (np.isfinite([sx, ox, sy, oy]).all() and sx and sy):
        return out
    layer = QImage(w, h, QImage.Format.Format_ARGB32_Premultiplied)
    segments = _Segments(QLineF, 4) if _Segments is not None and not by_path else None
    over = QPainter(out)
    try:
        for group in groups:
            if cancelled():
                return None
            colour = QColor(group.colour)
            alpha = colour.alphaF()
            colour.setAlpha(255)
            layer.fill(0)
            pen = QPen(colour)
            pen.setCosmetic(True)
            pen.setWidth(1)
            painter = QPainter(layer)
            try:
                painter.setRenderHint(QPainter.RenderHint.Antialiasing, False)
                painter.setPen(pen)
                # the picture's pixels; NaN stays NaN and breaks the line
                px = (group.x * sx + (ox - key.left)) * dpr
                py = (group.y * sy + (oy - key.top)) * dpr
                for s, e in _chunks(px, chunk):
                    if cancelled():
                        return None
                    _draw_piece(painter, px[s:e], py[s:e], segments)
                    give_way()   # Python's lock offered to the window's thread; held back while a person acts
            finally:
                painter.end()
            over.setOpacity(alpha)
            over.drawImage(0, 0, layer)
    finally:
        over.end()
    out.setDevicePixelRatio(key.dpr)
    return out


class LatestRenderer:
    """One worker thread that draws only the newest request: a request made while another is drawn stops that one
    at its next piece.  ``deliver(generation, key, image)`` is called in the worker thread (emit a Qt signal there)."""

    def __init__(self, deliver: Callable[[int, ViewKey, QImage], None]) -> None:
        self._deliver = deliver
        self._lock = threading.Lock()
        self._job: tuple | None = None
        self._generation = 0
        self._thread: threading.Thread | None = None

    @property
    def generation(self) -> int:
        return self._generation

    def request(self, groups: Sequence[PathGroup], key: ViewKey) -> int:
        with self._lock:
            self._generation += 1
            self._job = (self._generation, tuple(groups), key)
            if self._thread is None or not self._thread.is_alive():
                self._thread = threading.Thread(target=self._run, name="basinmark-map-picture", daemon=True)
                self._thread.start()
            return self._generation

    def cancel(self) -> None:
        with self._lock:
            self._generation += 1
            self._job = None

    def _run(self) -> None:
        while True:
            with self._lock:
                job, self._job = self._job, None
                if job is None:
                    self._thread = None
                    return
            generation, groups, key = job
            image = render_paths(groups, key, cancelled=lambda: self._generation != generation)
            if image is None or generation != self._generation:
                continue
            try:
                self._deliver(generation, key, image)
            except RuntimeError:  # the item was deleted meanwhile (its signal is gone)
                return

    def wait(self, timeout_s: float = 10.0) -> bool:
        """Until no drawing is under way (tests, exports); True when idle."""
        thread = self._thread
        if thread is not None:
            thread.join(timeout_s)
            return not thread.is_alive()
        return True


class PathLayer(pg.GraphicsObject):
    """Many paths as one picture drawn in a worker thread (see the module's note).

    Lives in a plot's view box, in data coordinates.  ``groups`` are drawn in order; ``bounds`` (x0, x1, y0, y1) is
    the data's range (what auto-range fits)."""

    delivered = Signal(int, object, object)   # generation, ViewKey, QImage (queued from the worker thread)
    #: wait this long after the last pan/zoom/resize step before drawing again (the old picture is shown scaled) ...
    SETTLE_MS = 60
    #: ... except for the changes within this long of the first after a quiet spell: those are drawn at the end of
    #: their turn (a wheel click, the panel shown, and the view's own follow-up when the axes' tick labels change
    #: width, 9 ms later in tests/test_gui_map_picture.py).  Waiting for them to settle was 60 of the ~330 ms a
    #: 10,000-run map took to show (bench_window_scale).  A drag's later steps still wait.
    FOLLOW_MS = 50

    def __init__(self, groups: Sequence[PathGroup], bounds: tuple[float, float, float, float] | None,
                 version: int = 0) -> None:
        super().__init__()
        self.groups = tuple(groups)
        self.bounds = bounds
        self.version = version
        self.image: QImage | None = None
        self.image_key: ViewKey | None = None
        self.wanted: ViewKey | None = None
        self.renders = 0   # pictures received (tests)
        self._renderer = LatestRenderer(lambda g, k, im: self.delivered.emit(g, k, im))
        self.delivered.connect(self._on_delivered)
        self._settle = QTimer(self)
        self._settle.setSingleShot(True)
        self._settle.setInterval(self.SETTLE_MS)
        self._settle.timeout.connect(self.request)
        self._soon = QTimer(self)   # the end of this turn: the signals of one step (x, then y) asked once
        self._soon.setSingleShot(True)
        self._soon.setInterval(0)
        self._soon.timeout.connect(self.request)
        self._last_change = float("-inf")   # time.monotonic() of the last view change
        self._burst_start = float("-inf")   # ... and of the first after a quiet spell

    # --- geometry --------------------------------------------------------------------------
    def _bounds_rect(self) -> QRectF:
        if self.bounds is None:
            return QRectF()
        x0, x1, y0, y1 = self.bounds
        return QRectF(x0, y0, x1 - x0, y1 - y0)

    def boundingRect(self) -> QRectF:  # noqa: N802
        rect = self._bounds_rect()
        if self.image_key is not None:  # a picture of a wider view may be shown scaled
            rect = rect.united(self.image_key.qrect())
        return rect

    def dataBounds(self, ax: int, frac: float = 1.0, orthoRange=None):  # noqa: N802 (pyqtgraph's auto-range)
        if self.bounds is None:
            return None
        return (self.bounds[0], self.bounds[1]) if ax == 0 else (self.bounds[2], self.bounds[3])

    def pixelPadding(self) -> float:  # noqa: N802 (as a curve item of a 1-pixel cosmetic pen pads its bounds)
        return 0.7072

    # --- what to draw ----------------------------------------------------------------------
    def set_groups(self, groups: Sequence[PathGroup], version: int) -> None:
        """Other labels or colours: drawn again (the current picture stays until the new one comes), asked for once
        the turn that changed them and its paint are over (:data:`SETTLE_MS`): asked at once, the worker held Python's
        lock against that turn's paints (a hand label's gap 77-100 ms with the map shown, 10,000 runs)."""
        self.groups = tuple(groups)
        self.version = version
        if self.image is None:
            self.request()
        else:
            self._settle.start()

    def current_key(self) -> ViewKey | None:
        """The view as it is now: where data lands in the window, and the view box's pixels."""
        vb = self.getViewBox()
        if vb is None or self.scene() is None:
            return None
        views = self.scene().views()
        if not views:
            return None
        view = views[0]
        tr = self.deviceTransform(view.viewportTransform())   # data -> the window's pixels
        if tr is None or tr.m12() or tr.m21():
            return None   # rotated or sheared: never in a plot
        box = vb.mapRectToDevice(vb.boundingRect())
        if box is None or box.width() < 2 or box.height() < 2:
            return None
        left, top = int(np.floor(box.left())), int(np.floor(box.top()))
        w, h = int(np.ceil(box.right())) - left, int(np.ceil(box.bottom())) - top
        return ViewKey((tr.m11(), tr.dx(), tr.m22(), tr.dy()), left, top, w, h,
                       float(view.devicePixelRatioF()), self.version)

    def view_changed(self) -> None:
        """Pan, zoom or resize: a new picture at once when there is none yet; at the end of this turn for the changes
        just after a quiet spell (:data:`FOLLOW_MS`); else once the view has settled (the steps of a drag)."""
        now = time.monotonic()
        if now - self._last_change >= self.SETTLE_MS / 1000:
            self._burst_start = now
        self._last_change = now
        if self.image is None:
            self.request()
        elif self._soon.isActive():
            pass   # another signal of the same turn
        elif now - self._burst_start <= self.FOLLOW_MS / 1000 and not self._settle.isActive():
            self._soon.start()   # a newer view than the one being drawn: the renderer drops the older
        else:
            self._settle.start()

    def request(self) -> None:
        key = self.current_key()
        if key is None or key == self.wanted or (key == self.image_key and self.wanted is None):
            return
        self._settle.stop()
        self._soon.stop()
        self.wanted = key
        self._renderer.request(self.groups, key)

    def shows_current_view(self) -> bool:
        """The picture shown was drawn for the view as it is now (no newer one pending)."""
        key = self.current_key()
        return self.image is not None and key is not None and key == self.image_key and self.wanted is None

    def wait(self, timeout_s: float = 10.0) -> bool:
        return self._renderer.wait(timeout_s)

    def _on_delivered(self, generation: int, key: ViewKey, image: QImage) -> None:
        if generation != self._renderer.generation and self.image is not None:
            return   # overtaken; the newer picture is on its way
        self.prepareGeometryChange()
        self.image, self.image_key = image, key
        if key == self.wanted:
            self.wanted = None
        self.renders += 1
        self.update()

    def stop(self) -> None:
        """No more pictures (the item leaves the plot)."""
        self._settle.stop()
        self._soon.stop()
        self._renderer.cancel()

    # --- painting --------------------------------------------------------------------------
    def paint(self, p: QPainter, opt, widget=None) -> None:
        if widget is None:   # an export (scene rendered onto a file's painter): draw now, whole
            self._paint_export(p)
            return
        key = self.image_key
        if self.image is None or key is None:
            return
        tr = p.transform()
        p.save()
        if (tr.m11(), tr.dx(), tr.m22(), tr.dy()) == key.affine and not (tr.m12() or tr.m21()):
            p.resetTransform()   # the view the picture was drawn for: pixel on pixel
            p.drawImage(QPointF(key.left, key.top), self.image)
        else:   # panned, zoomed or resized since: the picture scaled to where its data is now, until the next one
            target = tr.mapRect(key.qrect())
            p.resetTransform()
            p.drawImage(target, self.image)
        p.restore()

    def _paint_export(self, p: QPainter) -> None:
        vb = self.getViewBox()
        if vb is None:
            return
        view = vb.viewRect()
        engine = p.paintEngine()
        if engine is not None and engine.type() == QPaintEngine.Type.SVG:
            for group in self.groups:   # vectors: each label's paths, with the label's transparency
                pen = pg.mkPen(group.colour, width=1)
                p.setPen(pen)
                p.drawPath(pg.functions.arrayToQPath(group.x, group.y, connect="finite"))
            return
        target = p.transform().mapRect(view)
        key = ViewKey.covering(view, max(1, round(target.width())), max(1, round(target.height())), 1.0, self.version)
        image = render_paths(self.groups, key)
        p.save()
        p.resetTransform()
        p.drawImage(target, image)
        p.restore()
