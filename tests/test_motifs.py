"""Motifs: making, expanding and parameterising them, the library, and outside checks of their costs."""
from __future__ import annotations

import pytest

from layerloom import Design
from layerloom.core.fileformat import dumps, parse
from layerloom.core.motif_library import LIBRARY, define, library_edit
from layerloom.core.motif_ops import expand, expose, make_motif
from reference_motifs import resnet50_with_motifs
from reference_nets import resnet50


def test_resnet50_with_bottleneck_motifs_matches_the_flat_design_and_torchvision():
    d = resnet50_with_motifs()
    t = d.ledger().totals
    assert not d.findings()
    # torchvision model documentation (ResNet50_Weights.IMAGENET1K_V1): 25,557,032 params, 4.09 GFLOPS
    assert t.weights == 25_557_032
    assert t.macs == pytest.approx(4.09e9, rel=0.005)
    flat = resnet50().ledger().totals
    assert t._replace(peak_block=None) == flat._replace(peak_block=None)  # block ids differ, nothing else


def test_multi_branch_unit_reproduces_googlenet_inception_3a():
    """Szegedy et al., "Going Deeper with Convolutions" (arXiv 1409.4842), Table 1, inception (3a):
    28×28×192 input; #1×1 64, #3×3 reduce 96, #3×3 128, #5×5 reduce 16, #5×5 32, pool proj 32;
    ops 128M (its params column is not reproducible and is not used)."""
    d = Design()
    define(d, "multi_branch", "inception")
    x = d.input(192, 28, 28)
    y = d.use("inception", x, b1=64, b3_reduce=96, b3=128, b5_reduce=16, b5=32, pool_proj=32)
    d.add("Output", y)
    assert str(d.analysis().shape(y)) == "256×28×28"  # 64 + 128 + 32 + 32 channels (Table 1, output size)
    assert round(d.ledger().totals.macs / 1e6) == 128


def small_chain() -> tuple[Design, list[str]]:
    d = Design()
    x = d.input(16, 32, 32)
    a = d.add("Conv2d", x, out_channels=32, kernel=3, padding=1)
    b = d.add("BatchNorm2d", a)
    c = d.add("ReLU", b)
    e = d.add("Pointwise", c, out_channels=16)
    s = d.add("Add", e, x)
    d.add("Output", s)
    return d, [x, a, b, c, e, s]


def test_make_motif_keeps_costs_and_undo_restores_exactly():
    d, (x, a, b, c, e, s) = small_chain()
    before, totals = dumps(d), d.ledger().totals
    edit, inst = make_motif(d, [a, b, c, e], name="squeeze_unit")
    undo = d.apply(edit)
    m = d.motifs["squeeze_unit"]
    assert [blk.kind for blk in m.blocks.values()].count("Input") == 1
    assert d.blocks[inst].kind == "Motif" and a not in d.blocks
    assert str(d.analysis().shape(inst)) == "16×32×32"
    same = totals._replace(peak_block=None)
    assert d.ledger().totals._replace(peak_block=None) == same and not d.findings()
    again = parse(dumps(d))
    assert dumps(again) == dumps(d) and again.ledger().totals._replace(peak_block=None) == same
    d.apply(undo)
    assert dumps(d) == before


def test_make_motif_of_a_chain_ending_nowhere_gives_its_end_an_output_port():
    """A selection whose last block feeds nothing yet (a chain being built) still hands its tensor
    on: the motif gets an Output port for it, so the use has the shape of that block and the motif
    itself has no "no Output" finding. Shape from Conv2d's size formula (common practice)."""
    d = Design()
    x = d.input(16, 32, 32)
    a = d.add("Conv2d", x, out_channels=32, kernel=3, padding=1, stride=2)
    b = d.add("ReLU", a)
    totals, flat_codes = d.ledger().totals, sorted(f.code for f in d.findings())
    edit, inst = make_motif(d, [a, b], name="stem_unit")
    d.apply(edit)
    kinds = [blk.kind for blk in d.motifs["stem_unit"].blocks.values()]
    assert kinds.count("Output") == 1
    assert str(d.analysis().shape(inst)) == "32×16×16"  # (32 + 2·1 − 3) // 2 + 1 = 16
    assert d.ledger().totals._replace(peak_block=None) == totals._replace(peak_block=None)
    assert sorted(f.code for f in d.findings()) == flat_codes  # the same open end, now at the use


