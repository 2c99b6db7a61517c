"""Quick add: a small popup on the canvas where typing narrows a list of choices.

What it lists comes from a ``provider(text) → [(label, value), …]``, best first (the canvas offers
kinds and motifs, see :mod:`layerloom.core.quick_add_words`, or block names when wiring). Enter (or a
click) picks the highlighted line and emits ``chosen(value)``; Escape closes. The list is as tall
as its lines (up to :data:`ROWS`) and as wide as its longest line, so no text is cut, and the popup
stays inside the view: beside the selected block when there is one (never over it), else at the
cursor. It is a
plain child widget of the canvas view, never an item in the scene.
"""
from __future__ import annotations

from PySide6.QtCore import QEvent, QRect, Qt, Signal
from PySide6.QtGui import QPalette
from PySide6.QtWidgets import QAbstractItemView, QFrame, QLabel, QLineEdit, QListWidget, QListWidgetItem, QVBoxLayout

from layerloom.gui import theme

ROWS = 10  # lines shown before the list scrolls
MIN_WIDTH = 240
GAP = 12  # pixels between the popup and the block it opens beside


class QuickAdd(QFrame):
    """The popup. ``chosen`` carries the value of the line picked; ``closed`` fires however it ends."""

    chosen = Signal(object)
    closed = Signal()

    def __init__(self, parent, provider, placeholder: str = "Add a block: type a kind",
                 empty_text: str = "no match — try conv, bn, 1x1, add, gap, se"):
        super().__init__(parent)
        self.provider = provider
        self.setObjectName("quickAdd")
        self.setFrameShape(QFrame.Shape.StyledPanel)
        self.setAutoFillBackground(True)
        self.edit = QLineEdit(self)
        self.edit.setPlaceholderText(placeholder)
        self.edit.setClearButtonEnabled(True)
        self.list = QListWidget(self)
        self.list.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        self.list.setUniformItemSizes(True)
        self.list.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.list.setVerticalScrollMode(QAbstractItemView.ScrollMode.ScrollPerItem)
        palette = self.list.palette()
        palette.setColor(QPalette.ColorRole.Highlight, theme.ACCENT)
        palette.setColor(QPalette.ColorRole.HighlightedText, theme.CARD)
        self.list.setPalette(palette)
        self.empty = QLabel(empty_text)
        self.empty.setObjectName("muted")
        self.empty.setContentsMargins(4, 2, 4, 2)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.setSpacing(3)
        layout.addWidget(self.edit)
        layout.addWidget(self.list)
        layout.addWidget(self.empty)
        self.edit.textChanged.connect(self._filter)
        self.edit.installEventFilter(self)
        self.list.itemClicked.connect(lambda item: self._pick(item))
        self._anchor = QRect()  # view rectangle to open beside (empty: a point, its top-left)

    # ----- opening
    def open_at(self, x: int, y: int, text: str = "") -> None:
        """Show with its top-left at view point (x, y), kept inside the view, ``text`` already typed."""
        self._open(QRect(x, y, 0, 0), text)

    def open_beside(self, rect: QRect, text: str = "") -> None:
        """Show to the right of view rectangle ``rect`` (a selected card); with no room there, below
        it, else to its left; always inside the view."""
        self._open(rect, text)

    def _open(self, anchor: QRect, text: str) -> None:
        self._anchor = anchor
        self.edit.blockSignals(True)
        self.edit.setText(text)
        self.edit.blockSignals(False)
        self._filter(text)
        self.show()
        self.raise_()
        self.edit.setFocus(Qt.FocusReason.PopupFocusReason)

    def _place(self) -> None:
        view = self.parentWidget().rect()
        a, w, h = self._anchor, self.width(), self.height()
        if a.width() and a.right() + GAP + w <= view.right():  # to the right, level with the card
            x, y = a.right() + GAP, a.top()
        elif a.width() and a.bottom() + GAP + h <= view.bottom():  # below it, off the row it ends
            x, y = a.right() - w, a.bottom() + GAP
        elif a.width():
            x, y = a.left() - GAP - w, a.top()
        else:
            x, y = a.x(), a.y()
        self.move(max(0, min(x, view.width() - w)), max(0, min(y, view.height() - h)))

    # ----- the list
    def _filter(self, text: str) -> None:
        self.list.clear()
        lines = self.provider(text)
        for label, value in lines:
            item = QListWidgetItem(label)
            item.setData(Qt.ItemDataRole.UserRole, value)
            self.list.addItem(item)
        if lines:
            self.list.setCurrentRow(0)
        self.list.setVisible(bool(lines))
        self.empty.setVisible(not lines)
        self._fit(lines)

    def _fit(self, lines) -> None:
        """Make the list exactly as tall as its lines (up to ROWS) and as wide as the longest one."""
        n = len(lines)
        row = self.list.sizeHintForRow(0) if n else self.list.fontMetrics().height() + 4
        frame = 2 * self.list.frameWidth()
        scrolls = n > ROWS
        bar = self.list.verticalScrollBar().sizeHint().width() if scrolls else 0
        widest = max((self.list.fontMetrics().horizontalAdvance(label) for label, _ in lines), default=0)
        inner = max(widest + 16 + bar + frame, self.empty.sizeHint().width() + 12, MIN_WIDTH - 8)
        limit = max(self.parentWidget().width() - 16, MIN_WIDTH)
        self.setFixedWidth(min(inner + 8, limit))
        self.list.setFixedHeight(min(n, ROWS) * row + frame)
        self.adjustSize()
        self._place()

    def labels(self) -> list[str]:
        """The lines shown, in order."""
        return [self.list.item(i).text() for i in range(self.list.count())]

    def _pick(self, item) -> None:
        if item is None:
            return
        value = item.data(Qt.ItemDataRole.UserRole)
        self.dismiss()
        self.chosen.emit(value)

    def dismiss(self) -> None:
        if self.isVisible():
            self.hide()
            self.closed.emit()

    def eventFilter(self, obj, event) -> bool:
        if obj is self.edit and event.type() == QEvent.Type.KeyPress:
            key = event.key()
            if key in (Qt.Key.Key_Return, Qt.Key.Key_Enter):
                self._pick(self.list.currentItem())
                return True
            if key == Qt.Key.Key_Escape:
                self.dismiss()
                return True
            if key in (Qt.Key.Key_Down, Qt.Key.Key_Up) and self.list.count():
                step = 1 if key == Qt.Key.Key_Down else -1
                self.list.setCurrentRow((self.list.currentRow() + step) % self.list.count())
                return True
        if obj is self.edit and event.type() == QEvent.Type.FocusOut and self.isVisible():
            if not self.list.underMouse():
                self.dismiss()
        return super().eventFilter(obj, event)
