"""Channel counts inside a motif class, as source expressions of its constructor's arguments.

A motif class is written once for every use, so the channel counts its layers are built with are
expressions of the class's arguments: the channel counts of its input ports (``in_channels``) and
its parameters. :class:`Count` is such an expression, a sum of products of argument names with
whole-number coefficients (``in_channels + b1``, ``2 * in_channels``); its ``repr`` is its source,
so the kinds' emitters write it as they write a number. :func:`out_channels` carries channel counts
through one block: a convolution's out channels is its setting (a number or a parameter), a
depthwise convolution multiplies, a Concat sums, norms, activations, pooling, resizing, Add,
Multiply and pass-through kinds keep the channels of input 0 (for flat vectors, "channels" are the
features). A Flatten of a feature map gives C*H*W, which depends on height and width: a
:class:`ShapeBound` count, which raises :class:`NeedsShapes` as soon as an emitter writes it.

>>> c = Count.of("in_channels")
>>> c + 16, c * 2, (c + Count.of("width")).substitute({"in_channels": 8, "width": 4})
(in_channels + 16, 2 * in_channels, 12)
"""
from __future__ import annotations

import math

from layerloom.core.kinds import KINDS


class NeedsShapes(Exception):
    """A layer's constructor needs a number that is not an expression of channel counts."""


class Count:
    """A whole-number expression: ``terms`` maps sorted tuples of names to coefficients (``()``
    holds the constant). Arithmetic with ``int`` or Count gives a Count, or an ``int`` when no
    name is left."""

    __slots__ = ("terms",)

    def __init__(self, terms: dict[tuple[str, ...], int]):
        self.terms = terms

    @staticmethod
    def of(name: str) -> "Count":
        return Count({(name,): 1})

    @staticmethod
    def _made(terms: dict) -> "Count | int":
        terms = {k: v for k, v in terms.items() if v}
        if set(terms) <= {()}:
            return terms.get((), 0)
        return Count(terms)

    def __add__(self, other):
        if isinstance(other, int):
            other = Count({(): other})
        elif not isinstance(other, Count):
            return NotImplemented
        terms = dict(self.terms)
        for k, v in other.terms.items():
            terms[k] = terms.get(k, 0) + v
        return Count._made(terms)

    __radd__ = __add__

    def __mul__(self, other):
        if isinstance(other, int):
            other = Count({(): other})
        elif not isinstance(other, Count):
            return NotImplemented
        terms: dict = {}
        for k1, v1 in self.terms.items():
            for k2, v2 in other.terms.items():
                k = tuple(sorted(k1 + k2))
                terms[k] = terms.get(k, 0) + v1 * v2
        return Count._made(terms)

    __rmul__ = __mul__

    def substitute(self, values: dict):
        """The expression with each name replaced by ``values[name]`` (numbers, Counts, ShapeBounds)."""
        return sum((v * math.prod((values[n] for n in k), start=1) for k, v in self.terms.items()), start=0)

    def __repr__(self) -> str:
        parts = []
        for names, coefficient in sorted(self.terms.items(), key=lambda kv: not kv[0]):  # constant last
            if not names:
                parts.append(str(coefficient))
            else:
                parts.append(" * ".join(([str(coefficient)] if coefficient != 1 else []) + list(names)))
        return " + ".join(parts)

    __str__ = __repr__

    def __format__(self, spec: str) -> str:
        return format(repr(self), spec)


class ShapeBound:
    """A count that depends on height and width (``reason`` says where it comes from). Arithmetic
    keeps it; writing it as source raises :class:`NeedsShapes`."""

    __slots__ = ("reason",)

    def __init__(self, reason: str):
        self.reason = reason

    def _keep(self, other):
        return self

    __add__ = __radd__ = __mul__ = __rmul__ = _keep

    def __repr__(self) -> str:
        raise NeedsShapes(self.reason)

    __str__ = __repr__

    def __format__(self, spec: str) -> str:
        raise NeedsShapes(self.reason)


def substitute(value, values: dict):
    """``value`` (a number, Count or ShapeBound) with the names in ``values`` replaced."""
    return value.substitute(values) if isinstance(value, Count) else value


def out_channels(kind: str, s: dict, ins: tuple, block: str, flat_input: bool):
    """Channel count of the output of a ``kind`` block with settings ``s`` and input channel counts
    ``ins`` (the kind's own ``channels`` rule); a count that depends on height and width is a
    :class:`ShapeBound` naming ``block``. A Flatten of a flat vector (``flat_input``) keeps its count."""
    if kind == "Flatten" and flat_input:
        return ins[0]
    count = KINDS[kind].channels(s, ins)
    if count is None:
        return ShapeBound(f"is built with the features of {kind} '{block}' (they depend on height and width)")
    return count
