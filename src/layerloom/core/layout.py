"""Tidy: new positions for every block of a graph, laid out in stage rows (see
:mod:`layerloom.core.stage_rows`), with the chips of folded cards (see :mod:`layerloom.core.folding`)
at their card's place. Units are scene pixels.
"""
from __future__ import annotations

from layerloom.core.folding import fold_groups
from layerloom.core.stage_rows import COLUMN, VIEW, StageLayout, stage_layout

__all__ = ["COLUMN", "graph_shapes", "tidy_layout", "tidy_positions"]


def graph_shapes(graph) -> dict:
    """Output shape (port 0) per block id of a design (from its live analysis); a motif's shapes
    depend on its use, so on its own it has none (one stage: its blocks wrap like one row)."""
    analysis = getattr(graph, "analysis", None)
    if analysis is None:
        return {}
    a = analysis()
    return {b: a.shape(b) for b in graph.blocks}


def tidy_layout(graph, shapes: dict | None = None, fold: bool = True, view=VIEW) -> StageLayout:
    """The stage-row layout of ``graph``: ``shapes`` (block id → output Shape) default to the graph's
    own; with ``fold``, chips share their card's place; ``view`` is the (width, height) to fit."""
    shapes = graph_shapes(graph) if shapes is None else shapes
    return stage_layout(graph, shapes, fold_groups(graph) if fold else {}, view)


def tidy_positions(graph, shapes: dict | None = None, fold: bool = True, view=VIEW) -> dict[str, tuple[float, float]]:
    """New positions for every block of ``graph`` (a design or a motif)."""
    return tidy_layout(graph, shapes, fold, view).positions
