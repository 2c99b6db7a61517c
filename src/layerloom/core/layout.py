"""Tidy: a layered left → right layout with few wire crossings.

Columns are longest-path levels (the depth of :mod:`layerloom.core.inference`); within a column,
blocks are ordered by the mean row of their neighbours, sweeping forward and back a few times
(the barycentre heuristic), then spread evenly and centred on row 0. Units are scene pixels.
"""
from __future__ import annotations

from layerloom.core.inference import GraphInference

COLUMN, ROW = 230.0, 120.0


def tidy_positions(graph, sweeps: int = 4) -> dict[str, tuple[float, float]]:
    """New positions for every block of ``graph`` (a design or a motif)."""
    inference = GraphInference(graph, None)
    inference.reorder()
    level = inference.level
    columns: dict[int, list[str]] = {}
    for bid in inference.order:
        columns.setdefault(level[bid], []).append(bid)
    row = {bid: float(i) for col in columns.values() for i, bid in enumerate(col)}
    preds = {b: [w.src for w in graph.in_wires[b]] for b in graph.blocks}
    succs = {b: [w.dst for w in graph.out_wires[b]] for b in graph.blocks}
    keys = sorted(columns)
    for sweep in range(sweeps):
        forward = sweep % 2 == 0
        for k in (keys[1:] if forward else reversed(keys[:-1])):
            near = preds if forward else succs
            col = columns[k]
            col.sort(key=lambda b: (sum(row[n] for n in near[b]) / len(near[b])) if near[b] else row[b])
            for i, b in enumerate(col):
                row[b] = float(i)
    return {b: (k * COLUMN, (i - (len(col) - 1) / 2) * ROW) for k, col in columns.items() for i, b in enumerate(col)}
