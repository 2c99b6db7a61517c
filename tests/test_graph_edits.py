"""Core edits for everyday graph editing: insert on a wire, delete with bridging, replace a wire,
and Quick add's words. Each edit is checked to undo exactly (same blocks, wires and order).

Shapes follow PyTorch's Conv2d size formula and the fact that batch norm and ReLU keep their input
shape (common practice).
"""
import pytest

from layerloom.core import edits
from layerloom.core.design import Design
from layerloom.core.graph import Wire
from layerloom.core.quick_add_words import choices, match_rank, rank


def chain():
    d = Design("porch-chain")
    x = d.input(3, 32, 32, name="frame")
    c = d.add("Conv2d", x, out_channels=16, name="conv")
    b = d.add("BatchNorm2d", c, name="bn")
    r = d.add("ReLU", b, name="relu")
    o = d.add("Output", r, name="out")
    return d, x, c, b, r, o


def snapshot(d):
    return [(b.id, b.kind, b.name) for b in d.blocks.values()], sorted(d.wires)


def test_insert_on_a_wire_wires_both_sides_at_the_given_place_and_undoes():
    d, x, c, b, r, o = chain()
    before = snapshot(d)
    edit = edits.insert_on_wire(d, Wire(b, 0, r, 0), [("Pointwise", {"out_channels": 8})], position=(300, 40))
    inverse = d.apply(edit)
    (new,) = edits.added_blocks(edit)
    assert d.blocks[new].position == (300, 40)
    assert set(d.wires) >= {Wire(b, 0, new, 0), Wire(new, 0, r, 0)} and Wire(b, 0, r, 0) not in d.wires
    # a 1×1 convolution keeps height and width and sets the channels to its filters (common practice)
    assert str(d.analysis().shape(r)) == "8×32×32"
    assert not d.findings()
    d.apply(inverse)
    assert snapshot(d) == before


def test_a_join_cannot_go_on_a_wire():
    d, x, c, b, r, o = chain()
    with pytest.raises(edits.EditError, match="one input and one output.*Add has 2 inputs"):
        edits.insert_on_wire(d, Wire(b, 0, r, 0), [("Add", {})])


def test_delete_bridges_a_one_in_one_out_block_and_undo_restores_it():
    d, x, c, b, r, o = chain()
    before = snapshot(d)
    inverse = d.apply(edits.remove_bridging(d, [b]))
    assert b not in d.blocks and Wire(c, 0, r, 0) in d.wires
    assert not d.findings()  # no gap, no missing-input error
    d.apply(inverse)
    assert snapshot(d) == before


def test_delete_a_run_of_blocks_bridges_across_the_run_to_every_consumer():
    d, x, c, b, r, o = chain()
    side = d.add("Pointwise", b, out_channels=4, name="side")  # bn feeds two consumers
    d.apply(edits.remove_bridging(d, [c, b]))
    assert {Wire(x, 0, r, 0), Wire(x, 0, side, 0)} <= set(d.wires)


def test_a_join_is_removed_without_bridging_and_plain_delete_leaves_the_gap():
    d = Design("join")
    x = d.input(8, 16, 16)
    a = d.add("ReLU", x)
    j = d.add("Add", x, a)
    o = d.add("Output", j)
    d.apply(edits.remove_bridging(d, [j]))
    assert not d.in_wires[o]
    d2, x, c, b, r, o = chain()
    d2.apply(edits.remove_blocks(d2, [b]))
    assert not d2.in_wires[r]
    assert any(f.block == r for f in d2.findings())  # the gap shows as a finding on relu


def test_replace_wire_takes_the_port_over_and_undoes():
    d, x, c, b, r, o = chain()
    before = snapshot(d)
    edit = edits.replace_wire(d, Wire(c, 0, r, 0))
    assert edit.label == "Rewire relu"
    inverse = d.apply(edit)
    assert d.in_wires[r] == [Wire(c, 0, r, 0)]
    d.apply(inverse)
    assert snapshot(d) == before
    with pytest.raises(edits.EditError, match="already wired"):
        edits.replace_wire(d, Wire(b, 0, r, 0))


