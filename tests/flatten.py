"""A design with every motif use expanded into plain blocks (nested uses too), for comparing the
figures of a grouped design with those of the same network drawn flat."""
from __future__ import annotations

from layerloom.core.fileformat import dumps, parse
from layerloom.core.motif_ops import expand


def expanded_with_owners(design):
    """A copy of ``design`` with no motif instance left, and for each of ``design``'s instances the
    ids of the plain blocks it became."""
    flat = parse(dumps(design))
    owner: dict[str, str] = {}  # new block → the original instance it came from
    while True:
        uses = [b.id for b in flat.blocks.values() if b.kind == "Motif"]
        if not uses:
            break
        for bid in uses:
            before = set(flat.blocks)
            flat.apply(expand(flat, bid))
            for new in set(flat.blocks) - before:
                owner[new] = owner.get(bid, bid)
    groups: dict[str, list[str]] = {}
    for new, original in owner.items():
        if new in flat.blocks:
            groups.setdefault(original, []).append(new)
    return flat, groups


def expanded_copy(design):
    """A copy of ``design`` with no motif instance left at the top level."""
    return expanded_with_owners(design)[0]
