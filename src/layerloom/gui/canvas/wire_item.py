"""A wire on the canvas: a left → right curve whose stroke width grows with the channel count, or,
when cards stand in the way, a route around them (corner points from :mod:`layerloom.core.wire_route`)
drawn with rounded corners.

The path, its padded bounding rect and the label's place are computed in
:meth:`WireItem.set_geometry` (after ``prepareGeometryChange()``), the stroked hit shape on the
first hit test after it; all are cached, and ``paint`` only draws them.
"""
from __future__ import annotations

from math import log2

from PySide6.QtCore import QLineF, QPointF, QRectF, Qt
from PySide6.QtGui import QPainterPath, QPainterPathStroker, QPen
from PySide6.QtWidgets import QGraphicsItem, QStyle

from layerloom.core.graph import Wire
from layerloom.gui import theme
from layerloom.gui.canvas.block_item import advance, font, metrics

HIT_WIDTH = 10.0  # a thin wire is still easy to click
SELECTED = QStyle.StateFlag.State_Selected


def stroke_width(channels: int | None) -> float:
    """Stroke width for a wire carrying ``channels`` channels (or features): log scale, clamped."""
    if not channels:
        return theme.WIRE_MIN_WIDTH
    w = theme.WIRE_MIN_WIDTH + theme.WIRE_WIDTH_PER_DOUBLING * max(log2(channels) - 1.0, 0.0)
    return min(w, theme.WIRE_MAX_WIDTH)


def curve(a: QPointF, b: QPointF) -> QPainterPath:
    """A smooth curve leaving ``a`` and entering ``b`` horizontally."""
    p = QPainterPath(a)
    reach = max(abs(b.x() - a.x()) * 0.5, 40.0)
    p.cubicTo(QPointF(a.x() + reach, a.y()), QPointF(b.x() - reach, b.y()), b)
    return p


CORNER = 10.0  # radius of a routed wire's rounded corners


def routed(points) -> QPainterPath:
    """A path through corner ``points`` (each turn rounded)."""
    pts = [QPointF(x, y) for x, y in points]
    p = QPainterPath(pts[0])
    for prev, corner, nxt in zip(pts, pts[1:], pts[2:]):
        into, out = QLineF(corner, prev), QLineF(corner, nxt)
        r_in, r_out = min(CORNER, into.length() / 2), min(CORNER, out.length() / 2)
        p.lineTo(into.pointAt(r_in / into.length()) if into.length() else corner)
        p.quadTo(corner, out.pointAt(r_out / out.length()) if out.length() else corner)
    p.lineTo(pts[-1])
    return p


class WireItem(QGraphicsItem):
    """One wire; lives in scene coordinates (its own position stays at the origin)."""

    def __init__(self, wire: Wire):
        super().__init__()
        self.wire = wire
        self.carried = None  # the Shape the wire carries (None while unknown); set by the scene
        self.label = ""
        self.width = theme.WIRE_MIN_WIDTH
        self.known = False
        self._path = QPainterPath()
        self._lines: list[QLineF] = []
        self._hit: QPainterPath | None = QPainterPath()
        self._bounds = QRectF()
        self._label_rect = QRectF()
        self.setFlags(QGraphicsItem.GraphicsItemFlag.ItemIsSelectable)
        self.setZValue(-1.0)

    def set_geometry(self, a: QPointF, b: QPointF, points=None, labelled: bool = True) -> None:
        """Draw the wire from ``a`` to ``b`` as a curve, or through corner ``points`` when given;
        width and label follow :attr:`carried` (no label when not ``labelled``: another wire from
        the same output already says the shape)."""
        shape = self.carried
        self.prepareGeometryChange()
        self.known = shape is not None
        self.label = str(shape) if shape is not None and labelled else ""
        self.width = stroke_width(shape[0] if shape is not None else None)
        if points:
            self._path = routed(points)
            self._lines = [QLineF(*p, *q) for p, q in zip(points, points[1:])]
        else:
            self._path = curve(a, b)
            self._lines = [QLineF(a, b)]
        self._hit = None  # stroked on first use (hit tests), then kept until the path changes
        bounds = self._path.boundingRect().adjusted(-self.width, -self.width, self.width, self.width)
        if self.label:
            fm = metrics("figure")
            mid = (QLineF(*points[2], *points[3]).center() if points  # a routed wire: the middle of its lane
                   else self._path.pointAtPercent(0.5))
            w, h = advance("figure", self.label) + 6.0, fm.height() + 1.0
            self._label_rect = QRectF(mid.x() - w / 2, mid.y() - self.width / 2 - h - 1.0, w, h)
            bounds = bounds.united(self._label_rect)
        else:
            self._label_rect = QRectF()
        self._bounds = bounds

    @property
    def lines(self) -> list[QLineF]:
        """Straight lines along the wire (what is drawn far out): its chord, or its route's legs."""
        return self._lines

    def boundingRect(self) -> QRectF:
        return self._bounds

    def shape(self) -> QPainterPath:
        if self._hit is None:
            stroker = QPainterPathStroker()
            stroker.setWidth(max(self.width, HIT_WIDTH))
            self._hit = stroker.createStroke(self._path)
        return self._hit

    def paint(self, painter, option, widget=None) -> None:
        lod = option.levelOfDetailFromTransform(painter.worldTransform())
        if lod < theme.SHAPE_MIN_DETAIL:  # far out: a hairline between the ends
            painter.setPen(theme.WIRE)
            painter.drawLines(self._lines)
            return
        selected = bool(option.state & SELECTED)
        colour = theme.ACCENT if selected else (theme.WIRE if self.known else theme.WIRE_UNKNOWN)
        pen = QPen(colour, self.width, Qt.PenStyle.SolidLine if self.known else Qt.PenStyle.DashLine,
                   Qt.PenCapStyle.FlatCap)
        painter.setPen(pen)
        painter.setBrush(Qt.BrushStyle.NoBrush)
        painter.drawPath(self._path)
        if not self.label or lod < theme.TEXT_MIN_DETAIL:
            return
        painter.setPen(Qt.PenStyle.NoPen)
        painter.setBrush(theme.LABEL_BACK)
        painter.drawRoundedRect(self._label_rect, 3.0, 3.0)
        painter.setPen(theme.ACCENT if selected else theme.TEXT_MUTED)
        painter.setFont(font("figure"))
        painter.drawText(self._label_rect, Qt.AlignmentFlag.AlignCenter, self.label)


class DraftWire(QGraphicsItem):
    """The wire being drawn from an output notch to the pointer (no hit shape, never selected)."""

    def __init__(self, start: QPointF):
        super().__init__()
        self._start = start
        self._path = QPainterPath()
        self._bounds = QRectF()
        self.setZValue(10.0)
        self.setAcceptedMouseButtons(Qt.MouseButton.NoButton)
        self.reach(start)

    def reach(self, end: QPointF) -> None:
        self.prepareGeometryChange()
        self._path = curve(self._start, end)
        self._bounds = self._path.boundingRect().adjusted(-3, -3, 3, 3)

    def boundingRect(self) -> QRectF:
        return self._bounds

    def paint(self, painter, option, widget=None) -> None:
        painter.setPen(QPen(theme.ACCENT, 2.0, Qt.PenStyle.DashLine))
        painter.setBrush(Qt.BrushStyle.NoBrush)
        painter.drawPath(self._path)
