"""What the editor shows inside a motif: its blocks inferred as in one use of the motif.

A motif has no shapes of its own; they come from the instance that feeds it. :func:`first_use`
finds the first instance of a motif in the design's depth order (looking through instances of
other motifs that contain it), and :func:`inner_inference` runs the motif with that use's input
shapes and parameter values. A motif with no use is inferred with unknown inputs, so its shapes
stay unknown and only findings about its wiring show.

    >>> from layerloom import Design
    >>> d = Design(); m = d.motif("halve", width=8)
    >>> _ = m.add("Output", m.add("Conv2d", m.input(), out_channels={"param": "width"}, kernel=3, stride=2, padding=1))
    >>> x = d.input(3, 32, 32); _ = d.add("Output", d.use("halve", x, name="stem", width=16))
    >>> view = inner_inference(d, "halve")
    >>> view.names, str(view.inference.results[m.block("conv_1").id].outs[0])
    (('stem',), '16×16×16')
"""
from __future__ import annotations

from typing import NamedTuple

from layerloom.core.findings import Stop
from layerloom.core.inference import GraphInference


class MotifView(NamedTuple):
    """A motif's inference as seen through one use of it."""

    inference: GraphInference
    use: tuple[str, ...]  # instance ids from the design down to the use shown; () when it has no use
    names: tuple[str, ...]  # those instances' block names


def feed(design, graph, inference: GraphInference, instance_id: str) -> GraphInference | None:
    """The inference of the motif used by ``instance_id`` of ``graph``, fed that instance's input
    shapes and parameter values; None when it is not a usable instance."""
    inst = graph.blocks.get(instance_id)
    if inst is None or inst.kind != "Motif":
        return None
    motif = design.motifs.get(inst.settings["motif"])
    if motif is None or motif.name in inference.stack:
        return None
    try:
        settings = inference.resolved_settings(inst) if inference.params is not None else inst.settings
    except Stop:
        return None
    feeds = {w.dst_port: w for w in graph.in_wires[instance_id]}
    ins = []
    for port in range(len(motif.ports()[0])):
        w = feeds.get(port)
        r = inference.results.get(w.src) if w is not None else None
        ins.append(r.outs[w.src_port] if r is not None and w.src_port < len(r.outs) else None)
    params = {**motif.params, **{k: v for k, v in settings.items() if k not in ("motif", "repeat")}}
    run = GraphInference(motif, inference.analysis, tuple(ins), params, inference.stack + (motif.name,))
    run.run()
    return run


def follow(design, use: tuple[str, ...]) -> tuple[GraphInference, tuple[str, ...]] | None:
    """The inference of the motif reached through the instances ``use`` (outermost first) and the
    instances' names; None when the chain no longer leads anywhere."""
    analysis = design.analysis().refresh()
    graph, inference, names = design, analysis.top, []
    for bid in use:
        inner = feed(design, graph, inference, bid)
        if inner is None:
            return None
        names.append(graph.blocks[bid].name)
        graph, inference = inner.graph, inner
    return inference, tuple(names)


def _containing(design, name: str) -> set[str]:
    """Motifs that hold an instance of motif ``name``, directly or through other motifs."""
    direct = {m.name: {b.settings["motif"] for b in m.of_kind("Motif")} for m in design.motifs.values()}
    found: set[str] = set()
    grew = True
    while grew:
        grew = False
        for m, uses in direct.items():
            if m not in found and (name in uses or uses & found):
                found.add(m)
                grew = True
    return found


def first_use(design, name: str) -> tuple[str, ...] | None:
    """Instance ids from the design down to the first use of motif ``name`` (in depth order, the
    design's first, then inside each instance), or None when nothing uses it."""
    through = _containing(design, name)

    def search(graph, inference, chain):
        for bid in inference.order:
            blk = graph.blocks[bid]
            if blk.kind != "Motif":
                continue
            used = blk.settings["motif"]
            if used == name:
                return chain + (bid,)
            if used in through:
                inner = feed(design, graph, inference, bid)
                found = search(inner.graph, inner, chain + (bid,)) if inner is not None else None
                if found:
                    return found
        return None

    return search(design, design.analysis().refresh().top, ())


def inner_inference(design, name: str, use: tuple[str, ...] | None = None) -> MotifView:
    """Motif ``name`` inferred as in ``use`` (instance ids, outermost first) or, when that is not
    given or no longer leads to it, as in its :func:`first_use`. With no use, its inputs are unknown."""
    motif = design.motifs[name]

    def through(chain) -> MotifView | None:
        reached = follow(design, chain) if chain else None
        return MotifView(reached[0], tuple(chain), reached[1]) if reached and reached[0].graph is motif else None

    view = (through(use) if use else None) or through(first_use(design, name))
    if view is not None:
        return view
    inference = GraphInference(motif, design.analysis(), (), dict(motif.params), (name,))
    inference.run()
    return MotifView(inference, (), ())
