"""The analysis area: Summary, Review, Rules and Sensitivity open as tabs beside the traces.

Each view sits in a scroll area inside its dock, so a view that needs more room than the screen offers
scrolls instead of forcing the whole window past the screen's edge; the run table and the status bar keep
their place whichever view is open, and closing a tab gives its room back to the traces.
"""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QDockWidget, QFrame, QScrollArea, QWidget

#: smallest room a view keeps inside its dock (below that it scrolls); small enough for 1366×768
MIN_VIEW_WIDTH = 200
MIN_VIEW_HEIGHT = 120


def scrolling(widget: QWidget, parent: QWidget | None = None) -> QScrollArea:
    """``widget`` inside a frameless scroll area that resizes it to fit whenever there is room."""
    area = QScrollArea(parent)
    area.setObjectName(f"scroll_{widget.objectName() or type(widget).__name__}")
    area.setWidgetResizable(True)
    area.setFrameShape(QFrame.Shape.NoFrame)
    area.setWidget(widget)
    area.setMinimumSize(MIN_VIEW_WIDTH, MIN_VIEW_HEIGHT)
    return area


def add_analysis_dock(window, key: str, title: str, widget: QWidget) -> QDockWidget:
    """A hidden dock named ``dock_<key>`` holding ``widget`` (scrolling), tabbed with the traces and listed
    in ``window.docks`` under ``key``."""
    dock = QDockWidget(title, window)
    dock.setObjectName(f"dock_{key}")
    dock.setWidget(scrolling(widget, dock))
    window.addDockWidget(Qt.DockWidgetArea.RightDockWidgetArea, dock)
    docks = getattr(window, "docks", None)
    traces = docks.get("traces") if isinstance(docks, dict) else None
    if traces is not None:
        window.tabifyDockWidget(traces, dock)
    dock.hide()
    if isinstance(docks, dict):
        docks[key] = dock
    return dock
