"""Live activation memory along a forward pass, worked by hand for a small residual design."""
from __future__ import annotations

from layerloom import Design


def test_live_profile_of_a_residual_unit_worked_by_hand():
    d = Design()
    x = d.input(16, 32, 32)                                    # 16·32·32 = 16,384 elements
    c = d.add("Conv2d", x, out_channels=32, kernel=3, padding=1)  # 32,768
    b = d.add("BatchNorm2d", c)                                # 32,768
    r = d.add("ReLU", b)                                       # 32,768
    p = d.add("Pointwise", r, out_channels=16)                 # 16,384
    s = d.add("Add", p, x)                                     # 16,384
    f = d.add("Flatten", s)                                    # a view: no new memory
    d.add("Output", f)
    a = d.analysis()
    live = dict(zip(a.order, a.live_profile()))
    # after each block's output is allocated, before its inputs are freed; the input lives until the Add
    assert live[x] == 16_384
    assert live[c] == 16_384 + 32_768
    assert live[b] == 16_384 + 32_768 + 32_768      # the conv output is freed only after the norm ran
    assert live[r] == 16_384 + 32_768 + 32_768
    assert live[p] == 16_384 + 32_768 + 16_384
    assert live[s] == 16_384 + 16_384 + 16_384      # input, pointwise output and the sum
    assert live[f] == 16_384                         # the sum, seen through the view
    ledger = d.ledger()
    assert ledger.totals.peak_memory == 81_920 * 4 and ledger.totals.peak_block == b  # fp32: 4 bytes
    d.set_field("dtype", "fp16")
    d.set_field("batch", 3)
    assert d.ledger().totals.peak_memory == 81_920 * 2 * 3


def test_a_motif_use_frees_its_input_inside_when_it_is_the_last_reader():
    d = Design()
    m = d.motif("widen")
    h = m.add("Conv2d", m.input(), out_channels=64, kernel=3, padding=1)
    m.add("Output", m.add("Pointwise", h, out_channels=8))
    x = d.input(8, 16, 16)                           # 2,048 elements
    y = d.use("widen", x)                            # inside: 16,384 then 2,048
    d.add("Output", y)
    flat = Design()
    x2 = flat.input(8, 16, 16)
    h2 = flat.add("Conv2d", x2, out_channels=64, kernel=3, padding=1)
    flat.add("Output", flat.add("Pointwise", h2, out_channels=8))
    # by hand: the input (2,048) and the conv output (16,384) live together, then the conv output and
    # the result (2,048): the peak is 18,432 elements either way
    assert max(d.analysis().live_profile()) == max(flat.analysis().live_profile()) == 18_432


def test_live_memory_does_not_depend_on_the_order_wires_were_made():
    """A view with two wires on its port (an error) hands on one source's tensor; which one must
    not depend on whether the wire was drawn last (in the editor) or read first (from the file)."""
    from layerloom.core import fileformat

    d = Design()
    x = d.input(2, 4, 4)
    a = d.add("Pointwise", x, out_channels=6)
    v = d.add("Identity", a)
    d.add("Output", d.add("Pointwise", d.add("Pointwise", v, out_channels=2), out_channels=2))
    d.ledger()
    d.connect(x, v, 0)
    fresh = fileformat.parse(fileformat.dumps(d))
    assert list(d.ledger().live) == list(fresh.ledger().live)
