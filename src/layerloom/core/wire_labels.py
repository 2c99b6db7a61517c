"""Where a wire's shape label goes: beside its wire, clear of every card, every wire (its own too)
and every other label. Scene pixels, no Qt.

A wire is known here by its polyline: the corner points of a route, or a curve sampled into short
straight pieces (:func:`curve_points`). Each piece, padded by half the stroke, is a rectangle in an
:class:`~layerloom.core.wire_route.Obstacles` index; so are the cards and the labels placed. A
label is tried above and below the middle of the wire's longest level stretch, then at other
places along the wire; the first place that touches nothing wins, and a label with no such place is
not shown (the card it leaves shows the same shape at its right edge).

Labels are placed tile by tile (:data:`TILE`): a label stands wholly inside the tile holding the
middle of its wire's first stretch (:func:`tile_of`) and is placed against that tile's labels
only, in the order of the wires' names, so its spot follows from the design alone, whichever part
of the canvas was shown (and placed) first.

>>> from layerloom.core.wire_route import Obstacles
>>> cards = Obstacles({"a": (0, 0, 100, 50), "b": (170, 0, 270, 50)})
>>> label_spot(((101, 25), (169, 25)), (40, 12), 1.0, cards.blocked)
(115.0, 11.0)
>>> label_spot(((101, 25), (169, 25)), (90, 12), 1.0, cards.blocked) is None   # wider than the gap
True
"""
from __future__ import annotations

from math import floor

from layerloom.core.stage_rows import CARD_WIDTH, COLUMN

GAP = 1.0  # room between a label and the wire it names
CURVE_PIECES = 10  # straight pieces a curve is sampled into
PLACES = (0.5, 0.3, 0.7, 0.1, 0.9)  # where along a stretch a label is tried, in order
STRETCHES = 3  # the longest level pieces (then others) a label is tried beside
TILE = (4 * COLUMN, 640.0)  # width and height of the tiles in which labels are placed, scene pixels
TILE_ORIGIN = (CARD_WIDTH / 2, 0.0)  # a corner of a tile: tiles' sides run through the middle of Tidy's columns of cards


def curve_points(a, b, reach: float) -> tuple:
    """Points along the curve the canvas draws from ``a`` to ``b`` (leaving and entering level,
    control points ``reach`` out): its ends when level, else :data:`CURVE_PIECES` + 1 samples."""
    (ax, ay), (bx, by) = a, b
    if ay == by:
        return (a, b)
    c1, c2 = ax + reach, bx - reach
    out = []
    for i in range(CURVE_PIECES + 1):
        t = i / CURVE_PIECES
        u = 1.0 - t
        x = u * u * u * ax + 3 * u * u * t * c1 + 3 * u * t * t * c2 + t * t * t * bx
        y = u * u * u * ay + 3 * u * u * t * ay + 3 * u * t * t * by + t * t * t * by
        out.append((x, y))
    return tuple(out)


def piece_boxes(points, half: float) -> list[tuple]:
    """The rectangle each straight piece of a polyline covers, padded by ``half`` the stroke."""
    return [(min(xa, xb) - half, min(ya, yb) - half, max(xa, xb) + half, max(ya, yb) + half)
            for (xa, ya), (xb, yb) in zip(points, points[1:])]


def _stretches(points):
    """Pieces of the polyline as ``(start, end)``: level ones first, longest first."""
    pieces = list(zip(points, points[1:]))
    return sorted(pieces, key=lambda p: (p[0][1] != p[1][1], -abs(p[1][0] - p[0][0]) - abs(p[1][1] - p[0][1])))


def label_spot(points, size, half: float, blocked) -> tuple[float, float] | None:
    """Top-left corner of a label of ``size`` (width, height) beside the polyline ``points`` whose
    stroke reaches ``half`` from its middle, such that ``blocked(left, top, right, bottom)`` is
    False there; None when there is no such place."""
    w, h = size
    for (xa, ya), (xb, yb) in _stretches(points)[:STRETCHES]:
        for f in PLACES:
            x, y = xa + (xb - xa) * f, ya + (yb - ya) * f
            if ya == yb:  # level: above, then below
                spots = ((x - w / 2, y - half - GAP - h), (x - w / 2, y + half + GAP))
            elif xa == xb:  # upright: right, then left
                spots = ((x + half + GAP, y - h / 2), (x - half - GAP - w, y - h / 2))
            else:
                spots = ((x - w / 2, min(ya, yb) - half - GAP - h), (x - w / 2, max(ya, yb) + half + GAP))
            for left, top in spots:
                if not blocked(left, top, left + w, top + h):
                    return (left, top)
    return None


def tile_of(points) -> tuple[int, int]:
    """The tile (column, row) of the label of the wire with polyline ``points``: the one holding
    the middle of the stretch its label is tried beside first.

    >>> tile_of(((100, 25), (1100, 25)))
    (0, 0)
    """
    (xa, ya), (xb, yb) = _stretches(points)[0]
    return floor(((xa + xb) / 2 - TILE_ORIGIN[0]) / TILE[0]), floor(((ya + yb) / 2 - TILE_ORIGIN[1]) / TILE[1])


def tile_rect(tile: tuple[int, int]) -> tuple[float, float, float, float]:
    """``(left, top, right, bottom)`` of ``tile``."""
    (col, row), (w, h), (x, y) = tile, TILE, TILE_ORIGIN
    return x + col * w, y + row * h, x + (col + 1) * w, y + (row + 1) * h

