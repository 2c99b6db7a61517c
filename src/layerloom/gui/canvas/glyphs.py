"""Small monochrome glyphs for block kinds, drawn by us as line paths in a square of side ``s``.

Each function returns a :class:`QPainterPath` meant to be stroked (never filled) in one colour;
:func:`glyph_for` picks the kind's own glyph, else its family's, and caches it per size.
"""
from __future__ import annotations

from functools import lru_cache

from PySide6.QtCore import QPointF, QRectF
from PySide6.QtGui import QPainterPath

from layerloom.core.kinds import KINDS


def _grid(s: float) -> QPainterPath:
    """A convolution window: a square ruled into 3×3 cells."""
    p = QPainterPath()
    p.addRect(QRectF(0, 0, s, s))
    for f in (1 / 3, 2 / 3):
        p.moveTo(s * f, 0)
        p.lineTo(s * f, s)
        p.moveTo(0, s * f)
        p.lineTo(s, s * f)
    return p


def _pointwise(s: float) -> QPainterPath:
    """A 1×1 convolution: a square with one cell marked at its centre."""
    p = QPainterPath()
    p.addRect(QRectF(0, 0, s, s))
    c = s / 2
    p.addRect(QRectF(c - s / 8, c - s / 8, s / 4, s / 4))
    return p


def _depthwise(s: float) -> QPainterPath:
    """A depthwise convolution: separate slices, each filtered on its own."""
    p = QPainterPath()
    step = s / 4
    for i in range(3):
        p.addRect(QRectF(i * step, i * step * 0.5, s - 2 * step, s - step))
    return p


def _transposed(s: float) -> QPainterPath:
    """A transposed convolution: a small square growing into a large one."""
    p = QPainterPath()
    p.addRect(QRectF(0, s * 0.55, s * 0.45, s * 0.45))
    p.addRect(QRectF(s * 0.2, 0, s * 0.8, s * 0.8))
    return p


def _norm(s: float) -> QPainterPath:
    """Batch norm: a bell curve over a base line."""
    p = QPainterPath()
    p.moveTo(0, s * 0.85)
    p.cubicTo(s * 0.35, s * 0.85, s * 0.3, s * 0.1, s * 0.5, s * 0.1)
    p.cubicTo(s * 0.7, s * 0.1, s * 0.65, s * 0.85, s, s * 0.85)
    p.moveTo(0, s)
    p.lineTo(s, s)
    return p


def _activation(s: float) -> QPainterPath:
    """An activation: a line lying flat, then bending upwards."""
    p = QPainterPath()
    p.moveTo(0, s * 0.8)
    p.lineTo(s * 0.45, s * 0.8)
    p.quadTo(s * 0.55, s * 0.8, s, s * 0.1)
    return p


def _pool(s: float) -> QPainterPath:
    """Pooling: a funnel narrowing from left to right."""
    p = QPainterPath()
    p.moveTo(0, 0)
    p.lineTo(s, s * 0.3)
    p.lineTo(s, s * 0.7)
    p.lineTo(0, s)
    p.closeSubpath()
    return p


def _upsample(s: float) -> QPainterPath:
    """Resizing up: a funnel widening from left to right."""
    p = QPainterPath()
    p.moveTo(0, s * 0.3)
    p.lineTo(s, 0)
    p.lineTo(s, s)
    p.lineTo(0, s * 0.7)
    p.closeSubpath()
    return p


def _add(s: float) -> QPainterPath:
    """Add: a plus inside a circle."""
    p = QPainterPath()
    p.addEllipse(QRectF(0, 0, s, s))
    p.moveTo(s / 2, s * 0.22)
    p.lineTo(s / 2, s * 0.78)
    p.moveTo(s * 0.22, s / 2)
    p.lineTo(s * 0.78, s / 2)
    return p


def _multiply(s: float) -> QPainterPath:
    """Multiply: a small cross inside a circle."""
    p = QPainterPath()
    p.addEllipse(QRectF(0, 0, s, s))
    a, b = s * 0.3, s * 0.7
    p.moveTo(a, a)
    p.lineTo(b, b)
    p.moveTo(b, a)
    p.lineTo(a, b)
    return p


def _concat(s: float) -> QPainterPath:
    """Concat: two bars laid side by side into one."""
    p = QPainterPath()
    p.addRect(QRectF(0, 0, s * 0.4, s))
    p.addRect(QRectF(s * 0.4, 0, s * 0.6, s))
    return p


def _flatten(s: float) -> QPainterPath:
    """Flatten: a square map unrolled into a thin column."""
    p = QPainterPath()
    p.addRect(QRectF(0, s * 0.2, s * 0.55, s * 0.6))
    p.addRect(QRectF(s * 0.8, 0, s * 0.2, s))
    return p


