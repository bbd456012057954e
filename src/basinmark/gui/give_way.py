"""The window marks the moments a person acts, so that its background work gives way (core/give_way.py).

An application-wide event filter (:func:`install`) marks keys, mouse buttons and panels shown; the workers (the map's
measuring, index and picture; the starting-conditions analysis; the reading of a set's cached segments) call
:func:`give_way` between pieces of their work.
"""

from __future__ import annotations

from basinmark.core.give_way import (MAX_WAIT_S, QUIET_S, acting, give_way, holding, imports_give_way,
                                     imports_giving_way, reset)

__all__ = ["MAX_WAIT_S", "QUIET_S", "OWN_WORK", "acting", "give_way", "holding", "imports_give_way",
           "imports_giving_way", "install", "reset"]

#: a widget property: clicks and keys on a view whose own workers' pictures the person waits for (the map) do not
#: hold back the workers
OWN_WORK = "basinmark_own_work"


def _on_own_view(obj) -> bool:
    """Whether ``obj`` is, or lies inside, a widget marked :data:`OWN_WORK`."""
    while obj is not None:
        if obj.property(OWN_WORK):
            return True
        obj = obj.parent()
    return False


def install(app) -> None:
    """Mark the person's actions on ``app`` (a QApplication): keys, mouse buttons, a panel shown."""
    from PySide6.QtCore import QEvent, QObject
    from PySide6.QtWidgets import QDockWidget, QWidget

    # (not the wheel: it zooms the map and scrolls plots, and the map's new picture is what the person waits for)
    kinds = {QEvent.Type.KeyPress, QEvent.Type.MouseButtonPress, QEvent.Type.MouseButtonDblClick}
    show = QEvent.Type.Show

    class _Watcher(QObject):
        last: tuple | None = None   # (type, time) of the input event last looked at

        def eventFilter(self, obj, event) -> bool:  # noqa: N802 (Qt's name)
            kind = event.type()
            if kind == show:   # a panel brought to the front (not every small widget: a map's labels as it draws)
                # the panel's own widget: Qt shows a dock's children before the dock itself, so the dock's Show event
                # came after the panel's showEvent had done its work (the summary's, at 10,000 runs)
                if isinstance(obj, QDockWidget) or (isinstance(obj, QWidget) and isinstance(obj.parent(), QDockWidget)):
                    acting()
                return False
            if kind not in kinds or not isinstance(obj, QWidget):
                return False   # (Qt shows keys and clicks to the window's QWindow first: it says nothing of where)
            key = (kind, event.timestamp())
            if key != self.last:   # the widget it is for; the same event passed on to the parents is not looked at
                self.last = key
                if not _on_own_view(obj):
                    acting()
            return False

    if getattr(app, "_give_way_watcher", None) is None:
        app._give_way_watcher = _Watcher(app)
        app.installEventFilter(app._give_way_watcher)
