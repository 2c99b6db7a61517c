"""The shelf along the canvas's bottom edge: Parts (tiles of block kinds, grouped by family, to drag
up onto the canvas) and Findings as its second tab.

A tile carries its kind's name as MIME type ``KIND_MIME`` (UTF-8), which the canvas accepts as
a drop. The filter box keeps the tiles whose title, kind name or family contains the typed text
(``1x1`` also finds ``1×1``).
"""
from __future__ import annotations

from PySide6.QtCore import QMimeData, QPoint, QSize, Qt
from PySide6.QtGui import QDrag, QPainter, QPen, QPixmap
from PySide6.QtWidgets import (QApplication, QFrame, QGridLayout, QHBoxLayout, QLabel, QLineEdit, QScrollArea,
                               QTabWidget, QVBoxLayout, QWidget)

from layerloom.core.kinds import KINDS
from layerloom.gui import theme
from layerloom.gui.canvas import KIND_MIME
from layerloom.gui.canvas.glyphs import glyph_for
from layerloom.gui.document import Document
from layerloom.gui.findings_list import FindingsList

FAMILY_ORDER = ("Ends", "Convolution", "Norm & activation", "Pooling & resizing", "Joins", "Dense", "Plumbing")
"""Families left to right in the order data usually meets them; other families follow."""
HIDDEN_KINDS = {"Motif"}  # an instance needs a motif of the design; it is added from the motif, not the shelf
TILE_ROWS = 3
GLYPH_PX = 16


def _fold(text: str) -> str:
    return text.lower().replace("×", "x")


def families() -> dict[str, list[str]]:
    """Kind names shown on the shelf, by family, families in :data:`FAMILY_ORDER`."""
    found: dict[str, list[str]] = {}
    for name, kind in KINDS.items():
        if name not in HIDDEN_KINDS:
            found.setdefault(kind.family, []).append(name)
    rank = {f: i for i, f in enumerate(FAMILY_ORDER)}
    return dict(sorted(found.items(), key=lambda kv: rank.get(kv[0], len(rank))))


class GlyphMark(QWidget):
    """A kind's glyph, stroked in the house glyph colour."""

    def __init__(self, kind: str, parent=None):
        super().__init__(parent)
        self.kind = kind
        self.setFixedSize(GLYPH_PX + 4, GLYPH_PX + 4)

    def paintEvent(self, event) -> None:
        p = QPainter(self)
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        p.setPen(QPen(theme.GLYPH, 1.2))
        p.translate(2, 2)
        p.drawPath(glyph_for(self.kind, float(GLYPH_PX)))


