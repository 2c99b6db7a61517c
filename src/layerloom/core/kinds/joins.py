"""Joins of branches: Add (residual), Multiply (gating, e.g. squeeze-and-excite), Concat (channels).

No weights, no MACs. Other operations: Add, one per output element per extra input; Multiply, one
per output element; Concat none (it only copies its inputs side by side).
"""
from __future__ import annotations

from layerloom.core.findings import Stop
from layerloom.core.kinds.base import PORTS, Cost, Kind, register
from layerloom.core.settings import int_setting
from layerloom.core.shapes import Shape

INPUTS = int_setting("inputs", 2, "Inputs", minimum=2, maximum=PORTS, help="number of branches joined")
"""As many branches as a block has ports (torch.cat and a sum take any number)."""


def _same_rank(ins, name):
    for port, x in enumerate(ins[1:], 1):
        if len(x) != len(ins[0]):
            raise Stop("join.rank", f"{name} joins a {ins[0]} {'map' if len(ins[0]) == 3 else 'vector'} "
                       f"with a {x} {'map' if len(x) == 3 else 'vector'}", port)


def _clash(name: str, ins, port: int, verb: str) -> Stop:
    a, b = ins[0], ins[port]
    if a[0] != b[0]:
        return Stop("join.channels", f"{name} {verb} {b[0]} channels to {a[0]} channels", port, (b[0], a[0]))
    return Stop("join.size", f"{name} {verb} a {b[1]}×{b[2]} map to a {a[1]}×{a[2]} map",
                port, (f"{b[1]}×{b[2]}", f"{a[1]}×{a[2]}"))


class Join(Kind):
    family = "Joins"
    settings = (INPUTS,)

    def input_count(self, s):
        return s["inputs"]

    def cost(self, s, ins, out):
        return Cost(0, 0, 0, out.elements * (len(ins) - 1))

    def summary(self, s):
        return f"{s['inputs']} in" if s["inputs"] != 2 else ""

    def torch_layer(self, s, ins, out):
        return None


@register
class Add(Join):
    """Element-wise sum of equally shaped inputs (the residual join)."""

    name, title = "Add", "Add (residual)"

    def shape(self, s, ins, report):
        _same_rank(ins, report.name)
        for port in range(1, len(ins)):
            if ins[port] != ins[0]:
                raise _clash(report.name, ins, port, "adds")
        return ins[0]

    def torch_expr(self, s, args):
        return " + ".join(args)


@register
class Multiply(Join):
    """Element-wise product; a C×1×1 input broadcasts over H×W (a squeeze-and-excite gate)."""

    name, title = "Multiply", "Multiply (gate)"
    keeps = ("inputs",)
    stem = "gate"
    settings = ()

    def input_count(self, s):
        return 2

    def shape(self, s, ins, report):
        _same_rank(ins, report.name)
        a, b = ins
        if a == b:
            return a
        if len(a) == 3 and a[0] == b[0] and (b[1:] == (1, 1) or a[1:] == (1, 1)):
            return a if b[1:] == (1, 1) else b
        raise _clash(report.name, ins, 1, "multiplies")

    def cost(self, s, ins, out):
        return Cost(0, 0, 0, out.elements)

    def summary(self, s):
        return ""

    def torch_expr(self, s, args):
        return " * ".join(args)


@register
class Concat(Join):
    """Concatenation along channels (or features, for flat vectors); sizes must agree."""

    name, title = "Concat", "Concat (channels)"
    stem = "cat"

    def shape(self, s, ins, report):
        _same_rank(ins, report.name)
        first = ins[0]
        for port in range(1, len(ins)):
            if ins[port][1:] != first[1:]:
                b = ins[port]
                raise Stop("join.size", f"{report.name} concatenates a {b[1]}×{b[2]} map to a {first[1]}×{first[2]} map",
                           port, (f"{b[1]}×{b[2]}", f"{first[1]}×{first[2]}"))
        return Shape((sum(x[0] for x in ins), *first[1:]))

    def channels(self, s, ins):
        return sum(ins, start=0)

    def cost(self, s, ins, out):
        return Cost()

    def torch_expr(self, s, args):
        return f"torch.cat([{', '.join(args)}], dim=1)"
