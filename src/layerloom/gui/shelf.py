"""The shelf along the canvas's bottom edge: Parts (tiles of block kinds, grouped by family, and a
Motifs group, to drag up onto the canvas) and Findings as its second tab.

A kind's tile carries its name as MIME type ``KIND_MIME`` (UTF-8); a motif's tile carries
``library:<key>`` (a motif of the library, defined in the design when dropped) or ``design:<name>``
(a motif the open design defines) as ``MOTIF_MIME``. The canvas accepts both as drops. The filter
box (in the shelf's tab bar) keeps the tiles whose title, name or family contains the typed text
(``1x1`` also finds ``1×1``). Each family's heading runs in before its tiles and all are placed
like words on lines, so at 1280×800 every part shows without scrolling (the shelf scrolls
vertically when it is smaller); a tile shows its title without a bracketed qualifier, which its
tooltip keeps. Clicking a family's heading folds its tiles away.
"""
from __future__ import annotations

from PySide6.QtCore import QMimeData, QPoint, QSize, Qt
from PySide6.QtGui import QDrag, QPainter, QPen, QPixmap
from PySide6.QtWidgets import (QApplication, QFrame, QHBoxLayout, QLabel, QLineEdit, QScrollArea,
                               QTabWidget, QToolButton, QVBoxLayout, QWidget)

from layerloom.core.kinds import KINDS
from layerloom.core.motif_library import LIBRARY
from layerloom.gui import theme
from layerloom.gui.canvas import KIND_MIME, MOTIF_MIME
from layerloom.gui.canvas.glyphs import glyph_for
from layerloom.core.design import Design
from layerloom.gui.document import Document
from layerloom.gui.findings_list import FindingsList
from layerloom.gui.flow_layout import FlowLayout

FAMILY_ORDER = ("Ends", "Convolution", "Norm & activation", "Pooling & resizing", "Joins", "Dense", "Plumbing")
"""Families left to right in the order data usually meets them; other families follow."""
HIDDEN_KINDS = {"Motif", "Unmapped"}  # an instance needs a motif of the design; an unmapped operation comes from import
TILE_GAP = 3
FAMILY_GAP = 12  # more pixels before a family's heading than between tiles
GLYPH_PX = 14
FILTER_WIDTH = 260


def _fold(text: str) -> str:
    return text.lower().replace("×", "x")


def tile_text(title: str) -> str:
    """What a tile shows: ``title`` without a closing qualifier in brackets (``Add (residual)`` →
    ``Add``), which its tooltip and the filter keep."""
    head, bracket, _ = title.rpartition(" (")
    return head if bracket and title.endswith(")") and head else title


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


class DragTile(QFrame):
    """A tile with a glyph and a title that is dragged onto the canvas carrying :meth:`mime_data`."""

    mime_type = ""

    def __init__(self, glyph: str, title: str, payload: str, words: tuple[str, ...], tip: str, parent=None):
        super().__init__(parent)
        self.payload, self._words = payload, (title, *words)
        self.setObjectName("part_tile")
        self.setCursor(Qt.CursorShape.OpenHandCursor)
        self.setToolTip(tip + "\nDrag onto the canvas to add it.")
        row = QHBoxLayout(self)
        row.setContentsMargins(3, 0, 6, 0)
        row.setSpacing(4)
        row.addWidget(GlyphMark(glyph))
        self.label = QLabel(tile_text(title))
        row.addWidget(self.label)
        self._press: QPoint | None = None

    def matches(self, text: str) -> bool:
        needle = _fold(text.strip())
        return any(needle in _fold(s) for s in (self.label.text(), *self._words))

    def mime_data(self) -> QMimeData:
        data = QMimeData()
        data.setData(self.mime_type, self.payload.encode("utf-8"))
        data.setText(self.payload)
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


