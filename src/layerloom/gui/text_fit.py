"""Labels that keep a panel its width whatever names the design holds.

A word-wrapped label is as wide as its longest word, so a 300-character block name made a dock (or
the whole window) wider than the screen and cut its fields off. :func:`breakable` lets such a run
break (a zero-width space every :data:`RUN` characters); :class:`WrappedLabel` applies it to its
plain text, and :class:`ElidedLabel` shows one line cut with "…" to the width it has, the whole
text in its hover text.
"""
from __future__ import annotations

import re

from PySide6.QtCore import QSize, Qt
from PySide6.QtWidgets import QLabel

from layerloom.core.values import one_line

RUN = 24  # characters without a space before a break is allowed
_LONG_RUN = re.compile(rf"\S{{{RUN}}}(?=\S)")


def breakable(text: str) -> str:
    """``text`` with a zero-width space after every ``RUN`` characters of a run without spaces."""
    return _LONG_RUN.sub(lambda m: m.group(0) + "\u200b", text)


class WrappedLabel(QLabel):
    """Plain text wrapped over lines, long names included."""

    def __init__(self, text: str = "", parent=None):
        super().__init__(parent)
        self.setTextFormat(Qt.TextFormat.PlainText)
        self.setWordWrap(True)
        self.setText(text)

    def setText(self, text: str) -> None:  # Qt override
        super().setText(breakable(text))


class ElidedLabel(QLabel):
    """One line of plain text (line breaks shown as ⏎) cut with "…" to the label's width; the whole
    text in the hover text."""

    def __init__(self, text: str = "", parent=None):
        super().__init__(parent)
        self.setTextFormat(Qt.TextFormat.PlainText)
        self._full = ""
        self.setText(text)

    def text(self) -> str:  # Qt override: the whole text (the label draws it cut to its width)
        return self._full

    def setText(self, text: str) -> None:  # Qt override
        self._full = text
        self.setToolTip(text)
        self._fit()
        self.updateGeometry()

    def sizeHint(self) -> QSize:  # Qt override: as wide as the whole text, if the layout has room
        margins = self.contentsMargins()
        width = self.fontMetrics().horizontalAdvance(self._full) + margins.left() + margins.right() + 2
        return QSize(width, super().sizeHint().height())

    def minimumSizeHint(self) -> QSize:  # Qt override: it may shrink to "…"
        return QSize(self.fontMetrics().horizontalAdvance("…") * 2, super().minimumSizeHint().height())

    def resizeEvent(self, event) -> None:  # Qt override
        super().resizeEvent(event)
        self._fit()

    def _fit(self) -> None:
        shown = self.fontMetrics().elidedText(one_line(self._full), Qt.TextElideMode.ElideRight, max(self.width(), 1))
        super().setText(shown)
