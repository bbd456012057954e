"""Figures to PNG and SVG, with or without a window: shared by the Export menu and the command line.

PNG: the widget is rendered into a QImage of exactly the requested pixel size.  SVG: the widget is
painted into a :class:`QSvgGenerator`, so lines and text stay vectors; items cached as pixmaps for
speed on screen are switched to uncached while the SVG is painted.  Both work on Qt's offscreen
platform (no OpenGL anywhere).
"""

from __future__ import annotations

import os
import sys
from pathlib import Path
from typing import Any, Mapping

from basinmark.core.errors import BasinmarkError

FIGURE_SUFFIXES = (".png", ".svg")
DEFAULT_SIZE = (1000, 800)


class FigureError(BasinmarkError):
    """A figure cannot be made as asked (bad size or suffix, unknown monitor, unwritable file)."""


def ensure_app():
    """The running QApplication, or a new one; offscreen when there is no display to draw on."""
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance()
    if app is not None:
        return app
    headless = sys.platform.startswith("linux") and not (os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))
    if headless and not os.environ.get("QT_QPA_PLATFORM"):
        os.environ["QT_QPA_PLATFORM"] = "offscreen"
    return QApplication([sys.argv[0] if sys.argv else "basinmark"])


MAX_FIGURE_SIDE = 8000


def _check(path: str | Path, size: tuple[int, int] | None) -> tuple[Path, str]:
    path = Path(path).expanduser()
    suffix = path.suffix.lower()
    if suffix not in FIGURE_SUFFIXES:
        raise FigureError(f"{path}: a figure is written as .png or .svg, not {path.suffix or 'no suffix'}")
    if not path.parent.exists():
        raise FigureError(f"{path}: the folder {path.parent} does not exist")
    # 8000 px a side is 256 MB of pixels drawn in memory; more is a slip of the finger (our own limit)
    if size is not None and not (16 <= size[0] <= MAX_FIGURE_SIDE and 16 <= size[1] <= MAX_FIGURE_SIDE):
        raise FigureError(f"a figure size of {size[0]}x{size[1]} pixels is out of range (16 to {MAX_FIGURE_SIDE} "
                          "each)")
    return path, suffix


def parse_size(text: str) -> tuple[int, int]:
    """'1200x900' -> (1200, 900)."""
    try:
        w, h = (int(v) for v in text.lower().replace("×", "x").split("x"))
    except ValueError:
        raise FigureError(f"size {text!r} is not WIDTHxHEIGHT in pixels, e.g. 1200x900") from None
    _check("x.png", (w, h))
    return w, h


def _uncached(widget):
    """Context: every graphics item of a view drawn without its pixmap cache (for vector output)."""
    from contextlib import contextmanager

    from PySide6.QtWidgets import QGraphicsItem, QGraphicsView

    @contextmanager
    def ctx():
        views = [widget] if isinstance(widget, QGraphicsView) else widget.findChildren(QGraphicsView)
        saved = []
        for v in views:
            if v.scene() is None:
                continue
            for item in v.scene().items():
                if item.cacheMode() != QGraphicsItem.CacheMode.NoCache:
                    saved.append((item, item.cacheMode()))
                    item.setCacheMode(QGraphicsItem.CacheMode.NoCache)
        try:
            yield
        finally:
            for item, mode in saved:
                item.setCacheMode(mode)
    return ctx()


def save_widget(widget, path: str | Path, size: tuple[int, int] | None = None) -> Path:
    """Render ``widget`` to ``path`` (.png or .svg) at ``size`` pixels (default: its size on screen).

    A pyqtgraph view is laid out again at the asked size and its scene painted (so a plot docked in the
    window exports at any size); any other widget is painted as it is, resized first when it is alone.
    """
    from PySide6.QtCore import QRect, QRectF, QSize, Qt
    from PySide6.QtGui import QImage, QPainter, QPalette
    from PySide6.QtSvg import QSvgGenerator
    from PySide6.QtWidgets import QApplication

    path, suffix = _check(path, size)
    central = getattr(widget, "centralWidget", None)
    scene_mode = hasattr(widget, "scene") and central is not None and not callable(central)
    if not scene_mode and size is not None and widget.parentWidget() is None:
        widget.resize(*size)
    if not widget.isVisible() and widget.parentWidget() is None:
        widget.setAttribute(Qt.WidgetAttribute.WA_DontShowOnScreen, True)
        widget.show()
    QApplication.processEvents()
    w, h = size if (scene_mode and size is not None) else (widget.width(), widget.height())
    background = widget.backgroundBrush().color() if scene_mode else widget.palette().color(QPalette.ColorRole.Base)
    old_geometry = central.geometry() if scene_mode else None

    def paint(painter: QPainter) -> None:
        if scene_mode:
            target = QRectF(0, 0, w, h)
            painter.fillRect(target, background)
            central.setGeometry(target)  # lay the plots out at the asked size
            QApplication.processEvents()
            widget.scene().render(painter, target, target)
        else:
            widget.render(painter)

    try:
        if suffix == ".png":
            image = QImage(w, h, QImage.Format.Format_ARGB32_Premultiplied)
            image.fill(background)
            painter = QPainter(image)
            painter.setRenderHint(QPainter.RenderHint.Antialiasing, True)
            paint(painter)
            painter.end()
            if not image.save(str(path), "PNG"):
                raise FigureError(f"{path}: the image could not be written")
        else:
            gen = QSvgGenerator()
            gen.setFileName(str(path))
            gen.setSize(QSize(w, h))
            gen.setViewBox(QRect(0, 0, w, h))
            gen.setTitle("basinmark figure")
            with _uncached(widget):
                painter = QPainter()
                if not painter.begin(gen):
                    raise FigureError(f"{path}: the SVG file could not be written")
                paint(painter)
                painter.end()
    finally:
        if old_geometry is not None:
            central.setGeometry(old_geometry)
    if not path.is_file():
        raise FigureError(f"{path}: the figure was not written")
    return path


def map_figure(tset, rules: Any, labels: Mapping[str, str], x: str | None = None, y: str | None = None,
               size: tuple[int, int] = DEFAULT_SIZE, title: str | None = None):
    """A stand-alone map canvas of ``tset`` (no window): paths coloured by ``labels`` (run -> label)."""
    from basinmark.gui.map_view import MapCanvas, MapData, map_axes

    ensure_app()
    axes = {a.key: a for a in map_axes(rules)}
    if len(axes) < 2:
        raise FigureError("the map needs two monitors and the rules define fewer than two")
    keys = list(axes)
    x = x or keys[0]
    y = y or keys[1]
    for name in (x, y):
        if name not in axes:
            raise FigureError(f"no monitor {name!r} in the rules; choose from: {', '.join(keys)}")
    canvas = MapCanvas(max_points=400)
    canvas.resize(*size)
    canvas.set_data(MapData.build(tset, axes[x], axes[y]), labels, rules)
    if title:
        canvas.plot_item.setTitle(title)
    return canvas


def save_map(tset, rules: Any, labels: Mapping[str, str], path: str | Path, x: str | None = None,
             y: str | None = None, size: tuple[int, int] = DEFAULT_SIZE, title: str | None = None) -> Path:
    """Render the map of all runs to a PNG or SVG file of ``size`` pixels."""
    _check(path, size)
    canvas = map_figure(tset, rules, labels, x, y, size, title)
    try:
        return save_widget(canvas, path, size)
    finally:
        canvas.close()
        canvas.deleteLater()
