"""Import from PyTorch: networks written directly in torch (tests/reference_torch_nets.py) come in
with the weights and MACs PyTorch counts and the shapes PyTorch computes, block by block, read
like their source (repeated submodules as motifs), and export back to a module that verifies.

Outside references: PyTorch's ``sum(p.numel() for p in model.parameters())``, its
``torch.utils.flop_counter.FlopCounterMode`` (2 FLOPs per multiply-accumulate), and the output
shapes of the module run on the CPU; He et al. 2016 for ResNet-50's 16 bottlenecks (3, 4, 6, 3).
"""
from __future__ import annotations

import pytest
import torch
from hypothesis import given, settings
from hypothesis import strategies as st
from reference_torch_nets import ResNet50, SeedlingCounter
from torch.utils.flop_counter import FlopCounterMode

from layerloom.export import module_source, verify
from layerloom.importing import import_module


def torch_counts(model, shape) -> tuple[int, int]:
    """Parameters and MACs (FlopCounterMode / 2) of ``model`` on one sample of ``shape``."""
    with FlopCounterMode(display=False) as counter, torch.no_grad():
        model(torch.zeros(1, *shape))
    return sum(p.numel() for p in model.parameters()), counter.get_total_flops() // 2


def torch_shapes(model, shape) -> dict[str, tuple]:
    """Every traced node's output shape (without the batch) when the module runs on the CPU."""
    gm = torch.fx.symbolic_trace(model)
    seen = {}

    class Record(torch.fx.Interpreter):
        def run_node(self, n):
            out = super().run_node(n)
            if isinstance(out, torch.Tensor):
                seen[n.name] = tuple(out.shape[1:])
            return out

    with torch.no_grad():
        Record(gm).run(torch.zeros(1, *shape))
    return seen


NETS = [(ResNet50, (3, 224, 224)), (SeedlingCounter, (3, 96, 96))]


@pytest.fixture(scope="module", params=NETS, ids=lambda n: n[0].__name__ if isinstance(n, tuple) else n)
def imported(request):
    cls, shape = request.param
    torch.manual_seed(0)
    model = cls().eval()
    return model, shape, import_module(model, shape), import_module(model, shape, motifs=False)


def test_ledger_equals_pytorchs_parameters_and_flop_counter(imported):
    model, shape, with_motifs, flat = imported
    params, macs = torch_counts(model, shape)
    for design in (with_motifs.design, flat.design):
        t = design.ledger().totals
        assert t.weights == params  # PyTorch: sum(p.numel())
        assert abs(t.macs - macs) <= 0.005 * macs  # FlopCounterMode / 2
        assert not [f for f in design.findings() if f.severity == "error"]


def test_every_block_has_the_shape_pytorch_computes(imported):
    model, shape, _, flat = imported
    expected = torch_shapes(model, shape)
    analysis = flat.design.analysis()
    compared = 0
    for bid, origin in flat.origins.items():
        block = flat.design.blocks[bid]
        if block.kind in ("Input", "Output") or origin not in expected:
            continue
        if block.name.endswith("_flatten"):  # the second block of a mean without keepdim
            continue
        assert tuple(analysis.shape(bid)) == expected[origin], block.name  # PyTorch on the CPU
        compared += 1
    assert compared >= len(flat.design.blocks) - 4


def test_imported_design_exports_and_verifies(imported):
    _, _, with_motifs, _ = imported
    report = verify(with_motifs.design, module_source(with_motifs.design))
    assert report.ok, report.table()


def test_resnet50_reads_like_its_source():
    """Two bottleneck motifs: with a projection (first of each stage, 4 uses) and without (the rest,
    one use per stage stacked with repeat: 2, 3, 5, 2); 16 bottlenecks in all (He et al. 2016, Table 1)."""
    model = ResNet50().eval()
    imported = import_module(model, (3, 224, 224))
    d = imported.design
    assert sorted(d.motifs) == ["bottleneck", "bottleneck_2"]
    uses = {name: [b for b in d.blocks.values() if b.kind == "Motif" and b.settings["motif"] == name]
            for name in d.motifs}
    assert len(uses["bottleneck"]) == 4 and [b.name for b in uses["bottleneck"]] == [
        "layer1_0", "layer2_0", "layer3_0", "layer4_0"]
    assert [b.settings["repeat"] for b in uses["bottleneck_2"]] == [2, 3, 5, 2]
    assert sum(b.settings["repeat"] for b in d.blocks.values() if b.kind == "Motif") == 3 + 4 + 6 + 3
    projection = d.motifs["bottleneck"]
    assert len(projection.of_kind("Conv2d")) + len(projection.of_kind("Pointwise")) == 4  # 3 + the shortcut's
    assert [b.settings["conv1_out_channels"] for b in uses["bottleneck"]] == [64, 128, 256, 512]
    assert [b.settings["conv2_stride"] for b in uses["bottleneck"]] == [1, 2, 2, 2]
    assert {b.name for b in projection.blocks.values()} >= {"conv1", "bn1", "conv2", "conv3", "downsample_0", "add"}
    flat = import_module(model, (3, 224, 224), motifs=False).design.ledger().totals
    assert d.ledger().totals[:4] == flat[:4]  # weights, buffers, MACs, other operations
    row = {b.name: b.position[1] for b in d.blocks.values()}  # Tidy: one stage row per resolution
    assert [row[f"layer{k}_0"] == row[f"layer{k}_1"] for k in range(1, 5)] == [True] * 4
    assert row["layer1_0"] < row["layer2_0"] < row["layer3_0"] < row["layer4_0"]


