"""A finding's badge: a small pill on the block's card at the port at fault (or its top edge).

It reads ``256 ≠ 128`` when a finding has two clashing numbers (else its code); hovering explains
every finding it stands for, and its context menu offers their mends.
"""
from __future__ import annotations

from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QPen
from PySide6.QtWidgets import QGraphicsItem, QMenu

from layerloom.core.findings import Finding
from layerloom.gui import theme
from layerloom.gui.canvas.block_item import W, font, metrics, port_y


class BadgeItem(QGraphicsItem):
    """Badge for ``findings`` (worst first) of one block, at input ``port`` or, if None, on top."""

    def __init__(self, parent, port: int | None, findings: list[Finding], mender):
        super().__init__(parent)
        self.port = port
        self.findings = findings
        self._mender = mender  # has .mends(finding) -> [Mend] and .apply_mend(mend)
        worst = findings[0]
        self.severity = worst.severity
        extra = f"  +{len(findings) - 1}" if len(findings) > 1 else ""
        self.text = worst.badge + extra
        fm = metrics("badge")
        w, h = fm.horizontalAdvance(self.text) + 12.0, fm.height() + 3.0
        n_in = parent.state.n_in
        if port is not None and port < n_in:
            y = port_y(port, n_in)
            above = port < n_in / 2 or n_in == 1  # upper ports above their wire, lower ones below
            self._rect = QRectF(-w - 2.0, y - h - 6.0 if above else y + 6.0, w, h)
        else:
            if hasattr(parent, "card"):  # a chip's badge rides its card's top edge, above the chip
                self._rect = QRectF(0.0, -parent.y() - h / 2, w, h)
            else:
                self._rect = QRectF(W - w - 8.0, -h / 2, w, h)  # riding the card's top edge
        self.setToolTip("\n".join(f"{f.code}: {f.message}" for f in findings))
        self.setCacheMode(QGraphicsItem.CacheMode.DeviceCoordinateCache)
        self.setAcceptHoverEvents(True)

    def boundingRect(self) -> QRectF:
        return self._rect.adjusted(-1, -1, 1, 1)

    def mends(self):
        """``(finding, mend)`` pairs for everything this badge stands for."""
        return [(f, m) for f in self.findings for m in self._mender.mends(f)]

    def menu(self, parent=None) -> QMenu:
        """The badge's context menu: one action per mend (applied as one undoable edit)."""
        menu = QMenu(parent)
        pairs = self.mends()
        for _, m in pairs:
            action = menu.addAction("Mend: " + m.label)
            action.triggered.connect(lambda checked=False, m=m: self._mender.apply_mend(m))
        if not pairs:
            menu.addAction("No mend offered").setEnabled(False)
        return menu

    def contextMenuEvent(self, event) -> None:
        view = event.widget().parent() if event.widget() is not None else None
        self.menu(view).exec(event.screenPos())
        event.accept()

    def paint(self, painter, option, widget=None) -> None:
        colour = theme.SEVERITY_COLOURS[self.severity]
        note = self.severity == "note"
        painter.setPen(QPen(colour, 1.0) if note else Qt.PenStyle.NoPen)
        painter.setBrush(theme.CARD if note else colour)
        r = self._rect
        painter.drawRoundedRect(r, r.height() / 2, r.height() / 2)
        if option.levelOfDetailFromTransform(painter.worldTransform()) < theme.TEXT_MIN_DETAIL:
            return
        painter.setPen(theme.TEXT_MUTED if note else theme.BADGE_TEXT)
        painter.setFont(font("badge"))
        painter.drawText(r, Qt.AlignmentFlag.AlignCenter, self.text)

    def anchor(self) -> QPointF:
        """Scene point at the badge's centre (for tests and tours)."""
        return self.mapToScene(self._rect.center())
