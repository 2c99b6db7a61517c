"""A wire on the canvas: a left → right curve whose stroke width grows with the channel count, or,
when cards stand in the way, a route around them (corner points from :mod:`layerloom.core.wire_route`)
drawn with rounded corners.

:meth:`WireItem.set_geometry` (after ``prepareGeometryChange()``) keeps the wire's ends or corner
points, its straight lines, padded bounding rect and label place, all computed without building a
path; the QPainterPath is built on the first close-up paint or hit test after it (far out, only the
lines are drawn), the stroked hit shape on the first hit test; both are then kept.
"""
from __future__ import annotations

from functools import lru_cache
from math import log2

from PySide6.QtCore import QLineF, QPointF, QRectF, Qt
from PySide6.QtGui import QPainterPath, QPainterPathStroker, QPen
from PySide6.QtWidgets import QGraphicsItem, QStyle

from layerloom.core.graph import Wire
from layerloom.core.wire_labels import curve_points
from layerloom.gui import theme
from layerloom.gui.canvas.block_item import advance, font, metrics

HIT_WIDTH = 10.0  # a thin wire is still easy to click
SELECTED = QStyle.StateFlag.State_Selected


@lru_cache(maxsize=256)
def stroke_width(channels: int | None) -> float:
    """Stroke width for a wire carrying ``channels`` channels (or features): log scale, clamped."""
    if not channels:
        return theme.WIRE_MIN_WIDTH
    w = theme.WIRE_MIN_WIDTH + theme.WIRE_WIDTH_PER_DOUBLING * max(log2(channels) - 1.0, 0.0)
    return min(w, theme.WIRE_MAX_WIDTH)


def curve_reach(ax: float, bx: float) -> float:
    """How far a curve's control points stand out from its ends (at ``ax`` and ``bx``), horizontally."""
    return max(abs(bx - ax) * 0.5, 40.0)


NO_LABEL = ("", 0.0, 0.0)


@lru_cache(maxsize=1024)
def shape_label(shape) -> tuple[str, float, float]:
    """A wire's label for the tensor ``shape`` it carries (None: none), with the label box's width
    and height."""
    if shape is None:
        return NO_LABEL
    text = str(shape)
    return text, advance("figure", text) + 6.0, metrics("figure").height() + 1.0


def curve(a: QPointF, b: QPointF) -> QPainterPath:
    """A smooth curve leaving ``a`` and entering ``b`` horizontally."""
    p = QPainterPath(a)
    reach = curve_reach(a.x(), b.x())
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


def polylines_path(polylines) -> QPainterPath:
    """One path through every polyline (each a sequence of ``(x, y)`` scene points): far out, all
    wires are one path drawn in one call, with no Qt object made per wire or leg."""
    path = QPainterPath()
    move, line = path.moveTo, path.lineTo
    for pts in polylines:
        move(*pts[0])
        for p in pts[1:]:
            line(*p)
    return path


