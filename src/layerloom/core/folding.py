"""Fold: which blocks are drawn as chips inside the card of the convolution or Linear before them.

A batch norm and an activation that directly follow a convolution (or Linear) whose only consumer
they are become chips of that block's card: ``conv ▸ BN ▸ ReLU`` is one card. They stay blocks of
the design (file, ledger and export do not change); this only decides how the canvas groups them.

>>> from layerloom import Design
>>> d = Design(); x = d.input(3, 32, 32)
>>> c = d.add("Conv2d", x, out_channels=8, kernel=3); b = d.add("BatchNorm2d", c); r = d.add("ReLU", b)
>>> fold_groups(d) == {b: c, r: c}
True
"""
from __future__ import annotations

from layerloom.core.kinds import KINDS
from layerloom.core.kinds.norm_act import Activation

HOST_KINDS = frozenset({"Conv2d", "Pointwise", "Depthwise", "ConvTranspose2d", "Linear"})
NORM_KINDS = frozenset({"BatchNorm2d"})


def is_activation(kind: str) -> bool:
    return isinstance(KINDS.get(kind), Activation)


def chip_label(kind: str) -> str:
    """The text of a chip: ``BN`` for a batch norm, the activation's name otherwise."""
    return "BN" if kind in NORM_KINDS else kind


def _only_consumer(graph, block_id: str) -> str | None:
    outs = graph.out_wires.get(block_id, ())
    if len(outs) != 1:
        return None
    dst = outs[0].dst
    return dst if len(graph.in_wires[dst]) == 1 else None


def fold_groups(graph) -> dict[str, str]:
    """Chip block id → the id of the card (convolution or Linear) it is drawn in, for a graph."""
    chips: dict[str, str] = {}
    blocks = graph.blocks
    for bid, block in blocks.items():
        if block.kind not in HOST_KINDS:
            continue
        nxt = _only_consumer(graph, bid)
        if nxt is not None and blocks[nxt].kind in NORM_KINDS:
            chips[nxt] = bid
            after = _only_consumer(graph, nxt)
            nxt = after if after is not None and is_activation(blocks[after].kind) else None
        if nxt is not None and is_activation(blocks[nxt].kind):
            chips[nxt] = bid
    return chips


def chips_of(chips: dict[str, str]) -> dict[str, list[str]]:
    """Card id → its chip ids in data-flow order (norm before activation), from :func:`fold_groups`
    (which lists each card's chips in that order)."""
    out: dict[str, list[str]] = {}
    for chip, host in chips.items():
        out.setdefault(host, []).append(chip)
    return out
