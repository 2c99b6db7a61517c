"""A block on the canvas: a plain card with notched ports, a glyph, two lines of text and a cost bar.
A motif instance's card has a second edge behind it and a third line: the MACs of all its repeats.
A card may hold chips (folded norm and activation blocks, :mod:`layerloom.gui.canvas.chips`) on its
second line. Far out, where its text would be too small to read, a card draws only its name and
output shape, at :data:`theme.READABLE_PX` on screen, as long as they fit in it.

The item holds only what it draws (texts, port counts, status, cost share); the canvas scene sets
that state from the design and its analysis. ``paint`` only draws.
"""
from __future__ import annotations

from functools import lru_cache
from math import ceil
from typing import NamedTuple

from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QBrush, QFont, QFontMetricsF, QPainterPath, QPen
from PySide6.QtWidgets import QGraphicsItem, QStyle

from layerloom.core.values import few_marks
from layerloom.gui import theme
from layerloom.gui.canvas.glyphs import glyph_for

W, H = theme.CARD_WIDTH, theme.CARD_HEIGHT
TITLE_LEFT = theme.PADDING + theme.GLYPH_SIZE + 6.0
TITLE_BASE, DETAIL_BASE = 21.0, 39.0
MOTIF_BASES = (18.0, 32.0, 45.0)  # title, detail and cost (with the shape) lines of a motif instance's card
_MARGIN = theme.STATUS_OUTLINE + 4.0
BOUNDS = QRectF(-_MARGIN, -_MARGIN, W + 2 * _MARGIN, H + 2 * _MARGIN)
CARD_RECT = QRectF(0, 0, W, H)
SELECTED = QStyle.StateFlag.State_Selected
ELIDE = Qt.TextElideMode.ElideRight
PORT_REACH = 9.0  # how near (scene pixels) a pointer must come to a notch to take hold of it
STACK_OFFSET = 4.0  # a motif instance shows a second card edge this far behind it: blocks inside


class CardState(NamedTuple):
    """Everything a card shows; equal states draw the same picture."""

    kind: str
    title: str
    detail: str
    shape: str
    n_in: int
    n_out: int
    status: str  # "", "note", "warning" or "error"
    cost_share: float  # 0..1, rounded to a pixel of the bar
    cost: str = ""  # a third line (a motif instance's MACs), or none
    chips: tuple = ()  # labels of the chips on the second line, in data-flow order


def port_y(index: int, count: int) -> float:
    """Vertical place of port ``index`` of ``count`` along a card edge."""
    return H * (index + 1) / (count + 1)


@lru_cache(maxsize=64)
def card_path(n_in: int, n_out: int) -> QPainterPath:
    """The card outline with a V notch cut into the left edge per input and the right per output."""
    body = QPainterPath()
    body.addRoundedRect(QRectF(0, 0, W, H), theme.CARD_RADIUS, theme.CARD_RADIUS)
    cuts = QPainterPath()
    d, h = theme.NOTCH_DEPTH, theme.NOTCH_HALF
    for x, inward, count in ((0.0, d, n_in), (W, -d, n_out)):
        for i in range(count):
            y = port_y(i, count)
            cuts.moveTo(x - inward * 0.2, y - h)
            cuts.lineTo(x + inward, y)
            cuts.lineTo(x - inward * 0.2, y + h)
            cuts.closeSubpath()
    return body.subtracted(cuts).simplified() if n_in or n_out else body


_fonts: dict[str, QFont] = {}
_metrics: dict[str, QFontMetricsF] = {}


def font(which: str) -> QFont:
    """A theme font (``title``, ``detail``, ``figure``, ``badge``), made once and shared: do not modify."""
    f = _fonts.get(which)
    if f is None:
        f = _fonts[which] = getattr(theme, f"{which}_font")()
    return f


@lru_cache(maxsize=256)
def sized_font(which: str, pixels: int) -> QFont:
    """Theme font ``which`` at ``pixels`` pixels (em), for far-out text."""
    f = QFont(font(which))
    f.setPixelSize(max(int(pixels), 1))
    return f