class WireItem(QGraphicsItem):
    """One wire; lives in scene coordinates (its own position stays at the origin)."""

    def __init__(self, wire: Wire):
        super().__init__()
        self.wire = wire
        self.carried = None  # the Shape the wire carries (None while unknown); set by the scene
        self.label = ""
        self.width = theme.WIRE_MIN_WIDTH
        self.known = False
        self._path: QPainterPath | None = QPainterPath()
        self._ends: tuple = ()  # (a, b) of a curve, or the corner points of a route
        self._routed = False
        self._key: tuple = ()  # what the geometry was last made from
        self._lines: list[QLineF] | None = []
        self._hit: QPainterPath | None = QPainterPath()
        self._bounds = QRectF()
        self._label_box: tuple | None = None  # left, top, width, height of the label as placed
        self._label_rect: QRectF | None = QRectF()
        self.label_size = (0.0, 0.0)
        self._wire_box = (0.0, 0.0, 0.0, 0.0)
        self._polyline: tuple | None = None
        self.setFlags(QGraphicsItem.GraphicsItemFlag.ItemIsSelectable)
        self.setZValue(-1.0)

    def set_geometry(self, a: tuple, b: tuple, points=None, labelled: bool = True) -> bool:
        """Draw the wire from scene point ``a`` to ``b`` (``(x, y)``) as a curve, or through corner
        ``points`` when given; width and label follow :attr:`carried` (no label when not
        ``labelled``: another wire from the same output already says the shape). Returns whether
        anything changed (nothing is redone for a wire whose ends, route, shape and label stay).
        Only plain numbers are kept here; Qt objects (path, lines, label box) are made on first use."""
        shape = self.carried
        key = (points or (a, b), shape, labelled)
        if key == self._key:
            return False
        self._key = key
        self.prepareGeometryChange()
        self.known = shape is not None
        self.width = width = stroke_width(shape[0] if shape is not None else None)
        self._routed = bool(points)
        if points:
            self._ends = points
            xs, ys = [p[0] for p in points], [p[1] for p in points]
            left, top, right, bottom = min(xs), min(ys), max(xs), max(ys)  # rounded corners stay inside
        else:
            self._ends = (a, b)
            reach = curve_reach(a[0], b[0])  # a curve stays within its control points' box
            left, right = min(a[0], b[0], b[0] - reach), max(a[0], b[0], a[0] + reach)
            top, bottom = min(a[1], b[1]), max(a[1], b[1])
        self._path = self._hit = self._lines = self._label_rect = self._polyline = None  # made again on first use
        self._wire_box = (left - width, top - width, right + width, bottom + width)
        self.label, *size = shape_label(shape) if labelled else NO_LABEL
        self.label_size = tuple(size)
        self._label_box = None  # placed by the scene (place_label), clear of cards, wires and labels
        self._bounds = QRectF(left - width, top - width, right - left + 2 * width, bottom - top + 2 * width)
        return True

    def polyline(self) -> tuple:
        """The wire as straight pieces: its route's corners, or points along its curve."""
        if self._polyline is None:
            pts = self._ends
            self._polyline = pts if self._routed else curve_points(pts[0], pts[1], curve_reach(pts[0][0], pts[1][0]))
        return self._polyline

    def place_label(self, corner: tuple[float, float] | None) -> None:
        """Show the label with its top-left at scene point ``corner`` (None: not shown)."""
        box = None if corner is None or not self.label else (*corner, *self.label_size)
        if box == self._label_box:
            return
        self.prepareGeometryChange()
        self._label_box, self._label_rect = box, None
        left, top, right, bottom = self._wire_box
        if box is not None:
            x, y, w, h = box
            left, top, right, bottom = min(left, x), min(top, y), max(right, x + w), max(bottom, y + h)
        self._bounds = QRectF(left, top, right - left, bottom - top)
        self.update()

    @property
    def wire_box(self) -> tuple:
        """``(left, top, right, bottom)`` the wire's stroke covers (its label aside)."""
        return self._wire_box

    @property
    def label_box(self) -> tuple | None:
        """``(left, top, right, bottom)`` of the label as placed, or None when it is not shown."""
        if self._label_box is None:
            return None
        x, y, w, h = self._label_box
        return (x, y, x + w, y + h)

    @property
    def points(self) -> tuple:
        """The wire's polyline in scene coordinates: its two ends (drawn as a curve) or its route's corners."""
        return self._ends

    @property
    def label_rect(self) -> QRectF:
        """Where the shape label is drawn (empty when it is not shown)."""
        if self._label_rect is None:
            self._label_rect = QRectF(*self._label_box) if self._label_box is not None else QRectF()
        return self._label_rect

    def path(self) -> QPainterPath:
        """The wire's drawn path (built from its ends or corner points on first use)."""
        if self._path is None:
            self._path = routed(self._ends) if self._routed else curve(*(QPointF(*p) for p in self._ends))
        return self._path

    @property
    def lines(self) -> list[QLineF]:
        """Straight lines along the wire (what an item draws far out): its chord, or its route's legs."""
        if self._lines is None:
            pts = self._ends
            self._lines = [QLineF(*p, *q) for p, q in zip(pts, pts[1:])]
        return self._lines

    def boundingRect(self) -> QRectF:
        return self._bounds

    def shape(self) -> QPainterPath:
        if self._hit is None:
            stroker = QPainterPathStroker()
            stroker.setWidth(max(self.width, HIT_WIDTH))
            self._hit = stroker.createStroke(self.path())
        return self._hit

    def paint(self, painter, option, widget=None) -> None:
        lod = option.levelOfDetailFromTransform(painter.worldTransform())
        if lod < theme.SHAPE_MIN_DETAIL:  # far out: a hairline between the ends
            painter.setPen(theme.WIRE)
            painter.drawLines(self.lines)
            return
        selected = bool(option.state & SELECTED)
        colour = theme.ACCENT if selected else (theme.WIRE if self.known else theme.WIRE_UNKNOWN)
        pen = QPen(colour, self.width, Qt.PenStyle.SolidLine if self.known else Qt.PenStyle.DashLine,
                   Qt.PenCapStyle.FlatCap)
        painter.setPen(pen)
        painter.setBrush(Qt.BrushStyle.NoBrush)
        painter.drawPath(self.path())
        if self._label_box is None or lod < theme.TEXT_MIN_DETAIL:
            return
        painter.setPen(Qt.PenStyle.NoPen)
        painter.setBrush(theme.LABEL_BACK)
        painter.drawRoundedRect(self.label_rect, 3.0, 3.0)
        painter.setPen(theme.ACCENT if selected else theme.TEXT_MUTED)
        painter.setFont(font("figure"))
        painter.drawText(self.label_rect, Qt.AlignmentFlag.AlignCenter, self.label)


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