def _linear(s: float) -> QPainterPath:
    """Linear: every input joined to every output."""
    p = QPainterPath()
    left = [s * 0.15, s * 0.5, s * 0.85]
    right = [s * 0.3, s * 0.7]
    for y0 in left:
        for y1 in right:
            p.moveTo(0, y0)
            p.lineTo(s, y1)
    return p


def _dropout(s: float) -> QPainterPath:
    """Dropout: a row of cells with some left out."""
    p = QPainterPath()
    cell = s / 3
    for i in range(3):
        for j in range(3):
            if (i + 2 * j) % 3 != 1:
                p.addRect(QRectF(i * cell + 1, j * cell + 1, cell - 2, cell - 2))
    return p


def _softmax(s: float) -> QPainterPath:
    """Softmax: bars of rising height that share one base."""
    p = QPainterPath()
    for i, h in enumerate((0.35, 0.6, 1.0)):
        p.addRect(QRectF(i * s / 3 + 1, s * (1 - h), s / 3 - 2, s * h))
    return p


def _identity(s: float) -> QPainterPath:
    """Identity: a straight pass."""
    p = QPainterPath()
    p.moveTo(0, s / 2)
    p.lineTo(s, s / 2)
    p.moveTo(s * 0.65, s * 0.25)
    p.lineTo(s, s / 2)
    p.lineTo(s * 0.65, s * 0.75)
    return p


def _input(s: float) -> QPainterPath:
    """Input: a bracket open to the right with a stroke leaving it."""
    p = QPainterPath()
    p.moveTo(s * 0.35, 0)
    p.lineTo(0, 0)
    p.lineTo(0, s)
    p.lineTo(s * 0.35, s)
    p.moveTo(s * 0.2, s / 2)
    p.lineTo(s, s / 2)
    return p


def _output(s: float) -> QPainterPath:
    """Output: a stroke arriving into a bracket open to the left."""
    p = QPainterPath()
    p.moveTo(s * 0.65, 0)
    p.lineTo(s, 0)
    p.lineTo(s, s)
    p.lineTo(s * 0.65, s)
    p.moveTo(0, s / 2)
    p.lineTo(s * 0.8, s / 2)
    return p


def _motif(s: float) -> QPainterPath:
    """A motif: two cards stacked, one behind the other."""
    p = QPainterPath()
    p.addRoundedRect(QRectF(s * 0.3, 0, s * 0.7, s * 0.7), 2, 2)
    p.moveTo(s * 0.3, s * 0.3)
    p.lineTo(0, s * 0.3)
    p.lineTo(0, s)
    p.lineTo(s * 0.7, s)
    p.lineTo(s * 0.7, s * 0.7)
    return p


def _unmapped(s: float) -> QPainterPath:
    """An unmapped operation: a dashed frame (a gap to fill in) around a small diamond."""
    p = QPainterPath()
    n = 4
    for i in range(n):
        a, b = s * i / n, s * (i + 0.6) / n
        for x0, y0, x1, y1 in ((a, 0, b, 0), (s, a, s, b), (s - a, s, s - b, s), (0, s - a, 0, s - b)):
            p.moveTo(x0, y0)
            p.lineTo(x1, y1)
    c, r = s / 2, s / 5
    p.moveTo(c, c - r)
    p.lineTo(c + r, c)
    p.lineTo(c, c + r)
    p.lineTo(c - r, c)
    p.closeSubpath()
    return p


def _unknown(s: float) -> QPainterPath:
    p = QPainterPath()
    p.addEllipse(QPointF(s / 2, s / 2), s / 2, s / 2)
    return p


BY_KIND = {"Pointwise": _pointwise, "Depthwise": _depthwise, "ConvTranspose2d": _transposed,
           "BatchNorm2d": _norm, "Upsample": _upsample, "Add": _add, "Multiply": _multiply, "Concat": _concat,
           "Flatten": _flatten, "Linear": _linear, "Dropout": _dropout, "Softmax": _softmax,
           "Identity": _identity, "Input": _input, "Output": _output, "Unmapped": _unmapped}
"""Kinds with a glyph of their own; the others take their family's."""

BY_FAMILY = {"Convolution": _grid, "Norm & activation": _activation, "Pooling & resizing": _pool,
             "Joins": _add, "Dense": _linear, "Plumbing": _identity, "Ends": _input, "Motifs": _motif}


@lru_cache(maxsize=None)
def glyph_for(kind: str, size: float) -> QPainterPath:
    """The glyph of ``kind`` in a square of side ``size`` (cached; do not modify the result)."""
    draw = BY_KIND.get(kind)
    if draw is None:
        spec = KINDS.get(kind)
        draw = BY_FAMILY.get(spec.family if spec is not None else "", _unknown)
    return draw(size)