def pixel_size(which: str) -> float:
    """The em size in pixels of theme font ``which`` at 100 %."""
    f = font(which)
    return f.pixelSize() if f.pixelSize() > 0 else f.pointSizeF() * metrics(which).fontDpi() / 72.0


class TextLine(NamedTuple):
    """One line of text as a card draws it at some zoom (scene units): what the readability test measures."""

    shown: str  # the text drawn (elided when it did not fit)
    full: str  # the whole text
    pixels: float  # em size in scene pixels
    font: QFont
    origin: QPointF  # baseline start


@lru_cache(maxsize=4096)
def advance(which: str, text: str) -> float:
    """Width of ``text`` in the theme font ``which`` (remembered: the same shapes recur everywhere)."""
    return metrics(which).horizontalAdvance(text)


def metrics(which: str) -> QFontMetricsF:
    """Metrics of :func:`font` ``(which)``, made once (a Qt application must exist)."""
    m = _metrics.get(which)
    if m is None:
        m = _metrics[which] = QFontMetricsF(font(which))
    return m


def far_zoom() -> float:
    """Below this zoom a card's title would be smaller than :data:`theme.READABLE_PX` on screen."""
    return theme.READABLE_PX / pixel_size("title")


def summary_zoom() -> float:
    """Below this zoom a card has no room for both its name and its shape at a readable size."""
    return theme.READABLE_PX * 2 * LINE_STEP / (H - 4)


LINE_STEP = 1.2  # far-out lines are this many em apart
CHIP_RISE = 10.5  # a chip's top sits this far above the second line's baseline
CHIP_HEIGHT = 14.0
ARROW = 9.0  # room for the ▸ before each chip


def chip_width(label: str) -> float:
    return advance("detail", label) + 6.0


