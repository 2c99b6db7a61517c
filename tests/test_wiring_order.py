"""The execution order depends on the wiring, never on the order of blocks or wires in the file,
also where the wiring has an error (two wires on one port) or blocks reach no Output."""
from __future__ import annotations

import json

from layerloom import Design
from layerloom.core import fileformat
from layerloom.core.ledger import Ledger


def _reversed(d: Design) -> Design:
    """``d`` saved with its lists of blocks and wires reversed (Input and Output blocks keep their
    order among themselves: it numbers the ports), and loaded."""
    data = json.loads(fileformat.dumps(d))
    ends = iter([b for b in data["blocks"] if b["kind"] in ("Input", "Output")])
    blocks = data["blocks"][::-1]
    data["blocks"] = [next(ends) if b["kind"] in ("Input", "Output") else b for b in blocks]
    data["wires"] = data["wires"][::-1]
    return fileformat.parse(json.dumps(data))


def _order_and_live(d: Design):
    L = Ledger(d.analysis())
    return list(L.order), dict(zip(L.order, L.live)), L.totals.peak_memory


def _two_wires_on_one_port():
    d = Design()
    x = d.input(4, 8, 8)
    a = d.add("Conv2d", x, out_channels=32, kernel=3, padding=1)
    b = d.add("MaxPool2d", d.add("Pointwise", x, out_channels=2), kernel=1)
    s = d.add("Add", a, x)
    d.connect(b, s, 0)  # input 1 of the Add now has two wires: port.multiple
    d.add("Output", s)
    return d, a, b


def test_two_wires_on_one_port_are_walked_in_an_order_drawn_from_the_wiring():
    """Before, the two sources were walked in the order they were added: the conv first as
    drawn, the pool's branch first with the file's blocks reversed."""
    d, a, b = _two_wires_on_one_port()
    assert any(f.code == "port.multiple" for f in d.findings())
    assert _order_and_live(_reversed(d)) == _order_and_live(d)
    order = d.analysis().order
    assert order.index(a) < order.index(b)  # the conv (level 1) is ranked before the pool (level 2)


def test_sources_alike_in_their_wiring_on_one_port_are_walked_by_id_whatever_the_file_order():
    d = Design()
    x = d.input(4, 8, 8)
    a = d.add("Pointwise", x, out_channels=16)
    b = d.add("Pointwise", x, out_channels=2)  # alike in wiring, unlike in size
    s = d.add("Add", a, x)
    d.connect(b, s, 0)
    d.add("Output", s)
    assert _order_and_live(_reversed(d)) == _order_and_live(d)


def test_blocks_that_reach_no_output_are_ordered_by_what_they_feed_then_by_id():
    """Three ReLUs on the input feed no Output: one feeds a fourth block, two feed nothing. Before,
    the alike ones kept the order they were added, so reversing the file reversed them."""
    d = Design()
    x = d.input(4, 8, 8)
    d.add("Output", d.add("Pointwise", x, out_channels=4))
    feeding = d.add("ReLU", x)
    d.add("Pointwise", feeding, out_channels=64)
    bare = [d.add("ReLU", x), d.add("ReLU", x)]
    order = d.analysis().order
    assert set(d.analysis().top.wiring.unreached) >= {feeding, *bare}
    assert _order_and_live(_reversed(d)) == _order_and_live(d)
    assert order.index(bare[0]) < order.index(bare[1]) < order.index(feeding)  # ids b3 < b4; feeding nothing first
