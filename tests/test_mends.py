"""Each mend, applied, clears the finding it was offered for; undo brings the finding back.

Expected shapes follow PyTorch's documented size formulas (common practice); the check that the
mended design really runs is the export's differential test.
"""
from __future__ import annotations

import pytest

from layerloom import Design
from layerloom.core.fileformat import dumps
from layerloom.core.mends import mends_for


def finding(d: Design, code: str):
    found = [f for f in d.findings() if f.code == code]
    assert found, f"expected a {code} finding, got {[f.code for f in d.findings()]}"
    return found[0]


def clears(d: Design, code: str, expect_mends: int | None = None) -> list[str]:
    """Apply every mend offered for the first ``code`` finding (each on a fresh copy of the state),
    checking the finding is gone after it and back after undo. Returns the labels."""
    f = finding(d, code)
    offered = mends_for(d, f)
    assert offered, f"no mend offered for {code}"
    if expect_mends is not None:
        assert len(offered) == expect_mends, [m.label for m in offered]
    before = dumps(d)
    labels = []
    for i in range(len(offered)):
        m = mends_for(d, finding(d, code))[i]
        undo = d.apply(m.edit)
        remaining = [x for x in d.findings() if x.code == code and x.block == f.block and x.path == f.path]
        assert not remaining, f"{m.label!r} left {remaining}"
        d.apply(undo)
        assert dumps(d) == before
        assert finding(d, code) == f
        labels.append(m.label)
    return labels


def chain(d: Design, c=3, h=32, w=32):
    return d.input(c, h, w)


def test_residual_channel_clash_offers_projection_with_stride_and_wider_conv():
    d = Design()
    x = chain(d, 3, 56, 56)
    a = d.add("Conv2d", x, out_channels=64, kernel=3, padding=1)
    b = d.add("Conv2d", a, out_channels=128, kernel=3, stride=2, padding=1)
    b = d.add("BatchNorm2d", b)
    s = d.add("Add", b, a)
    d.add("Output", s)
    f = finding(d, "join.channels")
    assert f.numbers == (64, 128) and "64" in f.message and "128" in f.message
    assert f.badge == "64 ≠ 128"
    labels = clears(d, "join.channels", expect_mends=1)
    assert "1×1 projection to 128 channels and stride 2" in labels[0]
    d.apply(mends_for(d, finding(d, "join.channels"))[0].edit)
    # a 1×1 convolution with stride 2 on 56×56 gives 28×28 (PyTorch Conv2d size formula)
    assert str(d.analysis().shape(s)) == "128×28×28"


def test_same_size_clash_also_offers_to_widen_the_upstream_conv():
    d = Design()
    x = chain(d)
    a = d.add("Conv2d", x, out_channels=16, kernel=3, padding=1)
    b = d.add("Conv2d", a, out_channels=32, kernel=3, padding=1)
    b = d.add("ReLU", d.add("BatchNorm2d", b))
    s = d.add("Add", a, b)
    d.add("Output", s)
    labels = clears(d, "join.channels", expect_mends=2)
    assert labels[1].startswith("Set conv_1's out channels to 32")


def test_gate_channel_clash_in_multiply():
    d = Design()
    x = d.add("Conv2d", chain(d), out_channels=32, kernel=3, padding=1)
    g = d.add("Sigmoid", d.add("Pointwise", d.add("AdaptiveAvgPool2d", x), out_channels=16))
    m = d.add("Multiply", x, g)
    d.add("Output", m)
    assert finding(d, "join.channels").numbers == (16, 32)
    clears(d, "join.channels")


def test_concat_size_clash_pools_the_bigger_branch():
    d = Design()
    x = chain(d, 8, 56, 56)
    a = d.add("Conv2d", x, out_channels=8, kernel=3, stride=2, padding=1)
    c = d.add("Concat", x, a)
    d.add("Output", c)
    assert finding(d, "join.size").numbers == ("28×28", "56×56")
    labels = clears(d, "join.size")
    assert "2×2 average pooling" in labels[0]
    d.apply(mends_for(d, finding(d, "join.size"))[0].edit)
    assert str(d.analysis().shape(c)) == "16×28×28"


def test_uneven_size_clash_uses_adaptive_pooling():
    d = Design()
    x = chain(d, 8, 30, 30)
    a = d.add("Conv2d", x, out_channels=8, kernel=11)  # 30 − 11 + 1 = 20
    d.add("Output", d.add("Add", x, a))
    assert "adaptive" in clears(d, "join.size")[0]


def test_linear_on_a_feature_map():
    d = Design()
    x = d.add("Conv2d", chain(d), out_channels=8, kernel=3, padding=1)
    fc = d.add("Linear", x, out_features=10)
    d.add("Output", fc)
    labels = clears(d, "linear.rank", expect_mends=2)
    assert "global average pool" in labels[0] and "Flatten" in labels[1]
    d.apply(mends_for(d, finding(d, "linear.rank"))[1].edit)
    assert d.analysis().result(fc).ins[0] == (8 * 32 * 32,)


