"""Rename in place: a line edit laid over a block's title on the view (not an item in the scene).

Enter or leaving the field commits, Escape cancels; ``committed(block id, new name)`` fires only
for a real, non-empty change.
"""
from __future__ import annotations

from PySide6.QtCore import QEvent, Qt, Signal
from PySide6.QtWidgets import QLineEdit


class NameEditor(QLineEdit):
    committed = Signal(str, str)

    def __init__(self, parent):
        super().__init__(parent)
        self.setObjectName("blockNameEditor")
        self.hide()
        self._block = None
        self._old = ""

    def start(self, block_id: str, name: str, rect) -> None:
        """Edit ``name`` of ``block_id`` over view rectangle ``rect``."""
        self._block, self._old = block_id, name
        self.setGeometry(rect)
        self.setText(name)
        self.selectAll()
        self.show()
        self.raise_()
        self.setFocus(Qt.FocusReason.OtherFocusReason)

    @property
    def block_id(self):
        return self._block

    def finish(self, keep: bool) -> None:
        if self._block is None:
            return
        block, self._block = self._block, None
        new = self.text().strip()
        self.hide()
        self.parentWidget().setFocus()
        if keep and new and new != self._old:
            self.committed.emit(block, new)

    def keyPressEvent(self, event) -> None:
        if event.key() in (Qt.Key.Key_Return, Qt.Key.Key_Enter):
            self.finish(True)
        elif event.key() == Qt.Key.Key_Escape:
            self.finish(False)
        else:
            super().keyPressEvent(event)

    def event(self, event) -> bool:
        if event.type() == QEvent.Type.FocusOut and self._block is not None:
            self.finish(True)
        return super().event(event)