class BlockItem(QGraphicsItem):
    """One block's card. Its position is the card's top-left corner, as stored in the design."""

    def __init__(self, block_id: str, state: CardState):
        super().__init__()
        self.block_id = block_id
        self.state = state
        self._title = self._detail = self._cost = ""
        self.name_shown = ""  # the name as drawn: marks stacked beyond a line's height left out
        self._shape_row = DETAIL_BASE
        self.chip_items: list = []  # ChipItems (children), set by the scene, placed by the card
        self._chip_x: list[float] = []  # left edge of each chip on the second line
        self._far: tuple[float, list[TextLine]] | None = None  # zoom and lines last laid out far out
        self._texts()
        # no ItemSendsScenePositionChanges: it costs three calls into Python per move, and Tidy moves
        # a thousand cards at once; the scene follows a drag itself (CanvasScene.follow_moved_cards)
        self.setFlags(QGraphicsItem.GraphicsItemFlag.ItemIsMovable | QGraphicsItem.GraphicsItemFlag.ItemIsSelectable)
        self.setCacheMode(QGraphicsItem.CacheMode.DeviceCoordinateCache)
        self.setAcceptHoverEvents(False)

    # ----- state
    def set_state(self, state: CardState) -> None:
        if state == self.state:
            return
        self.state = state
        self._far = None
        self._texts()
        self.update()

    def set_chips(self, items: list) -> None:
        """The chip items of this card, in data-flow order (they are placed on its second line)."""
        self.chip_items = items
        self._place_chips()

    def _place_chips(self) -> None:
        for item, x in zip(self.chip_items, self._chip_x):
            item.setPos(x, DETAIL_BASE - CHIP_RISE)

    def _texts(self) -> None:
        """Elide the texts once; the output shape shares the second line, or moves up beside the
        title when the settings need the whole line (a motif's name)."""
        s = self.state
        self.name_shown = name = few_marks(s.title)
        room = W - TITLE_LEFT - theme.PADDING
        shape_w = advance("figure", s.shape) + 8 if s.shape else 0
        detail_room = W - 2 * theme.PADDING - theme.NOTCH_DEPTH
        if s.cost:  # three lines: the title, the detail, the cost beside the shape
            self._shape_row = MOTIF_BASES[2]
            self._title = metrics("title").elidedText(name, ELIDE, room)
            self._detail = metrics("detail").elidedText(s.detail, ELIDE, detail_room)
            self._cost = metrics("figure").elidedText(s.cost, ELIDE, detail_room - shape_w)
            return
        title_w = advance("title", name)
        widths = [chip_width(label) for label in s.chips]
        chips_w = sum(ARROW + w for w in widths)
        detail_w = advance("detail", s.detail) + chips_w
        self._shape_row = DETAIL_BASE
        if detail_w + shape_w > detail_room and title_w + shape_w <= room:
            self._shape_row = TITLE_BASE
        else:
            detail_room -= shape_w
        if self._shape_row == TITLE_BASE:
            room -= shape_w
        self._title = name if title_w <= room else metrics("title").elidedText(name, ELIDE, room)
        text_room = max(detail_room - chips_w, 24.0)
        self._detail = s.detail if detail_w <= detail_room else metrics("detail").elidedText(s.detail, ELIDE, text_room)
        x = theme.PADDING + advance("detail", self._detail)
        self._chip_x = []
        for w in widths:
            self._chip_x.append(x + ARROW)
            x += ARROW + w
        self._place_chips()

    def far_lines(self, zoom: float) -> list[TextLine]:
        """The lines a card draws at ``zoom`` below :func:`far_zoom`: its name and, when there is
        room for both, its output shape, each at :data:`theme.READABLE_PX` on screen; none when even
        the name no longer fits in the card's height (the view shows stage summaries there)."""
        if self._far is not None and self._far[0] == zoom:
            return self._far[1]
        px = ceil(theme.READABLE_PX / zoom)
        step = px * LINE_STEP
        lines: list[TextLine] = []
        room = W - 2 * theme.PADDING
        texts = [("title", self.name_shown)]
        shape = self.state.shape or (self.state.detail if self.state.kind == "Input" else "")  # an Input's is its detail
        if shape and 2 * step + 4 <= H:
            texts.append(("figure", shape))
        if step + 4 <= H:
            top = (H - step * len(texts)) / 2
            for i, (which, text) in enumerate(texts):
                f = sized_font(which, px)
                shown = QFontMetricsF(f).elidedText(text, ELIDE, room)
                lines.append(TextLine(shown, text, float(px), f, QPointF(theme.PADDING, top + step * i + px)))
        self._far = (zoom, lines)
        return lines

    # ----- geometry
    def boundingRect(self) -> QRectF:
        return BOUNDS

    def shape(self) -> QPainterPath:
        """The card with a little room beyond its edges, so the notches can be taken hold of."""
        p = QPainterPath()
        p.addRect(QRectF(-4.0, 0, W + 8.0, H))
        return p

    def input_point(self, port: int) -> tuple[float, float]:
        """Scene ``(x, y)`` where a wire into input ``port`` ends (just short of its notch; a card
        is a top-level item, so its position is its scene position)."""
        p = self.pos()
        return p.x() - theme.WIRE_GAP, p.y() + port_y(port, max(self.state.n_in, port + 1))

    def output_point(self, port: int) -> tuple[float, float]:
        p = self.pos()
        return p.x() + W + theme.WIRE_GAP, p.y() + port_y(port, max(self.state.n_out, port + 1))

    def input_pos(self, port: int) -> QPointF:
        """:meth:`input_point` as a QPointF."""
        return QPointF(*self.input_point(port))

    def output_pos(self, port: int) -> QPointF:
        return QPointF(*self.output_point(port))

    def title_rect(self) -> QRectF:
        return QRectF(TITLE_LEFT - 3, 6.0, W - TITLE_LEFT - theme.PADDING + 6, 20.0)

    def port_at(self, local: QPointF, reach: float = PORT_REACH) -> tuple[str, int] | None:
        """``("in", i)`` or ``("out", i)`` when ``local`` (item coordinates) is at a notch."""
        for side, x, count in (("in", 0.0, self.state.n_in), ("out", W, self.state.n_out)):
            if abs(local.x() - x) > reach + theme.NOTCH_DEPTH:
                continue
            for i in range(count):
                if abs(local.y() - port_y(i, count)) <= reach:
                    return side, i
        return None

    def nearest_input(self, local_y: float, taken: set[int]) -> int | None:
        """The input port nearest ``local_y``, preferring ports with no wire yet."""
        ports = range(self.state.n_in)
        free = [p for p in ports if p not in taken] or list(ports)
        return min(free, key=lambda p: abs(port_y(p, self.state.n_in) - local_y)) if free else None

    # ----- drawing
    def paint(self, painter, option, widget=None) -> None:
        s = self.state
        lod = option.levelOfDetailFromTransform(painter.worldTransform())
        status = theme.SEVERITY_COLOURS.get(s.status) if s.status in ("error", "warning") else None
        if lod < theme.SHAPE_MIN_DETAIL:  # a speck: a plain rectangle in the status colour
            painter.fillRect(CARD_RECT, status if status is not None else theme.CARD_EDGE)
            return
        path = card_path(s.n_in, s.n_out)
        selected = bool(option.state & SELECTED)
        if selected:
            painter.setPen(QPen(theme.ACCENT, 2.0))
            painter.setBrush(Qt.BrushStyle.NoBrush)
            painter.drawRoundedRect(QRectF(-3.5, -3.5, W + 7, H + 7), theme.CARD_RADIUS + 3, theme.CARD_RADIUS + 3)
        painter.setBrush(QBrush(theme.CARD))
        if s.kind == "Motif":
            painter.setPen(QPen(theme.CARD_EDGE, theme.OUTLINE))
            painter.drawRoundedRect(CARD_RECT.translated(STACK_OFFSET, STACK_OFFSET), theme.CARD_RADIUS, theme.CARD_RADIUS)
        painter.setPen(QPen(status, theme.STATUS_OUTLINE) if status is not None else QPen(theme.CARD_EDGE, theme.OUTLINE))
        painter.drawPath(path)
        if s.cost_share > 0:
            inset = theme.CARD_RADIUS
            track = QRectF(inset, H - theme.COST_BAR_HEIGHT - 2.0, W - 2 * inset, theme.COST_BAR_HEIGHT)
            painter.setPen(Qt.PenStyle.NoPen)
            painter.setBrush(theme.COST_TRACK)
            painter.drawRect(track)
            painter.setBrush(theme.COST_BAR)
            painter.drawRect(QRectF(track.left(), track.top(), max(track.width() * s.cost_share, 1.5), track.height()))
        if lod < far_zoom():
            painter.setPen(theme.TEXT)
            for line in self.far_lines(lod):
                painter.setFont(line.font)
                painter.drawText(line.origin, line.shown)
            return
        painter.save()
        painter.translate(theme.PADDING, 9.0)
        painter.setPen(QPen(theme.GLYPH, 1.1))
        painter.setBrush(Qt.BrushStyle.NoBrush)
        painter.drawPath(glyph_for(s.kind, theme.GLYPH_SIZE))
        painter.restore()
        title_base, detail_base, cost_base = MOTIF_BASES if s.cost else (TITLE_BASE, DETAIL_BASE, 0.0)
        painter.setPen(theme.TEXT)
        painter.setFont(font("title"))
        painter.drawText(QPointF(TITLE_LEFT, title_base), self._title)
        painter.setPen(theme.TEXT_MUTED)
        painter.setFont(font("detail"))
        painter.drawText(QPointF(theme.PADDING, detail_base), self._detail)
        for x in self._chip_x:
            painter.drawText(QPointF(x - ARROW + 1.0, detail_base), "▸")
        if s.cost:
            painter.setFont(font("figure"))
            painter.drawText(QPointF(theme.PADDING, cost_base), self._cost)
        if s.shape:
            painter.setPen(theme.TEXT)
            painter.setFont(font("figure"))
            x = W - theme.PADDING - theme.NOTCH_DEPTH - advance("figure", s.shape)
            painter.drawText(QPointF(x, self._shape_row), s.shape)
