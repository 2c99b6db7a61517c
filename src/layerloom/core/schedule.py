"""Live activation memory of a design with motif uses, over its blocks as executed.

Grouping blocks into a motif must not change the peak, so a design that uses motifs is opened up:
every use becomes the blocks it runs (ports left out, nested uses opened, each repeat a copy),
wired as if expanded. These steps run in the execution order of that opened-up network, by the
rule of a plain design (:mod:`layerloom.core.wiring`, which depends on the wiring alone, so it is
the order of the design expanded or drawn flat); :mod:`layerloom.core.liveness` then walks them
as it walks a plain design.

Each block of the design is given the largest live total of its steps (a plain block has one). A
design whose uses run more than :data:`STEP_LIMIT` blocks keeps the quicker estimate that runs
each use in one piece (:attr:`Result.extra <layerloom.core.inference.Result>`).
"""
from __future__ import annotations

from typing import NamedTuple

from layerloom.core.graph import Wire
from layerloom.core.liveness import live_profile
from layerloom.core.wiring import wire_up

STEP_LIMIT = 200_000


class _Block(NamedTuple):
    kind: str


class _Step(NamedTuple):
    outs: tuple
    extra: int = 0
    extra_freed: int = 0


class _Opened:
    """The opened-up network: steps keyed by their path of block ids (and repeat numbers)."""

    def __init__(self, analysis):
        self.analysis = analysis
        self.blocks: dict[tuple, _Block] = {}
        self.in_wires: dict[tuple, list[Wire]] = {}
        self.results: dict[tuple, _Step] = {}

    def add(self, step: tuple, kind: str, outs: tuple, sources: list) -> None:
        self.blocks[step] = _Block(kind)
        self.in_wires[step] = [Wire(src, port, step, k) for (src, port), k in sources]
        self.results[step] = _Step(outs)

    def open(self, graph, inference, path: tuple, feeds: list, stack: tuple = ()) -> list:
        """Add the steps of ``graph`` inferred by ``inference``; ``feeds`` are the steps feeding its
        input ports. Returns the steps its output ports hand on."""
        env: dict[str, list] = {}
        port_of = {b.id: k for k, b in enumerate(graph.of_kind("Input"))}
        inside = bool(path)
        for bid, wires in inference.wiring.in_order():
            blk, r = graph.blocks[bid], inference.results.get(bid)
            sources = [self._source(env, w) for w in wires]
            if inside and blk.kind == "Input":
                env[bid] = [feeds[port_of[bid]] if port_of[bid] < len(feeds) else None]
            elif inside and blk.kind == "Output":
                env[bid] = sources[:1] or [None]
            elif r is not None and r.executed is not None:
                name, ins, params, given = r.executed.run
                inner = self.analysis.motif_run(self.analysis.design.motifs[name], ins, dict(params), stack,
                                                given).inner
                current = sources
                for copy in range(r.executed.repeat):
                    current = self.open(inner.graph, inner, path + (bid, copy), current, stack + (name,))
                env[bid] = current
            else:
                step = path + (bid,)
                known = [(s, w.dst_port) for s, w in zip(sources, wires) if s is not None]
                self.add(step, blk.kind, r.outs if r is not None else (), known)
                env[bid] = [(step, p) for p in range(len(r.outs))] if r is not None else []
        if not inside:
            return []
        return [env.get(b.id, [None])[0] for b in graph.of_kind("Output")]

    @staticmethod
    def _source(env, w: Wire):
        outs = env.get(w.src)
        return outs[w.src_port] if outs is not None and w.src_port < len(outs) else None


def opened_profile(design, top) -> list[int] | None:
    """Live elements per sample for each block of ``top.order`` (the largest over the steps it
    runs), or None when the design uses no motif or its uses run more than STEP_LIMIT blocks."""
    if "Motif" not in top.wiring.kinds:
        return None
    uses = [top.results.get(b) for b in top.wiring.of_kind("Motif")]
    ran = [r.executed for r in uses if r is not None and r.executed is not None]
    if not ran or sum(e.steps for e in ran) > STEP_LIMIT:
        return None
    net = _Opened(top.analysis)
    net.open(design, top, (), [])
    wiring = wire_up(net.blocks, net.in_wires, [(b,) for b in top.wiring.of_kind("Output")])  # in port order
    live = live_profile(wiring, net.results)
    per_block = dict.fromkeys(top.order, None)
    for step, value in zip(wiring.order, live):
        mine = per_block[step[0]]
        per_block[step[0]] = value if mine is None else max(mine, value)
    out, last = [], 0
    for value in per_block.values():  # a use that runs no block shows the total before it
        last = value if value is not None else last
        out.append(last)
    return out