class PartTile(DragTile):
    """One kind on the shelf: its glyph and title."""

    mime_type = KIND_MIME

    def __init__(self, kind: str, parent=None):
        spec = KINDS[kind]
        example = spec.summary(spec.defaults)
        super().__init__(kind, spec.title, kind, (kind, spec.family),
                         f"{spec.title} ({kind})" + (f" — {example} by default" if example else ""), parent)
        self.kind = kind


class MotifTile(DragTile):
    """A motif on the shelf: ``library:<key>`` for a library motif, ``design:<name>`` for one of the design's."""

    mime_type = MOTIF_MIME

    def __init__(self, payload: str, title: str, tip: str, parent=None):
        source, _, name = payload.partition(":")
        super().__init__("Motif", title, payload, (name, "motif", source), tip, parent)


def motif_tiles(design) -> list[MotifTile]:
    """Tiles for the library's motifs, then for the motifs ``design`` defines."""
    tiles = [MotifTile(f"library:{m.key}", m.title, f"{m.title} — {m.description}.\nParameters: "
                       + ", ".join(f"{p} = {v}" for p, v in m.params.items())) for m in LIBRARY]
    for name, motif in design.motifs.items():
        params = ", ".join(f"{p} = {v}" for p, v in motif.params.items()) or "none"
        tiles.append(MotifTile(f"design:{name}", name, f"Motif {name} of this design (parameters: {params})"))
    return tiles


class FilterBox(QLineEdit):
    """The Parts filter, in the shelf's tab bar: wide enough for its hint, narrower when room is short."""

    def sizeHint(self) -> QSize:  # noqa: N802 (Qt naming)
        return QSize(FILTER_WIDTH, super().sizeHint().height())


class FamilyGroup:
    """A family's heading and its tiles, placed by the shelf's column flow; clicking the heading
    folds the tiles away (and back)."""

    def __init__(self, family: str, tiles: list[DragTile]):
        self.family = family
        self.heading = QToolButton()
        self.heading.setObjectName("family_heading")
        self.heading.setText(family.replace("&", "&&"))  # a lone & would mark a shortcut key
        self.heading.setCheckable(True)
        self.heading.setChecked(True)
        self.heading.setAutoRaise(True)
        self.heading.setToolButtonStyle(Qt.ToolButtonStyle.ToolButtonTextBesideIcon)
        self.heading.setArrowType(Qt.ArrowType.DownArrow)
        self.heading.setToolTip(f"Fold or unfold {family}")
        self.heading.toggled.connect(self._unfold)
        self.tiles = tiles
        self._shown: list[DragTile] = []
        self._shown_text = ""

    @property
    def folded(self) -> bool:
        return not self.heading.isChecked()

    @property
    def shown(self) -> list[DragTile]:
        """The tiles matching the filter (folded or not)."""
        return self._shown

    def _unfold(self, on: bool) -> None:
        self.heading.setArrowType(Qt.ArrowType.DownArrow if on else Qt.ArrowType.RightArrow)
        self.show_matching(self._shown_text)

    def show_matching(self, text: str) -> int:
        """Show only tiles matching ``text`` (none while folded) and the heading if any matches;
        returns how many match."""
        self._shown_text = text
        self._shown = [t for t in self.tiles if t.matches(text)]
        for tile in self.tiles:
            tile.setVisible(tile in self._shown and not self.folded)
        self.heading.setVisible(bool(self._shown))
        return len(self._shown)


