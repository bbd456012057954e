"""Plot axes drawn once into a picture that the scene keeps, and drawn again only when they change.

Replaying an axis's tick labels was most of every repaint of a plot: the traces' eight shown axes took 22 of
26 ms of a repaint with nothing changed, and with kept pictures the whole repaint took 4-5 ms (cProfile, a 2,000-run
set).  The window repaints the traces several times as a load ends and at every change of run, and the summary and
map the same way.  The plotting library calls ``update()`` or changes the axis's geometry whenever its range,
ticks, label, pens or size change, and the scene then draws the picture again.

The picture covers the item's bounding rectangle, and whatever lies outside it would be cut off.  The library's
rectangle ends exactly on the axis line, half of which lies outside, so the scene is given the rectangle grown by
:data:`EDGE_PX` on every side.  The library itself still sees its own rectangle (it decides with it which tick labels
fit and clips text to it), so the same labels are drawn as without a kept picture.  tests/test_gui_axis_cache.py
compares the pixels both ways.  The pictures live in Qt's pixmap cache, whose limit the first kept axis raises so
that the window's axes all fit.
"""

from __future__ import annotations

import pyqtgraph as pg
from PySide6.QtGui import QPixmapCache
from PySide6.QtWidgets import QGraphicsItem

#: pixels added around an axis's bounding rectangle for the scene: the outer half of its edge lines and their
#: antialiasing
EDGE_PX = 2
#: Qt's pixmap cache limit (kB) set by the first kept axis: the default 10 MB holds the traces' axes but not, with
#: the summary and the map, every plot's at a device pixel ratio of 2; a picture that does not fit is drawn anew
#: at every repaint, as without keeping
PIXMAP_CACHE_KB = 96 * 1024


class KeptAxis(pg.AxisItem):
    """A :class:`pyqtgraph.AxisItem` that the scene keeps as a device-pixel picture until it changes."""

    def __init__(self, orientation: str, **kwargs) -> None:
        self._own_rect = False
        super().__init__(orientation, **kwargs)
        self.setCacheMode(QGraphicsItem.CacheMode.DeviceCoordinateCache)
        if QPixmapCache.cacheLimit() < PIXMAP_CACHE_KB:
            QPixmapCache.setCacheLimit(PIXMAP_CACHE_KB)

    def boundingRect(self):
        rect = super().boundingRect()
        if self._own_rect:
            return rect
        return rect.adjusted(-EDGE_PX, -EDGE_PX, EDGE_PX, EDGE_PX)

    def generateDrawSpecs(self, p):
        self._own_rect = True   # which labels fit: decided on the library's own rectangle
        try:
            return super().generateDrawSpecs(p)
        finally:
            self._own_rect = False

    def drawPicture(self, p, axisSpec, tickSpecs, textSpecs):
        self._own_rect = True   # text clipped to the library's own rectangle
        try:
            return super().drawPicture(p, axisSpec, tickSpecs, textSpecs)
        finally:
            self._own_rect = False


def kept_axes() -> dict[str, KeptAxis]:
    """Kept left and bottom axes, for a plot's ``axisItems`` (the plots show no others: an axis given there is shown,
    so the right and top ones are left to the library, hidden)."""
    return {side: KeptAxis(side) for side in ("left", "bottom")}