class PartTile(QFrame):
    """One kind on the shelf: its glyph and title; drag it onto the canvas."""

    def __init__(self, kind: str, parent=None):
        super().__init__(parent)
        self.kind = kind
        spec = KINDS[kind]
        self.setObjectName("part_tile")
        self.setCursor(Qt.CursorShape.OpenHandCursor)
        example = spec.summary(spec.defaults)
        self.setToolTip(f"{spec.title} ({kind})" + (f" — {example} by default" if example else "")
                        + "\nDrag onto the canvas to add it.")
        row = QHBoxLayout(self)
        row.setContentsMargins(6, 3, 10, 3)
        row.setSpacing(6)
        row.addWidget(GlyphMark(kind))
        self.label = QLabel(spec.title)
        row.addWidget(self.label)
        self._press: QPoint | None = None

    def matches(self, text: str) -> bool:
        spec = KINDS[self.kind]
        needle = _fold(text.strip())
        return any(needle in _fold(s) for s in (spec.title, self.kind, spec.family))

    def mime_data(self) -> QMimeData:
        data = QMimeData()
        data.setData(KIND_MIME, self.kind.encode("utf-8"))
        data.setText(self.kind)
        return data

    def mousePressEvent(self, event) -> None:
        if event.button() == Qt.MouseButton.LeftButton:
            self._press = event.position().toPoint()
        super().mousePressEvent(event)

    def mouseMoveEvent(self, event) -> None:
        if self._press is None or not event.buttons() & Qt.MouseButton.LeftButton:
            return
        if (event.position().toPoint() - self._press).manhattanLength() < QApplication.startDragDistance():
            return
        self._press = None
        drag = QDrag(self)
        drag.setMimeData(self.mime_data())
        picture = QPixmap(self.size() * self.devicePixelRatioF())
        picture.setDevicePixelRatio(self.devicePixelRatioF())
        picture.fill(Qt.GlobalColor.transparent)
        self.render(picture)
        drag.setPixmap(picture)
        drag.setHotSpot(QPoint(12, self.height() // 2))
        drag.exec(Qt.DropAction.CopyAction)

    def mouseReleaseEvent(self, event) -> None:
        self._press = None
        super().mouseReleaseEvent(event)


class FamilyGroup(QWidget):
    """A family's heading above its tiles, laid out in columns of :data:`TILE_ROWS`."""

    def __init__(self, family: str, kinds: list[str], parent=None):
        super().__init__(parent)
        heading = QLabel(family)
        heading.setObjectName("family_heading")
        self.tiles = [PartTile(k) for k in kinds]
        self.grid = QGridLayout()
        self.grid.setSpacing(4)
        col = QVBoxLayout(self)
        col.setContentsMargins(0, 0, 12, 0)
        col.setSpacing(4)
        col.addWidget(heading)
        col.addLayout(self.grid)
        col.addStretch(1)
        self.show_matching("")

    def show_matching(self, text: str) -> int:
        """Show only tiles matching ``text``, packed without gaps; returns how many are shown."""
        for tile in self.tiles:
            self.grid.removeWidget(tile)
        shown = [t for t in self.tiles if t.matches(text)]
        for i, tile in enumerate(shown):
            self.grid.addWidget(tile, i % TILE_ROWS, i // TILE_ROWS)
        for tile in self.tiles:
            tile.setVisible(tile in shown)
        self.setVisible(bool(shown))
        return len(shown)


class PartsPanel(QWidget):
    """The Parts tab: a filter box and the family groups side by side."""

    def __init__(self, parent=None):
        super().__init__(parent)
        self.filter = QLineEdit()
        self.filter.setObjectName("parts_filter")
        self.filter.setPlaceholderText("Filter parts (e.g. 1x1, pool, add)")
        self.filter.setClearButtonEnabled(True)
        self.filter.setMaximumWidth(320)
        self.filter.textChanged.connect(self.apply_filter)
        self.empty = QLabel("No part matches.")
        self.empty.setObjectName("muted")
        self.empty.hide()
        self.groups = [FamilyGroup(f, kinds) for f, kinds in families().items()]

        strip = QWidget()
        strip.setObjectName("parts_strip")
        row = QHBoxLayout(strip)
        row.setContentsMargins(0, 0, 0, 0)
        for g in self.groups:
            row.addWidget(g)
        row.addWidget(self.empty)
        row.addStretch(1)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QFrame.Shape.NoFrame)
        scroll.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAsNeeded)
        scroll.setWidget(strip)

        col = QVBoxLayout(self)
        col.setContentsMargins(6, 6, 6, 4)
        col.addWidget(self.filter)
        col.addWidget(scroll, 1)

    @property
    def tiles(self) -> dict[str, PartTile]:
        return {t.kind: t for g in self.groups for t in g.tiles}

    def apply_filter(self, text: str) -> None:
        shown = sum(g.show_matching(text) for g in self.groups)
        self.empty.setVisible(shown == 0)


class Shelf(QTabWidget):
    """Parts and Findings, as tabs; the Findings tab's title counts errors and warnings."""

    def __init__(self, document: Document, parent=None):
        super().__init__(parent)
        self.setObjectName("shelf")
        self.setDocumentMode(True)
        self.parts = PartsPanel()
        self.findings = FindingsList(document)
        self.addTab(self.parts, "Parts")
        self.addTab(self.findings, "Findings")
        self.findings.counts_changed.connect(self._count)
        self._count(*self.findings.counts())

    def _count(self, errors: int, warnings: int) -> None:
        parts = [f"{n} {word}{'s' if n != 1 else ''}" for n, word in ((errors, "error"), (warnings, "warning")) if n]
        self.setTabText(1, "Findings · " + ", ".join(parts) if parts else "Findings")

    def show_findings(self) -> None:
        self.setCurrentWidget(self.findings)

    def sizeHint(self) -> QSize:
        return QSize(800, 170)

