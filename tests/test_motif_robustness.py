"""Motifs cannot lose work: each case here once crashed (KeyError, IndexError) or misled; each is
now an EditError with a message, a finding, or a mend that acts on the right place."""
from __future__ import annotations

import pytest

from layerloom import Design
from layerloom.core.edits import EditError, remove_blocks
from layerloom.core.fileformat import dumps, parse
from layerloom.core.findings import ERROR
from layerloom.core.mends import mends_for
from layerloom.core.motif_ops import expand, expose, make_motif


def errors(d: Design) -> list:
    return [f for f in d.findings() if f.severity == ERROR]


def test_make_motif_inside_a_motif_keeps_the_parameters_its_blocks_use():
    d = Design()
    m = d.motif("outer", width=8)
    a = m.add("Pointwise", m.input(), out_channels={"param": "width"})
    b = m.add("ReLU", a)
    m.add("Output", b)
    y = d.use("outer", d.input(4, 8, 8), width=6)
    d.add("Output", y)
    edit, inst = make_motif(d, [a, b], name="inner", graph="outer")
    d.apply(edit)
    assert d.motifs["inner"].params == {"width": 8}
    assert m.blocks[inst].settings["width"] == {"param": "width"}  # passed on from the outer motif
    assert not errors(d) and str(d.analysis().shape(y)) == "6×8×8"  # the use's value still reaches the block
    again = parse(dumps(d))  # the saved file opens again
    assert again.ledger().totals == d.ledger().totals


def test_expand_refuses_an_output_port_wired_onward_inside_the_motif():
    d = Design()
    m = d.motif("m")
    first = m.add("Output", m.add("ReLU", m.input()))
    m.add("Output", m.add("ReLU", first))  # wired from an output port: a finding, not a crash
    u = d.use("m", d.input(4, 8, 8))
    d.add("Output", u)
    with pytest.raises(EditError, match="wired from the output port"):
        expand(d, u)


def test_expand_refuses_repeating_a_motif_whose_ports_cannot_chain():
    d = Design()
    m = d.motif("pair")
    i1, i2 = m.input(), m.input()
    m.add("Output", m.add("Add", i1, i2))
    x = d.input(4, 8, 8)
    u = d.use("pair", x, x, repeat=2)
    d.add("Output", u)
    with pytest.raises(EditError, match="2 input and 1 output ports"):
        expand(d, u)


def test_expand_refuses_a_parameter_value_the_setting_does_not_accept():
    d = Design()
    m = d.motif("m", width=4)
    m.add("Output", m.add("Pointwise", m.input(), out_channels={"param": "width"}))
    u = d.use("m", d.input(4, 8, 8), width=0)  # 0 channels: a finding in the use
    d.add("Output", u)
    assert any(f.code == "motif.param" for f in d.findings())
    with pytest.raises(EditError, match="Out channels 0 is below"):
        expand(d, u)


def test_motif_with_no_input_ports_repeated_gives_findings():
    d = Design()
    m = d.motif("m")
    m.add("Output", m.add("ReLU"))
    d.input(4, 8, 8)
    d.add("Output", d.use("m", repeat=2))
    codes = {f.code for f in d.findings()}
    assert "port.unwired" in codes and "motif.repeat_shape" not in codes


def test_repeated_motif_with_an_error_inside_reports_only_that_error():
    d = Design()
    m = d.motif("unit")
    i = m.input()
    m.add("Output", m.add("Add", m.add("Pointwise", i, out_channels=64), i))
    d.add("Output", d.use("unit", d.input(32, 7, 7), repeat=2))
    assert [f.code for f in errors(d)] == ["join.channels"]


def _two_deep(inner_fault) -> tuple[Design, str]:
    """A design using motif ``outer`` that uses motif ``inner``, whose inside ``inner_fault`` spoils."""
    d = Design()
    inner = d.motif("inner", width=4)
    y = inner.add("Pointwise", inner.input(), out_channels={"param": "width"}, name="pw")
    inner.add("Output", inner_fault(inner, y))
    outer = d.motif("outer", width=4)
    outer.add("Output", outer.add("Motif", outer.input(), motif="inner", width={"param": "width"}))
    u = d.use("outer", d.input(4, 8, 8), width=6)
    d.add("Output", u)
    return d, u


def test_mends_list_for_a_wire_to_a_missing_port_two_motifs_deep():
    def fault(m, y):
        r = m.add("ReLU", y)
        m.connect(y, r, 2)  # ReLU has one input
        return r

    d, _ = _two_deep(fault)
    f = next(f for f in d.findings() if f.code == "port.missing")
    assert len(f.path) == 2
    offered = mends_for(d, f)
    assert offered
    d.apply(offered[0].edit)
    assert not errors(d)


