"""A layout that puts its items in a row and wraps onto further rows when the row is too narrow.

Rows of buttons (quick filters, playback controls, a view's settings) use it so that they never force the window
wider than a laptop screen: narrower, they take two or three rows instead of being clipped.  Qt has no such
layout of its own (only an example in its documentation), so this one is ours: items keep their size hints and
order, rows are packed left to right, and the layout reports its height for a given width so that the widgets
around it make room for the extra rows.

An item added with ``stretch=True`` (e.g. a spacer between two groups) takes the room left over in its row.
"""

from __future__ import annotations

from PySide6.QtCore import QMargins, QPoint, QRect, QSize, Qt
from PySide6.QtWidgets import QLayout, QLayoutItem, QSizePolicy, QWidget, QWidgetItem


class FlowLayout(QLayout):
    """Items left to right, wrapping to a new row when the next one would not fit."""

    def __init__(self, parent: QWidget | None = None, h_spacing: int = 4, v_spacing: int = 2) -> None:
        super().__init__(parent)
        self._items: list[QLayoutItem] = []
        self._stretch: set[int] = set()   # ids of items that take the room left in their row
        self._h, self._v = h_spacing, v_spacing
        self.setContentsMargins(0, 0, 0, 0)

    # --- QLayout's interface -------------------------------------------------------------------
    def addItem(self, item: QLayoutItem) -> None:  # noqa: N802
        self._items.append(item)

    def addWidget(self, widget: QWidget, stretch: bool = False) -> None:  # noqa: N802
        """Add ``widget``; with ``stretch`` it widens to fill what its row leaves free."""
        self.addChildWidget(widget)
        item = QWidgetItem(widget)
        self._items.append(item)
        if stretch:
            self._stretch.add(id(item))
        self.invalidate()

    def count(self) -> int:
        return len(self._items)

    def itemAt(self, index: int) -> QLayoutItem | None:  # noqa: N802
        return self._items[index] if 0 <= index < len(self._items) else None

    def takeAt(self, index: int) -> QLayoutItem | None:  # noqa: N802
        if 0 <= index < len(self._items):
            item = self._items.pop(index)
            self._stretch.discard(id(item))
            return item
        return None

    def expandingDirections(self) -> Qt.Orientation:  # noqa: N802
        return Qt.Orientation(0)

    def hasHeightForWidth(self) -> bool:  # noqa: N802
        return True

    def heightForWidth(self, width: int) -> int:  # noqa: N802
        return self._arrange(QRect(0, 0, width, 0), move=False)

    def setGeometry(self, rect: QRect) -> None:  # noqa: N802
        super().setGeometry(rect)
        self._arrange(rect, move=True)

    def sizeHint(self) -> QSize:  # noqa: N802
        """Everything on one row."""
        shown = self._shown()
        w = sum(i.sizeHint().width() for i in shown) + self._h * max(0, len(shown) - 1)
        h = max((i.sizeHint().height() for i in shown), default=0)
        return QSize(w, h).grownBy(self.contentsMargins())

    def minimumSize(self) -> QSize:  # noqa: N802
        """As narrow as the widest single item (one item a row)."""
        size = QSize()
        for item in self._shown():
            size = size.expandedTo(item.minimumSize())
        return size.grownBy(self.contentsMargins())

    # --- the packing ---------------------------------------------------------------------------
    def _shown(self) -> list[QLayoutItem]:
        return [i for i in self._items if not i.isEmpty()]

    def rows(self, width: int) -> list[list[QLayoutItem]]:
        """The items of each row at ``width`` pixels (margins included)."""
        m: QMargins = self.contentsMargins()
        avail = max(1, width - m.left() - m.right())
        rows: list[list[QLayoutItem]] = [[]]
        x = 0
        for item in self._shown():
            w = item.sizeHint().width()
            if rows[-1] and x + self._h + w > avail:
                rows.append([])
                x = 0
            x = w if not rows[-1] else x + self._h + w
            rows[-1].append(item)
        return [r for r in rows if r]

    def _arrange(self, rect: QRect, move: bool) -> int:
        m: QMargins = self.contentsMargins()
        inner = rect.marginsRemoved(m)
        y = inner.y()
        for row in self.rows(rect.width()):
            hints = [i.sizeHint() for i in row]
            height = max(h.height() for h in hints)
            free = max(0, inner.width() - sum(h.width() for h in hints) - self._h * (len(row) - 1))
            stretchers = [i for i in row if id(i) in self._stretch]
            extra = free // len(stretchers) if stretchers else 0
            x = inner.x()
            if move:
                for item, hint in zip(row, hints):
                    w = min(hint.width() + (extra if id(item) in self._stretch else 0), inner.width())
                    policy = item.widget().sizePolicy() if item.widget() is not None else None
                    h = height if policy is not None and policy.verticalPolicy() != QSizePolicy.Policy.Fixed \
                        else hint.height()
                    item.setGeometry(QRect(QPoint(x, y + (height - h) // 2), QSize(w, h)))
                    x += w + self._h
            y += height + self._v
        return y - self._v - inner.y() + m.top() + m.bottom() if y > inner.y() else m.top() + m.bottom()


class FlowRow(QWidget):
    """A widget around a :class:`FlowLayout` that never gets less height than its rows need at its width.

    (Box layouts ask an item's height for its width only while there is room; squeezed, they would give it one
    row's height and cut the others off.)"""

    def resizeEvent(self, event) -> None:  # noqa: N802
        super().resizeEvent(event)
        lay = self.layout()
        if lay is not None:
            need = lay.heightForWidth(event.size().width())
            if need != self.minimumHeight():
                self.setMinimumHeight(need)

    def setLayout(self, layout) -> None:  # noqa: N802
        super().setLayout(layout)
        self.flow = layout


def flow_row(parent: QWidget, widgets, h_spacing: int = 4, v_spacing: int = 2) -> QWidget:
    """A :class:`FlowRow` holding ``widgets`` in a :class:`FlowLayout`.

    An entry ``(widget, True)`` stretches to fill its row."""
    holder = FlowRow(parent)
    flow = FlowLayout(holder, h_spacing, v_spacing)
    for w in widgets:
        if isinstance(w, tuple):
            flow.addWidget(w[0], stretch=w[1])
        else:
            flow.addWidget(w)
    holder.setSizePolicy(QSizePolicy.Policy.Preferred, QSizePolicy.Policy.Preferred)
    holder.flow = flow
    return holder

