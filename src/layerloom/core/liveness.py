"""Peak live activation memory of a forward pass, by walking blocks in execution order.

Convention: a block's output is allocated when the block runs and freed after its last consumer
has run; the peak is taken after each block's output is allocated and before its inputs are
freed. Blocks whose kind is a view (Flatten, Dropout at inference, Identity, Output) allocate
nothing and keep their source alive. The design's outputs stay alive to the end. A motif
instance adds its inner transient memory beyond its inputs and outputs; when it is the last reader
of its inputs they are freed inside it as soon as the inner blocks are done with them.
Counts are elements per sample; the ledger multiplies by batch size and bytes per element.
"""
from __future__ import annotations

from math import prod

from layerloom.core.kinds import KINDS

VIEWS = frozenset(name for name, kind in KINDS.items() if kind.view)


def live_profile(graph, order, results, inputs_outside: bool = False) -> list[int]:
    """Live elements per sample at each step of ``order`` (after allocation, before freeing).

    With ``inputs_outside`` (a motif's inside), Input blocks are tensors owned by the caller: they
    count nothing here and are never freed here."""
    blocks, out_wires, in_wires = graph.blocks, graph.out_wires, graph.in_wires
    owner: dict[str, str] = {}
    refs: dict[str, int] = {}
    size: dict[str, int] = {}
    live = 0
    profile = []
    append = profile.append
    for bid in order:
        r = results.get(bid)
        if r is None:
            append(live)
            continue
        kind_name = blocks[bid].kind
        ins = in_wires[bid]
        if inputs_outside and kind_name == "Input":
            owner[bid] = None
        elif kind_name in VIEWS and ins:
            src = owner.get(ins[0].src)
            owner[bid] = src
            if src is not None:
                refs[src] += len(out_wires[bid]) + (kind_name == "Output")
        elif kind_name != "Output":
            outs = r.outs
            elems = prod(outs[0]) if len(outs) == 1 else sum(map(prod, outs))
            owner[bid] = bid
            size[bid] = elems
            refs[bid] = len(out_wires[bid])
            live += elems
        extra = r.extra
        if r.extra_freed != extra and all(refs.get(owner.get(w.src), 0) == 1 for w in ins):
            extra = r.extra_freed  # this motif use is the last reader of its inputs: they die inside it
        append(live + extra)
        for w in ins:
            src = owner.get(w.src)
            if src is not None:
                refs[src] -= 1
                if refs[src] == 0:
                    live -= size[src]
    return profile
