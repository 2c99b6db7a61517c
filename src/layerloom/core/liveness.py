"""Peak live activation memory of a forward pass, by walking blocks in execution order.

Convention: a block's output is allocated when the block runs and freed after its last consumer
has run; the peak is taken after each block's output is allocated and before its inputs are
freed. Blocks whose kind is a view (Flatten, Dropout at inference, Identity, Output) allocate
nothing and keep their source alive. The design's outputs stay alive to the end. A motif
instance adds its inner transient memory (its inner peak beyond its own inputs and outputs).
Counts are elements per sample; the ledger multiplies by batch size and bytes per element.
"""
from __future__ import annotations

from layerloom.core.kinds import KINDS


def live_profile(graph, order, results) -> list[int]:
    """Live elements per sample at each step of ``order`` (after allocation, before freeing)."""
    blocks, out_wires, in_wires = graph.blocks, graph.out_wires, graph.in_wires
    owner: dict[str, str] = {}
    refs: dict[str, int] = {}
    size: dict[str, int] = {}
    live = 0
    profile = []
    for bid in order:
        r = results.get(bid)
        if r is None:
            profile.append(live)
            continue
        kind_name = blocks[bid].kind
        consumers = len(out_wires[bid])
        if KINDS[kind_name].view and in_wires[bid]:
            src = owner.get(in_wires[bid][0].src)
            owner[bid] = src
            if src is not None:
                refs[src] += consumers + (1 if kind_name == "Output" else 0)
        else:
            elems = sum(o.elements for o in r.outs) if kind_name != "Output" else 0
            owner[bid], size[bid], refs[bid] = bid, elems, consumers
            live += elems
        profile.append(live + r.extra)
        for w in in_wires[bid]:
            src = owner.get(w.src)
            if src is not None:
                refs[src] -= 1
                if refs[src] == 0:
                    live -= size[src]
    return profile
