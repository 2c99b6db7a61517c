"""Hover texts of the canvas: a block's kind, settings, shapes, costs, receptive field and findings;
a wire's shape, element count and memory at the design's element type.

Figures are those of the graph shown (inside a motif: of the use the canvas shows). MACs are for
the whole batch, as in Block settings; a wire's memory is batch × elements × bytes per element.
"""
from __future__ import annotations

from math import prod

from layerloom.core import units
from layerloom.core.design import DTYPES
from layerloom.core.graph import Wire
from layerloom.core.kinds import KINDS
from layerloom.gui.canvas.scene import detail_text


def _pair(value) -> str:
    a, b = value
    return f"{a:g}" if a == b else f"{a:g}×{b:g}"


def block_tip(document, block_id: str, total_macs: int) -> str:
    """Several lines about one block of the graph shown (``total_macs``: the graph's, per sample)."""
    graph, design = document.graph, document.design
    block = graph.blocks[block_id]
    kind = KINDS.get(block.kind)
    title = kind.title if kind is not None else block.kind
    lines = [f"{block.name} — {title}"]
    detail = detail_text(block, graph if graph.key else None)
    if detail and detail != title:
        lines.append(f"settings: {detail}")
    results = document.results()
    wires = sorted(graph.in_wires[block_id], key=lambda w: w.dst_port)
    if wires:
        lines.append("in: " + ", ".join(str(wire_shape(results, w) or "?") for w in wires))
    r = results.get(block_id)
    found = [f"{f.severity}: {f.message}" for f in document.findings_by_block().get(block_id, [])]
    if r is None:
        lines.append("out: unknown")
        return "\n".join(lines + found)
    if r.outs:
        lines.append("out: " + ", ".join(str(s) for s in r.outs))
    share = f" ({r.cost.macs / total_macs:.0%} of the network)" if total_macs and r.cost.macs else ""
    lines.append(f"weights: {units.count(r.cost.weights)}")
    lines.append(f"MACs: {units.count(r.cost.macs * design.batch)}{share}, batch {design.batch}")
    lines.append(f"receptive field: {_pair(r.rf)} px, jump {_pair(r.jump)}")
    if block.kind == "Motif":
        lines.append("double-click to open the motif")
    return "\n".join(lines + found)


def wire_shape(results: dict, wire: Wire):
    """The shape ``wire`` carries, or None while unknown."""
    r = results.get(wire.src)
    return r.outs[wire.src_port] if r is not None and wire.src_port < len(r.outs) else None


def wire_tip(document, wire: Wire) -> str:
    """The shape a wire carries, its elements per sample and its memory for the batch."""
    graph, design = document.graph, document.design
    src, dst = graph.blocks[wire.src].name, graph.blocks[wire.dst].name
    shape = wire_shape(document.results(), wire)
    head = f"{src} → {dst}" + (f" (input {wire.dst_port + 1})" if wire.dst_port else "")
    if shape is None:
        return f"{head}\nshape unknown (see Findings)"
    elements = prod(shape)
    memory = elements * design.batch * DTYPES[design.dtype]
    return (f"{head}\n{shape}: {elements:,} elements per sample\n"
            f"{units.size(memory)} at {design.dtype}, batch {design.batch}")
