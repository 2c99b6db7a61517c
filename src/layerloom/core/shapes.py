"""Tensor shapes without the batch dimension: ``(C, H, W)`` for feature maps, ``(F,)`` for vectors."""
from __future__ import annotations

from math import prod

from layerloom.core.values import quote


class Shape(tuple):
    """An immutable tensor shape per sample (the batch size N lives on the design).

    >>> s = Shape.chw(64, 56, 56)
    >>> str(s), s.channels, s.elements
    ('64×56×56', 64, 200704)
    """

    __slots__ = ()

    @staticmethod
    def chw(c: int, h: int, w: int) -> "Shape":
        return tuple.__new__(Shape, (c, h, w))

    @staticmethod
    def flat(f: int) -> "Shape":
        return tuple.__new__(Shape, (f,))

    @property
    def is_map(self) -> bool:
        """True for a feature map (C, H, W)."""
        return len(self) == 3

    @property
    def channels(self) -> int:
        """Channels of a feature map, features of a vector."""
        return self[0]

    @property
    def elements(self) -> int:
        """Number of elements per sample."""
        return prod(self)

    def __str__(self) -> str:
        return "×".join(str(d) for d in self)

    def __repr__(self) -> str:
        return f"Shape({str(self)})"

    def nchw(self, batch: int) -> str:
        """The shape with its batch size in PyTorch's order, e.g. ``(1, 64, 56, 56)``."""
        return "(" + ", ".join(str(d) for d in (batch, *self)) + ")"


def parse_shape(text: str) -> Shape:
    """Parse ``3x224x224`` (also ``3×224×224`` or ``3,224,224``) into a feature-map shape.

    Raises ``ValueError`` with the reason when the text is not three positive integers.
    """
    parts = [p for p in text.replace("×", "x").replace(",", "x").lower().split("x") if p.strip()]
    if len(parts) != 3:
        raise ValueError(f"input shape {quote(text)} must be three numbers C×H×W, e.g. 3x224x224")
    try:
        dims = [int(p) for p in parts]
    except ValueError:
        raise ValueError(f"input shape {quote(text)} must be whole numbers, e.g. 3x224x224") from None
    if min(dims) < 1:
        raise ValueError(f"input shape {quote(text)} has a size below 1")
    return Shape.chw(*dims)
