"""A layout that places widgets left to right and starts a new row when the width runs out, like
words on a line, with run-in headings; its height follows its width (so a scroll area around it
scrolls vertically)."""
from __future__ import annotations

from PySide6.QtCore import QPoint, QRect, QSize, Qt
from PySide6.QtWidgets import QLayout, QWidget


class FlowLayout(QLayout):
    """Rows of widgets, each at its size hint, ``spacing`` pixels apart both ways; rows top-aligned
    and each as tall as its tallest widget, widgets centred in it. A widget added as a heading
    (:meth:`add_heading`) never ends a row (it moves to the next row with the widget after it) and
    stands ``heading_gap`` pixels from the widget before it."""

    def __init__(self, parent=None, spacing: int = 12, heading_gap: int = 0):
        super().__init__(parent)
        self._items = []
        self._headings: set[int] = set()
        self._gap, self._heading_gap = spacing, heading_gap

    def add_heading(self, widget: QWidget) -> None:
        self._headings.add(id(widget))
        self.addWidget(widget)

    def _is_heading(self, item) -> bool:
        return item.widget() is not None and id(item.widget()) in self._headings

    def addItem(self, item) -> None:  # noqa: N802 (Qt naming)
        self._items.append(item)

    def count(self) -> int:
        return len(self._items)

    def itemAt(self, index: int):  # noqa: N802
        return self._items[index] if 0 <= index < len(self._items) else None

    def takeAt(self, index: int):  # noqa: N802
        return self._items.pop(index) if 0 <= index < len(self._items) else None

    def expandingDirections(self) -> Qt.Orientation:  # noqa: N802
        return Qt.Orientation(0)

    def hasHeightForWidth(self) -> bool:  # noqa: N802
        return True

    def heightForWidth(self, width: int) -> int:  # noqa: N802
        return self._arrange(QRect(0, 0, width, 0), place=False)

    def setGeometry(self, rect: QRect) -> None:  # noqa: N802
        super().setGeometry(rect)
        self._arrange(rect, place=True)

    def sizeHint(self) -> QSize:  # noqa: N802
        return self.minimumSize()

    def minimumSize(self) -> QSize:  # noqa: N802
        size = QSize()
        for item in self._items:
            if not item.isEmpty():
                size = size.expandedTo(item.minimumSize())
        m = self.contentsMargins()
        return size + QSize(m.left() + m.right(), m.top() + m.bottom())

    def _arrange(self, rect: QRect, place: bool) -> int:
        """Lay the items out in ``rect`` (moving them when ``place``); the height used."""
        m = self.contentsMargins()
        area = rect.adjusted(m.left(), m.top(), -m.right(), -m.bottom())
        rows: list[list] = [[]]
        x = area.x()
        shown = [item for item in self._items if not item.isEmpty()]
        for i, item in enumerate(shown):
            width = item.sizeHint().width()
            heading = self._is_heading(item)
            if heading and x > area.x():
                x += self._heading_gap
            need = width
            if heading and i + 1 < len(shown) and not self._is_heading(shown[i + 1]):
                need += self._gap + shown[i + 1].sizeHint().width()
            if rows[-1] and x + need > area.right() + 1:
                rows.append([])
                x = area.x()
            rows[-1].append((item, x))
            x += width + self._gap
        y = area.y()
        for row in rows:
            height = max((item.sizeHint().height() for item, _ in row), default=0)
            if place:
                for item, left in row:
                    hint = item.sizeHint()
                    item.setGeometry(QRect(QPoint(left, y + (height - hint.height()) // 2), hint))
            y += height + self._gap
        return y - self._gap - rect.y() + m.bottom() if shown else m.top() + m.bottom()