class PartsPanel(QWidget):
    """The Parts tab: each family's heading followed by its tiles, placed like words on lines, and
    the Motifs group (the library's and, with a
    ``document``, the open design's). Its filter box sits in the shelf's tab bar."""

    def __init__(self, document: Document | None = None, parent=None):
        super().__init__(parent)
        self.document = document
        self.filter = FilterBox()
        self.filter.setObjectName("parts_filter")
        self.filter.setPlaceholderText("Filter parts (e.g. 1x1, pool, add)")
        self.filter.setClearButtonEnabled(True)
        self.filter.textChanged.connect(self.apply_filter)
        self.empty = QLabel("No part matches.")
        self.empty.setObjectName("muted")
        self.empty.hide()
        self.groups = [FamilyGroup(f, [PartTile(k) for k in kinds]) for f, kinds in families().items()]
        self.motif_group = FamilyGroup("Motifs", motif_tiles(document.design if document else Design()))

        strip = QWidget()
        strip.setObjectName("parts_strip")
        self.flow = flow = FlowLayout(strip, spacing=TILE_GAP, heading_gap=FAMILY_GAP)
        flow.setContentsMargins(0, 0, 0, 0)
        flow.addWidget(self.empty)
        for g in (*self.groups, self.motif_group):
            flow.add_heading(g.heading)
            for tile in g.tiles:
                flow.addWidget(tile)
            g.show_matching("")
        self.scroll = scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setFrameShape(QFrame.Shape.NoFrame)
        scroll.setHorizontalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        scroll.setVerticalScrollBarPolicy(Qt.ScrollBarPolicy.ScrollBarAsNeeded)
        scroll.setWidget(strip)

        col = QVBoxLayout(self)
        col.setContentsMargins(6, 4, 6, 2)
        col.addWidget(scroll, 1)
        if document is not None:
            document.replaced.connect(self.refresh_motifs)
            document.changed.connect(lambda change: change.motifs and self.refresh_motifs())

    @property
    def tiles(self) -> dict[str, PartTile]:
        return {t.kind: t for g in self.groups for t in g.tiles}

    @property
    def motif_tiles(self) -> dict[str, MotifTile]:
        """Motif tiles by payload (``library:<key>``, ``design:<name>``)."""
        return {t.payload: t for t in self.motif_group.tiles}

    def refresh_motifs(self) -> None:
        """New tiles for the Motifs group (the last in the flow, so they are added at its end)."""
        for tile in self.motif_group.tiles:
            self.flow.removeWidget(tile)
            tile.hide()
            tile.deleteLater()
        self.motif_group.tiles = motif_tiles(self.document.design)
        for tile in self.motif_group.tiles:
            self.flow.addWidget(tile)
        self.apply_filter(self.filter.text())

    def remember_folds(self, settings) -> None:
        """Fold the families folded last time (kept in ``settings``) and keep each change."""
        folded = set(settings.value("parts/folded", [], type=list) or [])
        for group in (*self.groups, self.motif_group):
            group.heading.setChecked(group.family not in folded)
            group.heading.toggled.connect(lambda _on: settings.setValue(
                "parts/folded", [g.family for g in (*self.groups, self.motif_group) if g.folded]))

    def apply_filter(self, text: str) -> None:
        shown = sum(g.show_matching(text) for g in (*self.groups, self.motif_group))
        self.empty.setVisible(shown == 0)


class Shelf(QTabWidget):
    """Parts and Findings, as tabs; the Findings tab's title counts errors and warnings."""

    def __init__(self, document: Document, parent=None):
        super().__init__(parent)
        self.setObjectName("shelf")
        self.setDocumentMode(True)
        self.parts = PartsPanel(document)
        self.findings = FindingsList(document)
        self.addTab(self.parts, "Parts")
        self.addTab(self.findings, "Findings")
        self.setCornerWidget(self.parts.filter, Qt.Corner.TopRightCorner)
        self.currentChanged.connect(lambda _i: self.parts.filter.setVisible(self.currentWidget() is self.parts))

        self.findings.counts_changed.connect(self._count)
        self._count(*self.findings.counts())

    def _count(self, errors: int, warnings: int) -> None:
        parts = [f"{n} {word}{'s' if n != 1 else ''}" for n, word in ((errors, "error"), (warnings, "warning")) if n]
        self.setTabText(1, "Findings · " + ", ".join(parts) if parts else "Findings")

    def show_findings(self) -> None:
        self.setCurrentWidget(self.findings)

    def sizeHint(self) -> QSize:
        return QSize(800, 170)

