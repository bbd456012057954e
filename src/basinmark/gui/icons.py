"""Our own SVG icons (resources/icons), tinted with the palette's text colour so they suit light and dark themes."""

from __future__ import annotations

from functools import lru_cache
from pathlib import Path

from PySide6.QtCore import QByteArray, QRectF, Qt
from PySide6.QtGui import QColor, QGuiApplication, QIcon, QPainter, QPalette, QPixmap
from PySide6.QtSvg import QSvgRenderer

_SIZES = (16, 24, 32, 48)


def icon_dir() -> Path:
    """The package's own ``resources/icons`` (shipped in the wheel as package data)."""
    return Path(__file__).resolve().parents[1] / "resources" / "icons"


def icon_names() -> list[str]:
    return sorted(p.stem for p in icon_dir().glob("*.svg"))


def _tint(role: QPalette.ColorRole = QPalette.ColorRole.ButtonText) -> QColor:
    app = QGuiApplication.instance()
    return app.palette().color(role) if app is not None else QColor("black")


@lru_cache(maxsize=256)
def _icon(name: str, rgba: str, disabled_rgba: str) -> QIcon:
    path = icon_dir() / f"{name}.svg"
    if not path.is_file():
        return QIcon()
    text = path.read_text(encoding="utf-8")
    icon = QIcon()
    for colour, mode in ((rgba, QIcon.Mode.Normal), (disabled_rgba, QIcon.Mode.Disabled)):
        renderer = QSvgRenderer(QByteArray(text.replace("currentColor", colour).encode("utf-8")))
        for size in _SIZES:
            pix = QPixmap(size, size)
            pix.fill(Qt.GlobalColor.transparent)
            p = QPainter(pix)
            renderer.render(p, QRectF(0, 0, size, size))
            p.end()
            icon.addPixmap(pix, mode)
    return icon


def icon(name: str) -> QIcon:
    """The icon ``resources/icons/<name>.svg`` in the current palette's colours (empty QIcon if missing)."""
    normal = _tint().name()
    app = QGuiApplication.instance()
    disabled = (app.palette().color(QPalette.ColorGroup.Disabled, QPalette.ColorRole.ButtonText).name()
                if app is not None else "#888888")
    return _icon(name, normal, disabled)
