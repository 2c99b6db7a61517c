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
(:class:`Plan`); a settings edit only recomputes the sizes, with numpy.
"""
from __future__ import annotations

from math import prod

import numpy as np

from layerloom.core.kinds import KINDS

VIEWS = frozenset(name for name, kind in KINDS.items() if kind.view)


class Plan:
    """For each step of an order: whether it allocates, the step after which its tensor is freed
    (``len(order)`` for never), and whether it is the last reader of every input it has."""

    __slots__ = ("allocates", "death", "last_reader")

    def __init__(self, graph, order, inputs_outside: bool = False):
        n = len(order)
        blocks, in_wires = graph.blocks, graph.in_wires
        owner: dict[str, int | None] = {}  # block → step whose tensor it hands on (None: not ours)
        allocates = [False] * n
        death = [n] * n  # nothing reads it: it stays to the end
        read = [False] * n
        position = {b: i for i, b in enumerate(order)}
        for i, bid in enumerate(order):  # in order, so a source's owner is known before it is read
            kind = blocks[bid].kind
            ins = in_wires[bid]
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
        last = [all((o := owner.get(w.src)) is not None and death[o] == i for w in in_wires[bid])
                for i, bid in enumerate(order)]
        self.allocates = np.array(allocates, dtype=bool)
        self.death = np.array(death, dtype=np.int64)
        self.last_reader = np.array(last, dtype=bool)


def live_profile(graph, order, results, inputs_outside: bool = False, plan: Plan | None = None) -> np.ndarray:
    """Live elements per sample at each step of ``order`` (after allocation, before freeing)."""
    plan = plan or Plan(graph, order, inputs_outside)
    n = len(order)
    if not n:
        return np.zeros(0, dtype=np.int64)
    rs = [results.get(b) for b in order]
    sizes = np.array([sum(map(prod, r.outs)) if r is not None else 0 for r in rs], dtype=np.int64)
    sizes[~plan.allocates] = 0
    freed = np.bincount(np.minimum(plan.death, n), weights=sizes, minlength=n + 1)[:n].astype(np.int64)
    live = np.cumsum(sizes) - np.concatenate(([0], np.cumsum(freed)[:-1]))
    extra = np.array([(r.extra_freed if last else r.extra) if r is not None else 0
                      for r, last in zip(rs, plan.last_reader)], dtype=np.int64)
    return live + extra
