"""The light/dark look shared by every plot panel: axes, legend and the warning text colour."""

from __future__ import annotations

import pyqtgraph as pg
from PySide6.QtGui import QColor


def theme_axes(plot_item, text: QColor) -> None:
    """Left and bottom axis lines and tick labels in the palette's text colour."""
    for name in ("left", "bottom"):
        ax = plot_item.getAxis(name)
        ax.setPen(pg.mkPen(text))
        ax.setTextPen(pg.mkPen(text))


def theme_legend(legend, base: QColor, text: QColor, alpha: int) -> None:
    """A legend on a translucent patch of the background, its labels in the text colour."""
    bg = QColor(base)
    bg.setAlpha(alpha)
    legend.setBrush(pg.mkBrush(bg))
    legend.setLabelTextColor(text)


def warning_colour(base: QColor) -> QColor:
    """Red warning text readable on the given background (dark red on light, pale red on dark)."""
    return QColor("#b3261e") if base.lightness() > 128 else QColor("#ffb4a9")