@pytest.mark.parametrize("layer, kind, settings", [
    (torch.nn.Conv2d(8, 16, 3, 2, 1, bias=False), "Conv2d", {"kernel": 3, "stride": 2, "padding": 1, "bias": False}),
    (torch.nn.Conv2d(8, 16, 1), "Pointwise", {"out_channels": 16, "bias": True}),
    (torch.nn.Conv2d(8, 8, 3, padding=1, groups=8), "Depthwise", {"multiplier": 1}),
    (torch.nn.Conv2d(8, 24, 5, padding=2, groups=8), "Depthwise", {"multiplier": 3, "kernel": 5}),
    (torch.nn.Conv2d(8, 16, 3, padding=1, groups=4), "Conv2d", {"groups": 4}),
    (torch.nn.Conv2d(8, 16, (1, 7), padding=(0, 3)), "Conv2d", {"kernel": (1, 7), "padding": (0, 3)}),
    (torch.nn.ConvTranspose2d(8, 4, 4, 2, 1), "ConvTranspose2d", {"kernel": 4, "stride": 2, "padding": 1}),
    (torch.nn.BatchNorm2d(8, eps=1e-3), "BatchNorm2d", {"eps": 1e-3}),
    (torch.nn.LeakyReLU(0.2), "LeakyReLU", {"negative_slope": 0.2}),
    (torch.nn.AvgPool2d(2, ceil_mode=True), "AvgPool2d", {"kernel": 2, "stride": 2, "ceil_mode": True}),
    (torch.nn.Upsample(scale_factor=2, mode="bilinear"), "Upsample", {"scale": 2, "mode": "bilinear"}),
])
def test_one_layer_maps_to_our_kind_with_its_settings(layer, kind, settings):
    """Settings come from the module's attributes (PyTorch's own layer is the source)."""
    d = import_module(torch.nn.Sequential(layer), (8, 9, 9)).design
    (block,) = [b for b in d.blocks.values() if b.kind not in ("Input", "Output")]
    assert block.kind == kind
    assert {k: block.settings[k] for k in settings} == settings
    with torch.no_grad():
        out = layer.eval()(torch.zeros(1, 8, 9, 9))
    assert tuple(d.analysis().shape(block.id)) == tuple(out.shape[1:])  # PyTorch's shape


def test_a_module_called_twice_is_noted():
    class Twice(torch.nn.Module):
        def __init__(self):
            super().__init__()
            self.conv = torch.nn.Conv2d(4, 4, 3, padding=1)

        def forward(self, x):
            return self.conv(self.conv(x))

    imported = import_module(Twice(), (4, 8, 8))
    assert any("conv is called 2 times" in n for n in imported.notes)


def test_forward_arguments_with_defaults_are_traced_with_them():
    class Optional(torch.nn.Module):
        def __init__(self):
            super().__init__()
            self.conv = torch.nn.Conv2d(3, 4, 3)

        def forward(self, x, extra=None, doubled=False):
            y = self.conv(x)
            return y * 2 if doubled else y

    d = import_module(Optional(), (3, 8, 8)).design
    assert [b.kind for b in d.blocks.values()] == ["Input", "Conv2d", "Output"]


LAYERS = st.sampled_from(["conv", "pointwise", "depthwise", "grouped", "bn", "relu", "hardswish", "maxpool", "avgpool",
                          "upsample", "dropout"])


def _layer(kind: str, ch: int, draw) -> tuple[torch.nn.Module, int]:
    """One PyTorch layer for ``ch`` input channels and its output channels."""
    nn = torch.nn
    out = draw(st.sampled_from([4, 8, 12]))
    if kind == "conv":
        k = draw(st.sampled_from([1, 3, 5]))
        return nn.Conv2d(ch, out, k, draw(st.integers(1, 2)), k // 2, bias=draw(st.booleans())), out
    if kind == "pointwise":
        return nn.Conv2d(ch, out, 1), out
    if kind == "depthwise":
        return nn.Conv2d(ch, ch * 2, 3, padding=1, groups=ch, bias=False), ch * 2
    if kind == "grouped":
        return nn.Conv2d(ch, 8, 3, padding=2, dilation=2, groups=4 if ch % 4 == 0 else 1), 8
    simple = {"bn": nn.BatchNorm2d(ch), "relu": nn.ReLU(), "hardswish": nn.Hardswish(),
              "maxpool": nn.MaxPool2d(2, ceil_mode=True), "avgpool": nn.AvgPool2d(3, 1, 1),
              "upsample": nn.Upsample(scale_factor=2), "dropout": nn.Dropout(0.1)}
    return simple[kind], ch


@st.composite
def stacks(draw):
    """A random nn.Sequential of mappable layers, then a pooled classifier."""
    ch, layers = 4, []
    for kind in draw(st.lists(LAYERS, min_size=1, max_size=8)):
        layer, ch = _layer(kind, ch, draw)
        layers.append(layer)
    layers += [torch.nn.AdaptiveAvgPool2d(1), torch.nn.Flatten(), torch.nn.Linear(ch, 3)]
    return torch.nn.Sequential(*layers).eval()


@settings(max_examples=30)
@given(stacks())
def test_random_stacks_import_with_pytorchs_counts_and_shapes(model):
    """Any stack of mappable layers maps every layer (nothing unmapped) with PyTorch's parameter count,
    FlopCounterMode's MACs exactly, and PyTorch's shape after every layer."""
    shape = (4, 12, 12)
    imported = import_module(model, shape, motifs=False)
    d = imported.design
    assert not imported.unmapped
    params, macs = torch_counts(model, shape)
    assert d.ledger().totals.weights == params and d.ledger().totals.macs == macs
    expected = torch_shapes(model, shape)
    for bid, origin in imported.origins.items():
        if d.blocks[bid].kind != "Output" and origin in expected:
            assert tuple(d.analysis().shape(bid)) == expected[origin]