def test_make_motif_of_a_branch_point_gives_ports_for_every_crossing():
    d = Design()
    x = d.input(8, 16, 16)
    a = d.add("Conv2d", x, out_channels=8, kernel=3, padding=1)
    r = d.add("ReLU", a)
    g = d.add("Sigmoid", a)
    m = d.add("Multiply", r, g)
    d.add("Output", m)
    d.add("Output", a)
    totals = d.ledger().totals
    edit, inst = make_motif(d, [a, r, g])
    d.apply(edit)
    ins, outs = d.motifs["motif"].ports()
    assert (len(ins), len(outs)) == (1, 3)  # relu, sigmoid and the conv itself leave the selection
    assert d.ledger().totals.macs == totals.macs and not [f for f in d.findings() if f.severity == "error"]


def test_make_motif_refuses_ports_and_empty_selection():
    d, ids = small_chain()
    with pytest.raises(ValueError, match="Input and Output blocks stay outside"):
        make_motif(d, ids[:2])
    with pytest.raises(ValueError, match="select the blocks"):
        make_motif(d, [])


def test_expand_dissolves_repeats_into_the_same_network():
    d = resnet50_with_motifs(64)
    totals = d.ledger().totals
    shapes = [str(d.analysis().shape(b.id)) for b in d.of_kind("Output")]
    unit = next(b.id for b in d.of_kind("Motif") if b.settings["repeat"] == 5)
    undo = d.apply(expand(d, unit))
    assert len([b for b in d.blocks.values() if b.name.startswith(d.blocks[next(iter(d.blocks))].name)]) >= 1
    assert d.ledger().totals == totals
    assert [str(d.analysis().shape(b.id)) for b in d.of_kind("Output")] == shapes
    d.apply(undo)
    assert d.ledger().totals == totals


def test_exposed_parameter_changes_only_the_instances_that_set_it():
    d, (x, a, b, c, e, s) = small_chain()
    edit, inst = make_motif(d, [a, b, c], name="widen")
    d.apply(edit)
    m = d.motifs["widen"]
    d.apply(expose(d, "widen", a, "out_channels", "width"))
    assert m.params == {"width": 32} and m.blocks[a].settings["out_channels"] == {"param": "width"}
    assert str(d.analysis().shape(inst)) == "32×32×32"
    d.set(inst, width=48)
    assert str(d.analysis().shape(inst)) == "48×32×32"
    with pytest.raises(ValueError, match="only whole-number settings"):
        expose(d, "widen", b, "affine", "flag")
    d.set(inst, width=0)
    f = next(f for f in d.findings() if f.code == "motif.param")
    assert "0" in f.message and f.path == (a,)


@pytest.mark.parametrize("entry", LIBRARY, ids=[m.key for m in LIBRARY])
def test_every_library_motif_is_well_formed_in_a_fitting_context(entry):
    d = Design()
    edit, name = library_edit(d, entry.key)
    d.apply(edit)
    # give each motif an input whose channels fit its identity shortcut or gate
    channels = {"residual_unit": 64, "bottleneck": 256, "inverted_residual": 16, "se_gate": 64}.get(entry.key, 32)
    x = d.input(channels, 28, 28)
    y = d.use(name, x)
    d.add("Output", y)
    assert not d.findings(), [f.message for f in d.findings()]
    assert d.analysis().shape(y) is not None
    again_edit, again_name = library_edit(d, entry.key)
    assert again_name == f"{entry.key}_2"  # a second drop gets a free name


def test_library_motif_edit_undoes_cleanly():
    d = Design()
    before = dumps(d)
    undo = d.apply(library_edit(d, "se_gate")[0])
    assert "se_gate" in d.motifs
    d.apply(undo)
    assert dumps(d) == before
