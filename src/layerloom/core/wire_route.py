"""Wire routes around cards: a wire goes straight (the canvas draws a curve) when no other card
stands between its ends; otherwise it leaves its notch, turns onto a free lane above or below the
cards in the way (for a wire back to the left, such as a row's return wire, the lane between two
rows), runs along it and turns down or up into the destination's notch. Scene pixels, no Qt.

>>> cards = Obstacles({"a": (0, 0, 100, 50), "mid": (150, 0, 250, 50), "b": (300, 0, 400, 50)})
>>> route((101, 25), (299, 25), cards, ("a", "b"))
((101, 25), (117.0, 25), (117.0, -14.0), (283.0, -14.0), (283.0, 25), (299, 25))
>>> route((101, 25), (149, 25), cards, ("a", "mid")) is None   # nothing between: straight
True
"""
from __future__ import annotations

from collections import defaultdict

STUB = 16.0  # a routed wire runs this far straight out of (and into) its notch before it turns
CLEAR = 14.0  # room kept between a lane and a card's edge
BUCKET = 256.0  # side of the square cells the obstacle index sorts cards into
REACH = 160.0  # a route first looks for a lane among the cards this far above and below its ends

Rect = tuple  # (left, top, right, bottom)
Point = tuple  # (x, y)


class Obstacles:
    """Card rectangles by key, indexed in square cells so a route looks only at nearby cards."""

    def __init__(self, rects: dict | None = None):
        self.rects: dict = {}
        self._cells: dict[tuple[int, int], set] = defaultdict(set)
        for key, rect in (rects or {}).items():
            self.put(key, rect)

    @staticmethod
    def _cells_of(left: float, top: float, right: float, bottom: float):
        return [(i, j) for i in range(int(left // BUCKET), int(right // BUCKET) + 1)
                for j in range(int(top // BUCKET), int(bottom // BUCKET) + 1)]

    def put(self, key, rect: Rect) -> None:
        """Add or move card ``key`` to ``rect``."""
        self.drop(key)
        self.rects[key] = rect
        for cell in self._cells_of(*rect):
            self._cells[cell].add(key)

    def drop(self, key) -> None:
        old = self.rects.pop(key, None)
        if old is not None:
            for cell in self._cells_of(*old):
                self._cells[cell].discard(key)

    def blocked(self, left: float, top: float, right: float, bottom: float, skip=()) -> bool:
        """Whether any rectangle (except the keys in ``skip``) reaches into the given area."""
        rects, cells = self.rects, self._cells
        for cell in self._cells_of(left, top, right, bottom):
            for k in cells.get(cell, ()):
                r = rects[k]
                if r[0] < right and r[2] > left and r[1] < bottom and r[3] > top and k not in skip:
                    return True
        return False

    def within(self, left: float, top: float, right: float, bottom: float, skip=()) -> list[Rect]:
        """Rectangles reaching into the given area (except the keys in ``skip``)."""
        rects = self.rects
        return [r for k in self._near(left, top, right, bottom) if k not in skip for r in (rects[k],)
                if r[0] < right and r[2] > left and r[1] < bottom and r[3] > top]

    def keys_within(self, left: float, top: float, right: float, bottom: float) -> set:
        """Keys of the rectangles reaching into the given area."""
        rects = self.rects
        return {k for k in self._near(left, top, right, bottom) for r in (rects[k],)
                if r[0] < right and r[2] > left and r[1] < bottom and r[3] > top}

    def _near(self, left: float, top: float, right: float, bottom: float) -> set:
        """Keys filed in the cells the given area touches."""
        keys = set()
        cells = self._cells
        for cell in self._cells_of(left, top, right, bottom):
            found = cells.get(cell)
            if found:
                keys |= found
        return keys


def _spans_h(rects, left: float, right: float) -> list[tuple[float, float]]:
    """The heights (open intervals) where a horizontal lane from ``left`` to ``right`` would come
    within CLEAR of one of ``rects``."""
    c = CLEAR - 0.5
    return [(r[1] - c, r[3] + c) for r in rects if r[0] - c < right and r[2] + c > left]


def _spans_v(rects, x: float) -> list[tuple[float, float]]:
    """The heights (top, bottom) of the cards a vertical run at ``x`` would touch."""
    return [(r[1], r[3]) for r in rects if r[0] - 2.0 < x < r[2] + 2.0]


def _crosses_v(spans, y0: float, y1: float) -> bool:
    """Whether a vertical run between ``y0`` and ``y1`` touches a card of ``spans`` (see _spans_v)."""
    top, bottom = min(y0, y1), max(y0, y1)
    return any(a < bottom and b > top for a, b in spans)


def route(a: Point, b: Point, obstacles: Obstacles, ends=()) -> tuple | None:
    """Corner points of a wire from output point ``a`` to input point ``b``, or None when it may go
    straight; ``ends`` are the keys of the two cards it joins (never obstacles to it)."""
    ax, ay = a
    bx, by = b
    forward = bx - ax > 2 * STUB
    x0, x1 = ax + STUB, bx - STUB
    lo, hi = min(x0, x1), max(x0, x1)
    if forward and not obstacles.blocked(ax, min(ay, by) - 4.0, bx, max(ay, by) + 4.0, ends):
        return None
    target = ay if forward else (ay + by) / 2
    reach = REACH
    while True:  # look at the cards within reach above and below; further when no lane is found there
        top, bottom = min(ay, by) - reach, max(ay, by) + reach
        near = obstacles.within(lo - CLEAR, top, hi + CLEAR, bottom, ends)
        y = _lane(near, target, x0, x1, ay, by, top, bottom)
        if y is not None or len(near) == len(obstacles.rects):
            break
        reach *= 2
    if y is None:
        y = min((r[1] for r in near), default=ay) - CLEAR
    return ((ax, ay), (x0, ay), (x0, y), (x1, y), (x1, by), (bx, by))


def _lane(near, target, x0, x1, ay, by, top, bottom) -> float | None:
    """The free lane nearest ``target`` (both turns clear of cards too, if any such lane exists),
    within ``top``..``bottom``; None when there is none there."""
    lo, hi = min(x0, x1), max(x0, x1)
    lanes = sorted((y for y in {y for r in near for y in (r[1] - CLEAR, r[3] + CLEAR)} | {target} if top < y < bottom),
                   key=lambda y: (abs(y - target), y))
    across, up, down = _spans_h(near, lo, hi), _spans_v(near, x0), _spans_v(near, x1)
    first = None
    for y in lanes:
        if any(a < y < b for a, b in across):
            continue
        if not _crosses_v(up, ay, y) and not _crosses_v(down, y, by):
            return y
        if first is None:
            first = y
    return first


def polyline_crosses(points, rect: Rect) -> bool:
    """Whether the polyline through ``points`` passes through the inside of ``rect`` (for tests and
    checks: a route may touch a card's edge where it enters its notch, never cross it)."""
    left, top, right, bottom = rect
    for (xa, ya), (xb, yb) in zip(points, points[1:]):
        if ya == yb:
            if top < ya < bottom and min(xa, xb) < right and max(xa, xb) > left:
                return True
        elif xa == xb:
            if left < xa < right and min(ya, yb) < bottom and max(ya, yb) > top:
                return True
        else:  # a straight segment: sample it
            for i in range(1, 32):
                x, y = xa + (xb - xa) * i / 32, ya + (yb - ya) * i / 32
                if left < x < right and top < y < bottom:
                    return True
    return False