def test_mend_location_with_an_inner_finding_and_a_wire_from_a_missing_output_port():
    d = Design()
    m = d.motif("unit")
    i = m.input()
    m.add("Output", m.add("Add", m.add("Pointwise", i, out_channels=8), i))  # 8 ≠ 4 inside
    x = d.input(4, 8, 8)
    conv = d.add("Pointwise", x, out_channels=4)
    u = d.use("unit", conv)
    d.connect((conv, 3), u, 1)  # from an output Pointwise does not have, to a port the use does not have
    d.add("Output", u)
    inner = next(f for f in d.findings() if f.path)
    assert [mend.label for mend in mends_for(d, inner)]  # located through the use despite the stray wire


def test_groups_mend_with_out_channels_as_a_motif_parameter():
    d = Design()
    m = d.motif("grouped", width=6)
    m.add("Output", m.add("Conv2d", m.input(), out_channels={"param": "width"}, kernel=3, padding=1, groups=4))
    d.add("Output", d.use("grouped", d.input(8, 8, 8), width=6))
    f = next(f for f in d.findings() if f.code == "conv.groups")
    offered = mends_for(d, f)
    assert [m.label for m in offered] == ["Set groups to 2"]  # gcd(8 in, 6 out) = 2, largest divisor ≤ 4
    d.apply(offered[0].edit)
    assert not errors(d)


def _bottleneck_in_two_stages() -> tuple[Design, str, str]:
    """One bottleneck motif used at 256 and at 512 channels; its shortcut fits only 256."""
    d = Design()
    m = d.motif("bottleneck", width=64)
    i = m.input()
    y = m.add("Pointwise", i, out_channels={"param": "width"})
    y = m.add("Conv2d", y, out_channels={"param": "width"}, kernel=3, padding=1)
    y = m.add("Pointwise", y, out_channels=256, name="expand")
    m.add("Output", m.add("Add", y, i))
    x = d.input(256, 14, 14)
    first = d.use("bottleneck", x, name="stage1")
    second = d.use("bottleneck", d.add("Pointwise", first, out_channels=512), name="stage2", width=128)
    d.add("Output", second)
    return d, first, second


def test_mends_inside_a_shared_motif_act_on_this_use_and_never_add_errors():
    d, first, second = _bottleneck_in_two_stages()
    f = next(f for f in errors(d) if f.code == "join.channels")
    assert f.block == second
    offered = mends_for(d, f)
    labels = [m.label for m in offered]
    assert any("for stage2 only" in lab for lab in labels)
    assert any("own copy of motif 'bottleneck'" in lab for lab in labels)
    before = dumps(d)
    for mend in offered:
        undo = d.apply(mend.edit)
        assert not errors(d), (mend.label, errors(d))  # stage1 keeps working
        assert str(d.analysis().shape(first)) == "256×14×14"
        d.apply(undo)
        assert dumps(d) == before


def test_a_mend_changing_every_use_says_so_and_is_offered_only_when_harmless():
    d = Design()
    m = d.motif("unit")
    m.add("Output", m.add("Linear", m.add("Flatten", m.input()), in_features=12, out_features=4))
    a = d.use("unit", d.input(3, 2, 2), name="a")  # 12 features arrive: fine
    b = d.use("unit", d.input(3, 1, 2), name="b")  # 6 arrive: a clash
    d.add("Output", a)
    d.add("Output", b)
    f = next(f for f in errors(d) if f.code == "linear.features")
    labels = [mend.label for mend in mends_for(d, f)]
    every = [lab for lab in labels if "for all its 2 uses" in lab]
    assert every and "Take fc_1's in features from the wire" in every[0]  # in features 0 suits both uses
    for mend in mends_for(d, f):
        undo = d.apply(mend.edit)
        assert not errors(d), mend.label
        d.apply(undo)


def test_no_output_is_offered_after_a_use_of_a_motif_without_output_ports():
    d = Design()
    x = d.input(4, 8, 8)
    side = d.add("ReLU", x)  # its result is used by nothing
    d.add("Output", d.add("BatchNorm2d", x))
    edit, inst = make_motif(d, [side], name="unused")
    d.apply(edit)
    motif = d.graph("unused")
    (port,) = [b for b, blk in motif.blocks.items() if blk.kind == "Output"]  # its end's port, taken away
    d.apply(remove_blocks(motif, [port]))
    assert "Output" not in [blk.kind for blk in motif.blocks.values()]
    f = next(f for f in d.findings() if f.code == "graph.dead_end" and f.block == inst)
    assert mends_for(d, f) == []  # an Output wired from an output it does not have would be an error


def test_expanding_a_use_whose_repeat_is_a_motif_parameter_is_refused_not_raised():
    """Inside a motif, a use's repeat exposed as a parameter has no one number of copies (found by
    LAYERLOOM_LONG=1: TypeError comparing the reference with 1)."""
    d = Design()
    x = d.input(8, 16, 16)
    relu = d.add("ReLU", x)
    d.add("Output", relu)
    edit, inner = make_motif(d, [relu], name="unit")
    d.apply(edit)
    edit, outer = make_motif(d, [inner], name="tower")
    d.apply(edit)
    d.apply(expose(d, "tower", inner, "repeat", "copies"))
    with pytest.raises(EditError, match="repeat is motif parameter 'copies'"):
        expand(d, inner, graph="tower")
