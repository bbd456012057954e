"""Pre-rendered shaded spheres for the molecule view.

Drawing a radial gradient per atom per frame is slow with QPainter's raster
engine; rendering each (colour, pixel size, device pixel ratio) once into a
QPixmap and blitting it is much faster, and needs no OpenGL.  Qt has no
ready-made sprite cache for this, hence this small one.
"""

from __future__ import annotations

from PySide6.QtCore import QPointF, Qt
from PySide6.QtGui import QBrush, QColor, QPainter, QPen, QPixmap, QRadialGradient

_MAX_ENTRIES = 4096


class SpriteCache:
    """Shaded ball pixmaps keyed by colour, diameter in logical pixels and device pixel ratio."""

    def __init__(self) -> None:
        self._cache: dict[tuple, QPixmap] = {}

    def __len__(self) -> int:
        return len(self._cache)

    def clear(self) -> None:
        self._cache.clear()

    def ball(self, rgb: tuple[int, int, int], diameter: int, dpr: float = 1.0, rim: QColor | None = None) -> QPixmap:
        """A ball of ``diameter`` logical pixels (at least 2), rendered at ``dpr`` for sharp high-DPI output.

        ``rim``: outline colour (default: a darker shade of the ball); a light rim keeps dark
        elements visible on a dark background.
        """
        diameter = max(2, int(diameter))
        key = (tuple(rgb), diameter, round(float(dpr), 2), None if rim is None else rim.rgba())
        pix = self._cache.get(key)
        if pix is None:
            if len(self._cache) >= _MAX_ENTRIES:
                self._cache.clear()
            pix = _render_ball(rgb, diameter, float(dpr), rim)
            self._cache[key] = pix
        return pix


def _render_ball(rgb: tuple[int, int, int], diameter: int, dpr: float, rim: QColor | None = None) -> QPixmap:
    size = max(2, int(round(diameter * dpr)))
    pix = QPixmap(size, size)
    pix.fill(Qt.GlobalColor.transparent)
    base = QColor(*rgb)
    r = size / 2.0
    grad = QRadialGradient(QPointF(r, r), r, QPointF(r * 0.62, r * 0.55))
    grad.setColorAt(0.0, base.lighter(175))
    grad.setColorAt(0.45, base)
    grad.setColorAt(1.0, base.darker(230))
    p = QPainter(pix)
    p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
    p.setBrush(QBrush(grad))
    p.setPen(QPen(base.darker(300) if rim is None else rim, max(1.0, size / 40.0)))
    inset = max(0.5, size / 80.0)
    p.drawEllipse(QPointF(r, r), r - inset, r - inset)
    p.end()
    pix.setDevicePixelRatio(dpr)
    return pix
