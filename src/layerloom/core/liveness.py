"""Peak live activation memory of a forward pass, by walking blocks in execution order.

Convention: a block's output is allocated when the block runs and freed after its last consumer
has run; the live total is taken after each block's output is allocated and before its inputs are
freed. Blocks whose kind is a view (Flatten, Dropout at inference, Identity, Output) allocate
nothing and keep their source alive. The design's outputs, and outputs nothing reads, stay alive
to the end. A motif instance adds its inner transient memory beyond its inputs and outputs; when
it is the last reader of its inputs they are freed inside it as soon as the inner blocks are done
with them; in a repeated use, every copy after the first reads a tensor made inside the use,
which counts while that copy runs. Counts are elements per sample; the ledger multiplies by batch size and bytes.

When each tensor dies depends only on the wiring, so it is worked out once per order
(:class:`Plan`); a settings edit only adds up the sizes again (plain lists: at a few thousand
blocks one loop beats building numpy arrays from Python values).
"""
from __future__ import annotations

from math import prod

from layerloom.core.kinds import KINDS

VIEWS = frozenset(name for name, kind in KINDS.items() if kind.view)


class Plan:
    """For each step of an order: whether it allocates, the step after which its tensor is freed
    (``len(order)`` for never), and whether it is the last reader of every input it has (worked
    out for motif uses only, the one kind with memory of its own to free: True elsewhere)."""

    __slots__ = ("allocates", "death", "last_reader")

    def __init__(self, graph, order, inputs_outside: bool = False):
        n = len(order)
        blocks, in_wires = graph.blocks, graph.in_wires
        owner: dict[str, int | None] = {}  # block → step whose tensor it hands on (None: not ours)
        allocates = [False] * n
        death = [n] * n  # nothing reads it: it stays to the end
        read = [False] * n
        uses = []
        position = {b: i for i, b in enumerate(order)}
        for i, bid in enumerate(order):  # in order, so a source's owner is known before it is read
            kind = blocks[bid].kind
            ins = in_wires[bid]
            if kind == "Motif":
                uses.append(i)
            if len(ins) > 1:  # the same answer whatever order the wires were made in
                ins = sorted(ins, key=lambda w: (w.dst_port, position.get(w.src, n), w.src_port))
            if inputs_outside and kind == "Input":
                owner[bid] = None
            elif kind in VIEWS and ins:
                owner[bid] = owner.get(ins[0].src)
            elif kind != "Output":
                owner[bid] = i
                allocates[i] = True
            for w in ins:
                o = owner.get(w.src)
                if o is None:
                    continue
                if kind == "Output":  # the design's outputs stay to the end
                    death[o], read[o] = n, True
                elif not read[o] or death[o] < i:
                    death[o], read[o] = i, True
        last = [True] * n
        for i in uses:
            for w in in_wires[order[i]]:
                o = owner.get(w.src)
                if o is None or death[o] != i:
                    last[i] = False
                    break
        self.allocates, self.death, self.last_reader = allocates, death, last


def live_profile(graph, order, results, inputs_outside: bool = False, plan: Plan | None = None) -> list[int]:
    """Live elements per sample at each step of ``order`` (after allocation, before freeing)."""
    plan = plan or Plan(graph, order, inputs_outside)
    allocates, death, last_reader = plan.allocates, plan.death, plan.last_reader
    freed = [0] * (len(order) + 1)  # elements freed after each step
    live, total = [], 0
    for i, bid in enumerate(order):
        r = results.get(bid)
        if r is None:
            live.append(total)
        else:
            if allocates[i]:
                size = sum(map(prod, r.outs))
                total += size
                freed[death[i]] += size
            live.append(total + (r.extra_freed if last_reader[i] else r.extra))
        total -= freed[i]
    return live
