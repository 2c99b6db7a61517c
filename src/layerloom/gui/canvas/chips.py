"""A chip: a folded norm or activation block drawn inside the card of the convolution before it.

It is a child item of that card, placed by the card on its second line (``3×3 /2 · 32 ▸ BN ▸ ReLU6``).
Clicking it selects its own block; a finding on it gives it the status outline (and its badge
rides on it). It is never moved on its own: it goes where its card goes. It offers what the scene
and view ask of a block item (``block_id``, ``state``, ports at its card's edges).
"""
from __future__ import annotations

from PySide6.QtCore import QRectF, Qt
from PySide6.QtGui import QPen
from PySide6.QtWidgets import QGraphicsItem, QGraphicsRectItem, QStyle

from layerloom.gui import theme
from layerloom.gui.canvas.block_item import CHIP_HEIGHT, CardState, chip_width, far_zoom, font

SELECTED = QStyle.StateFlag.State_Selected


class ChipItem(QGraphicsRectItem):
    """The chip of block ``block_id``, a child of its card's item. Its rectangle (Qt's own bounding
    rect and hit shape, no Python call per frame) is the chip; ``paint`` draws it."""

    def __init__(self, block_id: str, card, state: CardState):
        super().__init__(card)
        self.block_id = block_id
        self.card = card
        self.state = state
        self.width = 0.0
        self._size()
        self.setPen(QPen(Qt.PenStyle.NoPen))
        self.setFlags(QGraphicsItem.GraphicsItemFlag.ItemIsSelectable)
        self.setZValue(1.0)

    def set_state(self, state: CardState) -> None:
        if state == self.state:
            return
        self.state = state
        self._size()
        self.update()

    def _size(self) -> None:
        self.width = chip_width(self.label)
        self.setRect(QRectF(0, 0, self.width, CHIP_HEIGHT))

    @property
    def label(self) -> str:
        return self.state.chips[0] if self.state.chips else ""

    # ----- what the scene and view ask of a block's item: the card's ports are the chip's
    def input_pos(self, port: int):
        return self.card.input_pos(0)

    def output_pos(self, port: int):
        return self.card.output_pos(0)

    def title_rect(self) -> QRectF:
        """Where its name is edited in place: over the chip."""
        return self.rect()

    def paint(self, painter, option, widget=None) -> None:
        if option.levelOfDetailFromTransform(painter.worldTransform()) < far_zoom():
            return  # far out the card shows only its name and shape
        status = self.state.status
        if option.state & SELECTED:
            pen = QPen(theme.ACCENT, 2.0)
        elif status in ("error", "warning"):
            pen = QPen(theme.SEVERITY_COLOURS[status], theme.STATUS_OUTLINE)
        else:
            pen = QPen(theme.CARD_EDGE, theme.OUTLINE)
        painter.setPen(pen)
        painter.setBrush(theme.CARD)
        rect = self.rect().adjusted(0.5, 0.5, -0.5, -0.5)  # the outline inside the item's rectangle
        painter.drawRoundedRect(rect, CHIP_HEIGHT / 2, CHIP_HEIGHT / 2)
        painter.setPen(theme.TEXT)
        painter.setFont(font("detail"))
        painter.drawText(rect, Qt.AlignmentFlag.AlignCenter, self.label)