def test_linear_expecting_other_features():
    d = Design()
    x = d.add("Flatten", d.add("AdaptiveAvgPool2d", chain(d)))
    d.add("Output", d.add("Linear", x, out_features=10, in_features=2048))
    f = finding(d, "linear.features")
    assert f.numbers == (3, 2048) and "2048" in f.message
    clears(d, "linear.features")


def test_groups_that_do_not_divide():
    d = Design()
    x = d.add("Conv2d", chain(d, 3), out_channels=12, kernel=1)
    d.add("Output", d.add("Conv2d", x, out_channels=20, kernel=3, padding=1, groups=8))
    assert finding(d, "conv.groups").numbers == (12, 8)
    assert clears(d, "conv.groups") == ["Set groups to 4"]


def test_same_padding_with_stride_and_pool_padding():
    d = Design()
    x = d.add("Conv2d", chain(d), out_channels=8, kernel=3, stride=2, padding="same")
    d.add("Output", d.add("MaxPool2d", x, kernel=2, stride=2, padding=2))
    clears(d, "conv.same_stride")
    d.set(x, padding=1)
    assert clears(d, "pool.padding") == ["Set padding to 1"]


def test_output_padding_of_transposed_conv():
    d = Design()
    d.add("Output", d.add("ConvTranspose2d", chain(d), out_channels=4, kernel=2, stride=2, output_padding=2))
    clears(d, "conv.output_padding")


def test_two_wires_into_one_port_and_a_wire_to_a_missing_port():
    d = Design()
    x = chain(d)
    a = d.add("ReLU", x)
    b = d.add("Sigmoid", x)
    r = d.add("Identity", a)
    d.connect(b, r)
    d.add("Output", r)
    assert len(clears(d, "port.multiple")) == 2
    d2 = Design()
    x = chain(d2)
    s = d2.add("Add", x, x, x, inputs=3)
    d2.add("Output", s)
    d2.set(s, inputs=2)
    assert "input 3" in finding(d2, "port.missing").message
    clears(d2, "port.missing")


def test_loop_of_wires():
    d = Design()
    x = chain(d)
    s = d.add("Add", x, name="join")
    r = d.add("ReLU", s, name="act")
    d.connect(r, s, 1)
    d.add("Output", r)
    f = finding(d, "graph.cycle")
    assert "join" in f.message and "act" in f.message
    clears(d, "graph.cycle")


def test_dead_end_gets_an_output():
    d = Design()
    x = chain(d)
    d.add("Output", d.add("ReLU", x))
    d.add("Sigmoid", x, name="forgotten")
    assert "forgotten" in finding(d, "graph.dead_end").message
    clears(d, "graph.dead_end")


def test_repeated_motif_that_changes_shape():
    d = Design()
    m = d.motif("down")
    m.add("Output", m.add("Conv2d", m.input(), out_channels=16, kernel=3, stride=2, padding=1))
    y = d.use("down", chain(d), repeat=3)
    d.add("Output", y)
    f = finding(d, "motif.repeat_shape")
    assert "×3" in f.message and "16×16×16" in f.message
    clears(d, "motif.repeat_shape")


def test_clash_inside_a_motif_is_mended_inside_it_for_every_use():
    d = Design()
    m = d.motif("unit", width=32)
    i = m.input()
    h = m.add("Conv2d", i, out_channels={"param": "width"}, kernel=3, padding=1)
    m.add("Output", m.add("Add", h, i, name="sum"))
    x = chain(d, 16)
    u1 = d.use("unit", x, name="first")
    u2 = d.use("unit", u1, name="second")
    d.add("Output", u2)
    found = [f for f in d.findings() if f.code == "join.channels"]
    assert [f.block for f in found] == [u1]  # the second use sees no input shape until the first is mended
    assert found[0].message.startswith("first › sum adds")
    assert found[0].path == (m.block("sum").id,)
    labels = clears(d, "join.channels")
    assert "projection to 32 channels" in labels[0]
    d.apply(mends_for(d, found[0])[0].edit)
    assert not d.findings()
    assert str(d.analysis().shape(u2)) == "32×32×32"


@pytest.mark.parametrize("code", ["port.unwired", "shape.collapsed"])
def test_findings_without_a_mend_still_name_the_numbers(code):
    d = Design()
    x = chain(d, 3, 4, 4)
    if code == "port.unwired":
        d.add("Output", d.add("Add", x))
        assert "input 2 of add_1 has no wire" == finding(d, code).message
    else:
        d.add("Output", d.add("Conv2d", x, out_channels=8, kernel=7))
        assert "height 4" in finding(d, code).message and "7" in finding(d, code).message
    assert mends_for(d, finding(d, code)) == []


