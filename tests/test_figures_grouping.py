"""Figures never depend on how a design is grouped: a network, the same network with some of its
blocks made into a motif, and that motif expanded again give the same totals, the same figures
per block as executed, and the same Depth ledger steps."""
from __future__ import annotations

import pytest

from layerloom import Design
from layerloom.core import schedule
from layerloom.core.ledger import Ledger
from layerloom.core.motif_ops import expand, make_motif
from layerloom.core.targets import preset
from flatten import expanded_copy


def twelve_blocks() -> tuple[Design, list[str]]:
    """An invented 12-block classifier for a phone: input, seven 3×3 convolutions, pooled head, output."""
    d = Design("phone-sorter")
    x = d.input(3, 96, 96)
    ids = [x]
    for out, stride in ((16, 2), (24, 1), (24, 1), (32, 2), (32, 1), (48, 2), (64, 2)):
        x = d.add("Conv2d", x, out_channels=out, kernel=3, stride=stride, padding=1)
        ids.append(x)
    x = d.add("AdaptiveAvgPool2d", x)
    ids.append(x)
    ids.append(d.add("Linear", d.add("Flatten", x), out_features=10))
    d.add("Output", ids[-1])
    d.set_field("target", preset("phone, 2 big CPU cores"))
    return d, ids


def figures(d: Design):
    L = Ledger(d.analysis())
    t = L.totals._replace(peak_block=None, latency=None)
    return t, L.totals.latency, sum(L.moved), int(L.out_memory.sum()), int(L.steps[-1])


def test_latency_and_every_total_are_the_same_grouped_and_expanded():
    d, ids = twelve_blocks()
    assert len(d.blocks) == 12
    flat = figures(d)
    edit, inst = make_motif(d, ids[2:7], name="middle")
    d.apply(edit)
    grouped = figures(d)
    d.apply(expand(d, inst))
    expanded = figures(d)
    for other in (grouped, expanded):
        assert other[0] == flat[0]
        assert other[1] == pytest.approx(flat[1], rel=1e-12)  # seconds: a sum in another order
        assert other[2:] == flat[2:]


def test_a_repeated_nested_motif_counts_every_block_it_executes():
    d = Design()
    inner = d.motif("pair", width=8)
    y = inner.add("ReLU", inner.add("Conv2d", inner.input(), out_channels={"param": "width"}, kernel=3, padding=1))
    inner.add("Output", y)
    outer = d.motif("stage", width=8)
    z = outer.add("Motif", outer.input(), motif="pair", repeat=2, width={"param": "width"})
    outer.add("Output", outer.add("BatchNorm2d", z))
    x = d.input(8, 16, 16)
    d.add("Output", d.use("stage", x, repeat=3, width=8))
    d.set_field("target", preset("small ARM board, 4 cores"))
    flat = expanded_copy(d)
    assert len(flat.blocks) == 2 + 3 * (2 * 2 + 1)  # Input, Output, 3 × (2 × (conv, relu) + bn)
    g, f = figures(d), figures(flat)
    assert g[0] == f[0] and g[2:] == f[2:] and g[1] == pytest.approx(f[1], rel=1e-12)


@pytest.mark.parametrize("opened", [True, False], ids=["opened up", "each use in one piece"])
def test_peak_memory_of_a_repeated_motif_whose_input_stays_alive(opened, monkeypatch):
    """Hand-worked, one element per tensor: x → [mid × 2] → add(·, x), where mid is
    i → pw → relu → add(·, i). In the second mid, x (kept for the outer add), the first mid's
    output a (kept for the inner add), pw and relu are alive at once: 4 elements, 16 bytes in fp32.
    The second copy's input is made inside the use, so it counts."""
    d = Design()
    unit = d.motif("mid")
    i = unit.input()
    unit.add("Output", unit.add("Add", unit.add("ReLU", unit.add("Pointwise", i, out_channels=1)), i))
    block = d.motif("block")
    i = block.input()
    block.add("Output", block.add("Add", block.add("Motif", i, motif="mid", repeat=2), i))
    d.add("Output", d.use("block", d.input(1, 1, 1)))
    if not opened:  # the estimate kept for designs whose uses run too many blocks to open up
        monkeypatch.setattr(schedule, "STEP_LIMIT", 0)
    assert Ledger(expanded_copy(d).analysis()).totals.peak_memory == 16
    assert Ledger(d.analysis()).totals.peak_memory == 16


def _output_rfs(d: Design) -> list:
    return [d.analysis().result(b.id).rf for b in d.of_kind("Output")]


def test_receptive_field_follows_each_output_and_each_input_of_a_motif():
    """Common practice: rf' = rf + (k − 1)·jump along a path. A motif with two outputs hands each
    its own receptive field (1 after a ReLU, 5 after a 5×5), and a motif with two inputs keeps each
    branch's own: a 3×3 on the plain input gives 3, although the other input has rf 3, jump 2."""
    d = Design()
    split = d.motif("split")
    i = split.input()
    split.add("Output", split.add("ReLU", i))
    split.add("Output", split.add("Conv2d", i, out_channels=4, kernel=5, padding=2))
    pair = d.motif("pair")
    coarse, fine = pair.input(), pair.input()
    pair.add("Output", pair.add("Conv2d", fine, out_channels=4, kernel=3, padding=1))
    pair.add("Output", pair.add("ReLU", coarse))
    x = d.input(4, 16, 16)
    u = d.use("split", x)
    d.add("Output", (u, 0))
    d.add("Output", (u, 1))
    strided = d.add("Conv2d", x, out_channels=4, kernel=3, stride=2, padding=1)
    v = d.use("pair", strided, x)
    d.add("Output", (v, 0))
    flat = expanded_copy(d)
    assert _output_rfs(d) == [(1, 1), (5, 5), (3, 3)]
    assert sorted(_output_rfs(flat)) == sorted(_output_rfs(d))
