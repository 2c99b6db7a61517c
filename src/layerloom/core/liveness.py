"""Peak live activation memory of a forward pass, by walking blocks in execution order.

Convention: a block's output is allocated when the block runs and freed after its last consumer
has run; the live total is taken after each block's output is allocated and before its inputs are
freed. Blocks whose kind is a view (Flatten, Dropout at inference, Identity, Output) allocate
nothing and keep their source alive. The design's outputs, and outputs nothing reads, stay alive
to the end. A motif instance adds its inner transient memory beyond its inputs and outputs; when
it is the last reader of its inputs they are freed inside it as soon as the inner blocks are done
with them; in a repeated use, every copy after the first reads a tensor made inside the use,
which counts while that copy runs. Counts are elements per sample; the ledger multiplies by batch size and bytes.

When each tensor dies depends only on the wiring, so it is worked out once per change of wiring
(:class:`Plan`, over the order of :mod:`layerloom.core.wiring`); a settings edit only adds up the sizes again (plain lists: at a few thousand
blocks one loop beats building numpy arrays from Python values).
"""
from __future__ import annotations

from math import prod

from layerloom.core.kinds import KINDS
from layerloom.core.wiring import Wiring

VIEWS = frozenset(name for name, kind in KINDS.items() if kind.view)


class Plan:
    """For each step of an order: whether it allocates, the step after which its tensor is freed
    (``len(order)`` for never), and whether it is the last reader of every input it has (worked
    out for motif uses only, the one kind with memory of its own to free: True elsewhere)."""

    __slots__ = ("allocates", "death", "last_reader")

    def __init__(self, wiring: Wiring, inputs_outside: bool = False):
        steps, srcs, kinds = wiring.steps, wiring.srcs, wiring.kinds
        n = len(steps)
        owner: list[int | None] = [None] * len(kinds)  # block → step whose tensor it hands on (None: not ours)
        allocates = [False] * n
        death = [n] * n  # nothing reads it: it stays to the end
        read = [False] * n
        uses = []
        for i, k in enumerate(steps):  # in order, so a source's owner is known before it is read
            kind = kinds[k]
            ss = srcs[k]
            if kind == "Output":  # a view whose tensor stays to the end: the design's output
                for s in ss:
                    o = owner[s]
                    if o is not None:
                        death[o], read[o] = n, True
                if ss:
                    owner[k] = owner[ss[0]]
                continue
            if kind in VIEWS and ss:
                owner[k] = owner[ss[0]]
            elif not (inputs_outside and kind == "Input"):  # an outside input is not ours
                owner[k] = i
                allocates[i] = True
                if kind == "Motif":
                    uses.append(i)
            for s in ss:
                o = owner[s]
                if o is not None and (not read[o] or death[o] < i):
                    death[o], read[o] = i, True
        last = [True] * n
        for i in uses:
            for s in srcs[steps[i]]:
                o = owner[s]
                if o is None or death[o] != i:
                    last[i] = False
                    break
        self.allocates, self.death, self.last_reader = allocates, death, last


def live_profile(wiring: Wiring, results, inputs_outside: bool = False, plan: Plan | None = None) -> list[int]:
    """Live elements per sample at each step of ``wiring.order`` (after allocation, before freeing)."""
    order = wiring.order
    plan = plan or Plan(wiring, inputs_outside)
    allocates, death, last_reader = plan.allocates, plan.death, plan.last_reader
    freed = [0] * (len(order) + 1)  # elements freed after each step (written before the step is reached)
    live: list[int] = []
    add, total = live.append, 0
    for r, allocated, dies, last, gone in zip(map(results.get, order), allocates, death, last_reader, freed):
        if r is None:
            add(total)
        else:
            if allocated:
                outs = r.outs
                size = prod(outs[0]) if len(outs) == 1 else sum(map(prod, outs))
                total += size
                freed[dies] += size
            add(total + (r.extra_freed if last else r.extra))
        total -= gone
    return live
