"""Quick add: a small popup at the cursor where typing part of a kind's name narrows a list.

Enter (or a click) picks the highlighted kind and emits ``chosen(kind name)``; Escape closes.
It is a plain child widget of the canvas view, never an item in the scene.
"""
from __future__ import annotations

from PySide6.QtCore import QEvent, Qt, Signal
from PySide6.QtGui import QPalette
from PySide6.QtWidgets import QFrame, QLineEdit, QListWidget, QListWidgetItem, QVBoxLayout

from layerloom.core.kinds import KINDS
from layerloom.gui import theme

ROWS = 8


def kind_matches(text: str) -> list[str]:
    """Kind names whose name or title contains ``text`` (case-insensitive); prefix matches first."""
    t = text.strip().lower()
    names = [k for k, spec in KINDS.items() if k != "Motif" or t]
    if not t:
        return names
    hits = [k for k in names if t in k.lower() or t in KINDS[k].title.lower()]
    return sorted(hits, key=lambda k: (not (k.lower().startswith(t) or KINDS[k].title.lower().startswith(t)),
                                       hits.index(k)))


class QuickAdd(QFrame):
    """The popup. ``chosen`` carries a kind name; ``closed`` fires however it ends."""

    chosen = Signal(str)
    closed = Signal()

    def __init__(self, parent):
        super().__init__(parent)
        self.setObjectName("quickAdd")
        self.setFrameShape(QFrame.Shape.StyledPanel)
        self.setAutoFillBackground(True)
        self.edit = QLineEdit(self)
        self.edit.setPlaceholderText("Add a block: type a kind")
        self.edit.setClearButtonEnabled(True)
        self.list = QListWidget(self)
        self.list.setFocusPolicy(Qt.FocusPolicy.NoFocus)
        self.list.setUniformItemSizes(True)
        palette = self.list.palette()
        palette.setColor(QPalette.ColorRole.Highlight, theme.ACCENT)
        palette.setColor(QPalette.ColorRole.HighlightedText, theme.CARD)
        self.list.setPalette(palette)
        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.setSpacing(3)
        layout.addWidget(self.edit)
        layout.addWidget(self.list)
        self.edit.textChanged.connect(self._filter)
        self.edit.installEventFilter(self)
        self.list.itemClicked.connect(lambda item: self._pick(item))
        self.setFixedWidth(240)
        self._filter("")

    def open_at(self, x: int, y: int, text: str = "") -> None:
        """Show at view point (x, y), kept inside the view, with ``text`` already typed."""
        parent = self.parentWidget()
        self.adjustSize()
        x = max(0, min(x, parent.width() - self.width()))
        y = max(0, min(y, parent.height() - self.height()))
        self.move(x, y)
        self.edit.setText(text)
        self._filter(text)
        self.show()
        self.raise_()
        self.edit.setFocus(Qt.FocusReason.PopupFocusReason)

    def _filter(self, text: str) -> None:
        self.list.clear()
        for name in kind_matches(text):
            item = QListWidgetItem(f"{KINDS[name].title}   ·  {name}" if KINDS[name].title != name else name)
            item.setData(Qt.ItemDataRole.UserRole, name)
            self.list.addItem(item)
        if self.list.count():
            self.list.setCurrentRow(0)
        rows = min(max(self.list.count(), 1), ROWS)
        self.list.setFixedHeight(rows * (self.list.sizeHintForRow(0) if self.list.count() else 18) + 6)
        self.adjustSize()

    def _pick(self, item) -> None:
        if item is None:
            return
        name = item.data(Qt.ItemDataRole.UserRole)
        self.dismiss()
        self.chosen.emit(name)

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