@pytest.mark.parametrize("typed, kind", [
    ("1x1", "Pointwise"), ("pointwise", "Pointwise"), ("pw", "Pointwise"), ("dw", "Depthwise"),
    ("depthwise", "Depthwise"), ("bn", "BatchNorm2d"), ("batchnorm", "BatchNorm2d"), ("fc", "Linear"),
    ("dense", "Linear"), ("linear", "Linear"), ("gap", "AdaptiveAvgPool2d"), ("global pool", "AdaptiveAvgPool2d"),
    ("avg", "AvgPool2d"), ("max", "MaxPool2d"), ("cat", "Concat"), ("concat", "Concat"), ("add", "Add"),
    ("residual", "Add"), ("conv", "Conv2d"), ("relu", "ReLU"), ("out", "Output"), ("b", "BatchNorm2d"),
])
def test_quick_add_understands_the_trades_words(typed, kind):
    assert choices(typed)[0].kind == kind


def test_quick_add_offers_motifs_and_ranks_prefix_then_word_start_then_substring():
    assert choices("se")[0].motif == "library:se_gate"
    assert choices("squeeze")[0].motif == "library:se_gate"
    assert any(c.motif == "design:stem_unit" for c in choices("stem", ["stem_unit"]))
    names = ["global_pool", "pool_2", "maxpool_1", "pooled"]
    ranked = rank("pool", names, lambda n: ((n,),))
    assert ranked == ["pool_2", "pooled", "global_pool", "maxpool_1"]  # prefix, word start, substring
    assert match_rank("zz", [("conv",)]) is None
    assert choices("qqqq") == []


@pytest.mark.parametrize("dtype, torch_dtype", [("fp32", "float32"), ("fp16", "float16"), ("bf16", "bfloat16"),
                                                ("int8", "int8")])
def test_design_fields_are_checked_edits_and_each_element_type_has_its_size(dtype, torch_dtype):
    import torch

    size = torch.empty(0, dtype=getattr(torch, torch_dtype)).element_size()  # PyTorch as the outside reference
    d, x, c, b, r, o = chain()
    inverse = d.apply(d.field_edit("dtype", dtype))
    d.apply(d.field_edit("batch", 4))
    assert d.ledger().out_memory[0] == 3 * 32 * 32 * 4 * size  # the input: 3·32·32 elements × batch 4
    d.apply(inverse)
    assert d.dtype == "fp32"
    for name, bad, why in (("dtype", "fp8", "not one of"), ("batch", 0, "whole number"), ("name", " ", "needs a name")):
        with pytest.raises(edits.EditError, match=why):
            d.field_edit(name, bad)


@pytest.mark.parametrize("src_port, dst_port", [(0, -1), (-1, 0), (0, 64), (64, 0)])
def test_a_wire_to_a_port_no_file_can_hold_is_refused(src_port, dst_port):
    """Ports are numbered 0 to 63 in a file (resources/loom.schema.json); a wire to input -1 used to
    be accepted (the editor wired into an Input block's 'last input'), and the saved file then
    could not be opened again."""
    d = Design()
    x = d.input(3, 8, 8, name="frame")
    y = d.add("ReLU", x, name="act")
    with pytest.raises(edits.EditError, match=rf"frame to act from output {src_port} to input {dst_port}: "
                                              r"ports are numbered 0 to 63"):
        edits.replace_wire(d, Wire(x, src_port, y, dst_port))


def test_a_batch_beyond_what_a_file_holds_is_refused():
    """The schema holds a batch up to 65,536; a larger one was taken (Design settings' Batch field)
    and the saved file could then not be opened again."""
    from layerloom.core import fileformat

    d = Design()
    d.add("Output", d.input(3, 8, 8))
    d.apply(d.field_edit("batch", 65_536))
    assert fileformat.parse(fileformat.dumps(d)).batch == 65_536
    for bad in (65_537, 10 ** 20, 0):
        with pytest.raises(edits.EditError, match=rf"batch size must be a whole number from 1 to 65,536, not {bad}"):
            d.field_edit("batch", bad)
