"""Moving the selection with the arrow keys: to the nearest card in the arrow's direction.

Nearness weighs distance across the arrow twice as much as distance along it, so Right follows a
row (the next block of a chain) before it jumps to another row.
"""
from __future__ import annotations

DIRECTIONS = {"left": (-1.0, 0.0), "right": (1.0, 0.0), "up": (0.0, -1.0), "down": (0.0, 1.0)}


def neighbour(centres: dict[str, tuple[float, float]], current: str, direction: str) -> str | None:
    """The block whose centre lies nearest ``current``'s in ``direction`` (None if there is none).

    >>> neighbour({"a": (0, 0), "b": (200, 10), "c": (60, 300)}, "a", "right")
    'b'
    """
    dx, dy = DIRECTIONS[direction]
    x0, y0 = centres[current]
    best, best_score = None, None
    for bid, (x, y) in centres.items():
        along = (x - x0) * dx + (y - y0) * dy
        if bid == current or along <= 0:
            continue
        across = abs((x - x0) * dy - (y - y0) * dx)
        score = along + 2.0 * across
        if best_score is None or score < best_score:
            best, best_score = bid, score
    return best