def test_a_mend_puts_its_new_block_clear_of_every_card():
    """The clash sample's projection goes on the wire from relu_3 to add_2, whose middle (plus the
    usual step down) falls on relu_5's card: it moves further down until it covers no card."""
    from layerloom.core.fileformat import load
    from layerloom.core.stage_rows import CARD_HEIGHT, CARD_WIDTH

    d = load("samples/shelf_gap_counter_clash.loom")
    before = {b.id: b.position for b in d.blocks.values()}
    d.apply(mends_for(d, finding(d, "join.channels"))[0].edit)
    (new,) = [b for b in d.blocks.values() if b.id not in before]
    nx, ny = new.position
    assert all(abs(nx - x) >= CARD_WIDTH or abs(ny - y) >= CARD_HEIGHT for x, y in before.values())


def test_every_block_on_a_loop_is_reported_so_a_mend_never_reveals_new_errors():
    """A self-loop on input_1 and a second loop input_1 → conv_1 → input_1: both blocks are on a
    loop (only input_1 used to be named); removing the self-loop leaves no more errors than before."""
    d = Design()
    x = d.input(3, 8, 8)
    c = d.add("Conv2d", x, out_channels=3, kernel=1)
    d.connect(x, x, 0)
    d.connect(c, x, 0)
    loops = {f.block: f.message for f in d.findings() if f.code == "graph.cycle"}
    assert loops == {x: "input_1 is on a loop of wires: input_1 → input_1",
                     c: "conv_1 is on a loop of wires: conv_1 → input_1 → conv_1"}
    errors = sum(f.severity == "error" for f in d.findings())
    for m in mends_for(d, finding(d, "graph.cycle")):
        undo = d.apply(m.edit)
        assert sum(f.severity == "error" for f in d.findings()) <= errors, m.label
        d.apply(undo)


def test_a_block_on_a_loop_still_names_its_wiring_faults_and_loop_names_follow_block_order():
    """pw_1 is on a loop through output_1 and also has a wire to an input it does not have: that
    fault is named while the loop stands, so breaking the loop reveals no new error; and the loop
    is named the same after saving and loading (wires read back in another order)."""
    from layerloom.core.fileformat import parse

    d = Design()
    x = d.input(3, 8, 8)
    pw = d.add("Pointwise", x, out_channels=3)
    out = d.add("Output", pw)
    d.connect(out, pw, 2)  # closes a loop, onto an input Pointwise does not have
    codes = {(f.block, f.code) for f in d.findings()}
    assert (pw, "port.missing") in codes and (pw, "graph.cycle") in codes
    errors = sum(f.severity == "error" for f in d.findings())
    for m in mends_for(d, finding(d, "graph.cycle")):
        undo = d.apply(m.edit)
        assert sum(f.severity == "error" for f in d.findings()) <= errors, m.label
        d.apply(undo)
    assert d.findings() == parse(dumps(d)).findings()


def test_findings_and_loop_mends_do_not_depend_on_the_order_wires_were_drawn():
    """Two wires to inputs a Sigmoid does not have, drawn port 3 first: listed by port, as after a
    reload. A loop through an Input, an Add and an Output: the loop mend removes no wire whose
    removal would leave more errors than the loop hid."""
    from layerloom.core.fileformat import parse

    d = Design()
    x = d.input(3, 8, 8)
    g = d.add("Sigmoid", x)
    d.add("Output", g)
    d.connect(x, g, 2)
    d.connect(x, g, 1)
    assert d.findings() == parse(dumps(d)).findings()
    a = d.add("Add", x, g)
    out = d.add("Output", a)
    d.connect(out, x, 0)
    errors = sum(f.severity == "error" for f in d.findings())
    for f in [f for f in d.findings() if f.code == "graph.cycle"]:
        for m in mends_for(d, f):
            undo = d.apply(m.edit)
            assert sum(f.severity == "error" for f in d.findings()) <= errors, m.label
            d.apply(undo)


def test_a_mend_its_kind_would_refuse_is_not_offered():
    """A 4-channel 8,192² map added to an 8×1×1 one: the 1×1 projection would need stride 8,192,
    beyond Pointwise's maximum (4,096), so that mend is left out instead of raising (found by the
    editor's property test on a 65,536² map and a squeeze-and-excite gate)."""
    d = Design()
    x = d.input(4, 8192, 8192)
    gate = d.add("AdaptiveAvgPool2d", d.add("Pointwise", x, out_channels=8))
    d.add("Output", d.add("Add", x, gate))
    (clash,) = [f for f in d.findings() if f.code == "join.channels"]
    labels = [m.label for m in mends_for(d, clash)]
    assert not any("stride 8192" in label for label in labels)
    for m in mends_for(d, clash):  # what is offered applies
        undo = d.apply(m.edit)
        d.apply(undo)
