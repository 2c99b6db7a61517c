"""Live activation memory of a design with motif uses, over its blocks as executed.

Grouping blocks into a motif must not change the peak, so a design that uses motifs is opened up:
every use becomes the blocks it runs (ports left out, nested uses opened, each repeat a copy),
wired as if expanded. These steps run in depth order of that opened-up network (longest-path
level from its inputs, ties broken by the order blocks were added, where a use's blocks take the
place of the use, in the motif's own order, copy after copy — the order :func:`expand` gives
them). :mod:`layerloom.core.liveness` then walks them as it walks a plain design.

Each block of the design is given the largest live total of its steps (a plain block has one). A
design whose uses run more than :data:`STEP_LIMIT` blocks keeps the quicker estimate that runs
each use in one piece (:attr:`Result.extra <layerloom.core.inference.Result>`).
"""
from __future__ import annotations

from typing import NamedTuple

from layerloom.core.graph import Wire
from layerloom.core.liveness import Plan, live_profile

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
        self.key: dict[tuple, tuple] = {}  # insertion order, as path of indices
        self.level: dict[tuple, int] = {}

    def add(self, step: tuple, key: tuple, kind: str, outs: tuple, sources: list) -> None:
        wires = [Wire(src, port, step, k) for (src, port), k in sources]
        self.blocks[step], self.in_wires[step], self.key[step] = _Block(kind), wires, key
        self.results[step] = _Step(outs)
        self.level[step] = max((self.level[w.src] + 1 for w in wires), default=0)

    def open(self, graph, inference, path: tuple, key: tuple, feeds: list, stack: tuple = ()) -> list:
        """Add the steps of ``graph`` inferred by ``inference``; ``feeds`` are the steps feeding its
        input ports. Returns the steps its output ports hand on."""
        env: dict[str, list] = {}
        index = {b: i for i, b in enumerate(graph.blocks)}
        port_of = {b.id: k for k, b in enumerate(graph.of_kind("Input"))}
        position = inference.position
        inside = bool(path)
        for bid in inference.order:
            blk, r = graph.blocks[bid], inference.results.get(bid)
            wires = sorted(graph.in_wires[bid], key=lambda w: (w.dst_port, position.get(w.src, 0), w.src_port))
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
                    current = self.open(inner.graph, inner, path + (bid, copy), key + (index[bid], copy), current,
                                        stack + (name,))
                env[bid] = current
            else:
                step = path + (bid,)
                known = [(s, w.dst_port) for s, w in zip(sources, wires) if s is not None]
                self.add(step, key + (index[bid],), blk.kind, r.outs if r is not None else (), known)
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
    uses = [top.results.get(b) for b in top.order if design.blocks[b].kind == "Motif"]
    ran = [r.executed for r in uses if r is not None and r.executed is not None]
    if not ran or sum(e.steps for e in ran) > STEP_LIMIT:
        return None
    net = _Opened(top.analysis)
    net.open(design, top, (), (), [])
    order = sorted(net.blocks, key=lambda s: (net.level[s], net.key[s]))
    live = live_profile(net, order, net.results, plan=Plan(net, order))
    per_block = dict.fromkeys(top.order, None)
    for step, value in zip(order, live):
        mine = per_block[step[0]]
        per_block[step[0]] = value if mine is None else max(mine, value)
    out, last = [], 0
    for value in per_block.values():  # a use that runs no block shows the total before it
        last = value if value is not None else last
        out.append(last)
    return out
