"""A design with every motif use expanded into plain blocks (nested uses too), for comparing the
figures of a grouped design with those of the same network drawn flat."""
from __future__ import annotations

from layerloom.core.fileformat import dumps, parse
from layerloom.core.motif_ops import expand


def expanded_copy(design):
    """A copy of ``design`` with no motif instance left at the top level."""
    flat = parse(dumps(design))
    while True:
        uses = [b.id for b in flat.blocks.values() if b.kind == "Motif"]
        if not uses:
            return flat
        for bid in uses:
            flat.apply(expand(flat, bid))
