"""Motifs in the export: one ``nn.Module`` class per motif whose constructor takes the input
channel counts and the motif's parameters, instanced per use, ``nn.Sequential`` for repeats; the
fallback to one class per input shape when a layer needs more than channel counts.

PyTorch is the reference: ``sum(p.numel())``, ``FlopCounterMode`` FLOPs / 2 and the shapes the
exported forward computes (through :func:`layerloom.export.verify`).
"""
from __future__ import annotations

import ast
import doctest
import importlib

import pytest
import torch
from torch.utils.flop_counter import FlopCounterMode

from layerloom import Design
from layerloom.core import edits
from layerloom.core.kinds import KINDS
from layerloom.core.motif_library import LIBRARY, define
from layerloom.export import export, load_module, module_source, verify
from reference_motifs import resnet50_with_motifs


def _classes(source: str) -> dict[str, ast.ClassDef]:
    return {c.name: c for c in ast.parse(source).body if isinstance(c, ast.ClassDef)}


def _init_arguments(cls: ast.ClassDef) -> dict[str, object]:
    """Constructor arguments (without self) → default (``None`` when it has none)."""
    init = next(f for f in cls.body if isinstance(f, ast.FunctionDef) and f.name == "__init__")
    names = [a.arg for a in init.args.args[1:]]
    defaults = [ast.literal_eval(v) for v in init.args.defaults]
    return dict(zip(names, [None] * (len(names) - len(defaults)) + defaults))


@pytest.fixture(scope="module")
def resnet():
    design = resnet50_with_motifs()
    return design, module_source(design, date="2024-01-01")


def test_resnet50_from_bottleneck_motifs_has_torchvisions_parameters_and_macs(resnet):
    design, source = resnet
    made = export(design)
    model = getattr(load_module(source), made.class_name)().eval()
    with torch.no_grad(), FlopCounterMode(display=False) as counter:
        y = model(torch.zeros(1, 3, 224, 224))
    assert y.shape == (1, 1000)
    # torchvision model documentation (ResNet50_Weights.IMAGENET1K_V1): 25,557,032 parameters and
    # 4.09 GFLOPS (multiply-accumulates); measured by torch: sum(p.numel()), FlopCounterMode FLOPs / 2
    assert sum(p.numel() for p in model.parameters()) == 25_557_032
    assert counter.get_total_flops() / 2 == pytest.approx(4.09e9, rel=0.005)
    report = verify(design, source)
    assert report.ok, report.table()


def test_resnet50_source_has_one_class_per_motif_with_parameters_and_sequential_repeats(resnet):
    design, source = resnet
    classes = _classes(source)
    assert list(classes) == ["Down", "Unit", "Resnet50Motifs"]  # two motifs, then the design
    # constructor: the input channels, then the motif's parameters with the motif's defaults
    assert _init_arguments(classes["Down"]) == {"in_channels": None, "width": 64, "out": 256, "stride": 1}
    assert _init_arguments(classes["Unit"]) == {"in_channels": None, "width": 64, "out": 256}
    assert "self.spatial = nn.Conv2d(width, width, kernel_size=3, stride=stride, padding=1, bias=False)" in source
    assert "self.projection = nn.Conv2d(in_channels, out, kernel_size=1, stride=stride, bias=False)" in source
    # stages ×3, ×4, ×6, ×3: a downsampling use, then the rest as a repeat (He et al. 2016, Table 1)
    assert source.count("nn.Sequential(") == 4
    for width, copies in ((64, 2), (128, 3), (256, 5), (512, 2)):
        assert (f"nn.Sequential(*[Unit(in_channels={4 * width}, width={width}, out={4 * width}) "
                f"for _ in range({copies})])") in source
    assert "Down(in_channels=1024, width=512, out=2048, stride=2)" in source


LIBRARY_USES = {
    # motif key: (input channels, parameter values, repeat) for two uses on 8×8 maps
    "residual_unit": [(16, {"width": 16}, 2), (8, {"width": 8}, 1)],
    "bottleneck": [(32, {"width": 8, "out": 32}, 2), (16, {"width": 4, "out": 16}, 1)],
    "bottleneck_projection": [(8, {"width": 4, "out": 16, "stride": 2}, 1), (16, {"width": 8, "out": 32}, 1)],
    "multi_branch": [(12, {"b1": 4, "b3_reduce": 6, "b3": 8, "b5_reduce": 2, "b5": 4, "pool_proj": 4}, 1),
                     (20, {"b1": 2, "b3_reduce": 3, "b3": 5, "b5_reduce": 1, "b5": 2, "pool_proj": 3}, 1)],
    "separable": [(8, {"out": 16, "stride": 2}, 1), (16, {"out": 16}, 3)],
    "inverted_residual": [(8, {"expand": 24, "width": 8}, 2), (12, {"expand": 36, "width": 12}, 1)],
    "se_gate": [(8, {"channels": 8, "reduced": 2}, 1), (16, {"channels": 16, "reduced": 4}, 2)],
}


def test_every_library_motif_is_covered():
    assert set(LIBRARY_USES) == {m.key for m in LIBRARY}


@pytest.mark.parametrize("key", sorted(LIBRARY_USES))
def test_library_motif_exports_as_one_class_and_agrees_with_torch(key):
    d = Design(f"uses of {key}")
    define(d, key)
    for channels, params, repeat in LIBRARY_USES[key]:
        d.add("Output", d.use(key, d.input(channels, 8, 8), repeat=repeat, **params))
    assert not d.findings()
    source = module_source(d, date="2024-01-01")
    motif_classes = [n for n in _classes(source) if n != "UsesOf" + "".join(w.title() for w in key.split("_"))]
    assert len(motif_classes) == 1, motif_classes
    assert source.count(f"{motif_classes[0]}(in_channels=") == 2  # one instance per use
    report = verify(d, source)
    assert report.ok, report.table()


def head_design() -> Design:
    """A classifier head motif (its Linear reads a Flatten of a 2×2 map) used with three shapes,
    and a motif that uses it."""
    d = Design("heads")
    head = d.motif("head", classes=10)
    i = head.input()
    flat = head.add("Flatten", head.add("AdaptiveAvgPool2d", i, output=2))
    head.add("Output", head.add("Linear", flat, out_features={"param": "classes"}, name="scores"))
    outer = d.motif("outer", classes=10)  # by default the same signature as a use of head
    i = outer.input()
    outer.add("Output", outer.add("Motif", i, motif="head", classes={"param": "classes"}))
    x = d.input(3, 16, 16)
    y = d.add("Conv2d", x, out_channels=8, stride=2)
    for src, classes in ((x, 10), (y, 10), (y, 4)):
        d.add("Output", d.use("head", src, classes=classes))
    d.add("Output", d.use("outer", y))
    return d


def test_motif_whose_layer_needs_height_and_width_is_written_per_input_shape():
    d = head_design()
    source = module_source(d, date="2024-01-01")
    classes = _classes(source)
    assert [n for n in classes if n.startswith("Head") and n != "Heads"] == ["Head", "Head_2", "Head_3"]
    assert [n for n in classes if n.startswith("Outer")] == ["Outer"]
    assert all(_init_arguments(classes[n]) == {} for n in ("Head", "Head_2", "Head_3", "Outer"))
    header = ast.get_docstring(ast.parse(source))
    assert "motif 'head' (Linear 'scores' is built with the features of Flatten" in " ".join(header.split())
    assert "motif 'outer' (Motif" in header and "uses motif 'head'" in " ".join(header.split())
    comments = [line for line in source.splitlines() if line.startswith("# Motif 'head' is written per input shape")]
    assert len(comments) == 3
    assert "self.motif_1 = Head_2()" in source  # outer's use of head has the signature of the second use
    assert "nn.Linear(12, 10)" in source and "nn.Linear(32, 10)" in source and "nn.Linear(32, 4)" in source
    report = verify(d, source)
    assert report.ok, report.table()


def every_kind_motif_design() -> Design:
    """One motif holding every layer kind, with many whole-number settings as parameters, used twice
    with other channels and values; its second port takes a flat vector for a Linear."""
    d = Design("kinds in a motif")
    m = d.motif("everything", out=6, g=2, mult=2, k=3, scale=2, size=3, features=5, up=2, op=0, pk=2, pad=1)
    a, v = m.input("maps"), m.input("vector")
    y = m.add("Conv2d", a, out_channels={"param": "out"}, kernel={"param": "k"}, padding=1, groups={"param": "g"})
    y = m.add("BatchNorm2d", y)
    for act in ("ReLU", "ReLU6", "GELU", "SiLU", "Tanh", "Hardswish", "LeakyReLU", "Identity", "Dropout"):
        y = m.add(act, y)
    y = m.add("Depthwise", y, multiplier={"param": "mult"}, stride=2)
    y = m.add("Concat", y, m.add("Pointwise", y, out_channels=4))
    y = m.add("ConvTranspose2d", y, out_channels={"param": "out"}, groups={"param": "g"}, stride={"param": "up"},
              output_padding={"param": "op"})
    y = m.add("Upsample", y, scale={"param": "scale"})
    y = m.add("MaxPool2d", y, kernel={"param": "pk"}, stride={"param": "pk"})
    y = m.add("AvgPool2d", y, kernel=3, stride=1, padding={"param": "pad"})
    y = m.add("Add", y, m.add("Sigmoid", y))
    g = m.add("Pointwise", m.add("AdaptiveAvgPool2d", y), out_channels={"param": "out"})
    y = m.add("Multiply", y, g)
    m.add("Output", m.add("AdaptiveAvgPool2d", y, output={"param": "size"}))
    m.add("Output", m.add("Softmax", m.add("Linear", m.add("Flatten", v), out_features={"param": "features"})))
    x = d.input(4, 12, 12)
    flat = d.add("Flatten", d.add("AdaptiveAvgPool2d", x))
    first = d.use("everything", x, flat)
    d.add("Output", d.use("everything", (first, 0), (first, 1), out=4, g=2, mult=1, k=1, scale=3, size=2, features=7,
                           up=3, op=1, pk=3, pad=0))
    return d


def test_every_layer_kind_inside_one_motif_class_agrees_with_torch():
    d = every_kind_motif_design()
    used = {b.kind for b in d.motifs["everything"].blocks.values()}
    assert used == {k for k, spec in KINDS.items() if spec.verifiable} - {"Motif"}  # Unmapped cannot run
    assert not [f for f in d.findings() if f.severity == "error"]
    source = module_source(d, date="2024-01-01")
    classes = _classes(source)
    assert list(classes) == ["Everything", "KindsInAMotif"]
    assert list(_init_arguments(classes["Everything"]))[:2] == ["in_channels_1", "in_channels_2"]
    assert "nn.Upsample(scale_factor=float(scale), mode='nearest')" in source
    assert "nn.AdaptiveAvgPool2d(size)" in source
    assert "groups=g" in source and "kernel_size=k" in source
    assert "nn.Linear(in_channels_2, features)" in source  # a flat port: its channels are its features
    # Depthwise multiplies, Concat sums
    assert "nn.ConvTranspose2d(mult * out + 4, out, kernel_size=2, stride=up, output_padding=op, groups=g)" in source
    assert "nn.MaxPool2d(kernel_size=pk, stride=pk)" in source and "padding=pad" in source
    report = verify(d, source)
    assert report.ok, report.table()


def test_parameter_and_motif_names_that_are_python_words_give_distinct_safe_arguments():
    d = Design("names")
    inner = d.motif("inner", width=2)
    i = inner.input()
    inner.add("Output", inner.add("Pointwise", i, out_channels={"param": "width"}))
    hostile = {"class": 3, "self": 2, "in_channels": 1, "in_channels_2": 2, "Inner": 4, "nn": 1, "range": 2,
               "wid th": 5}
    d.apply(edits.Edit("new motif", (edits.AddMotif("for", hostile),)))  # d.motif(**) cannot take "self"
    m = d.motifs["for"]
    a, b = m.input(), m.input()
    y = m.add("Conv2d", m.add("Concat", a, b), out_channels={"param": "class"}, stride={"param": "in_channels"},
              padding={"param": "nn"}, dilation={"param": "range"})
    y = m.add("Depthwise", y, multiplier={"param": "self"}, stride={"param": "in_channels_2"})
    y = m.add("Motif", y, motif="inner", width={"param": "wid th"}, repeat={"param": "Inner"})
    m.add("Output", y)
    x = d.input(3, 16, 16)
    d.add("Output", d.use("for", x, x, **{"class": 6, "wid th": 12}))  # inner repeats on 6·2 channels
    edit, use = edits.add_block(d, "Motif", {"motif": "for", "Inner": 1, "self": 1}, inputs=[(x, 0), (x, 0)])
    d.apply(edit)
    d.add("Output", use)
    assert not d.findings()
    source = module_source(d, date="2024-01-01")
    classes = _classes(source)
    arguments = list(_init_arguments(classes["For"]))
    assert len(arguments) == len(set(arguments)) == 2 + len(hostile)
    assert arguments[:2] == ["in_channels_1", "in_channels_2"]
    assert all(n.isidentifier() and n not in ("class", "self", "Inner", "nn", "range", "in_channels_2")
               for n in arguments[2:])
    report = verify(d, source)  # builds both uses in torch: a shadowed nn, range or Inner would fail here
    assert report.ok, report.table()


def test_channel_rules_agree_with_the_shape_rules():
    """Each kind's channel rule (used for motif classes) gives the channels its shape rule gives."""
    from layerloom.core.findings import Report
    from layerloom.core.shapes import Shape

    for name, kind in KINDS.items():
        if name in ("Input", "Output", "Motif", "Unmapped"):  # Unmapped: no rule, a traced shape
            continue
        s = dict(kind.defaults)
        n = kind.input_count(s)
        ins = (Shape.chw(8, 16, 16),) * n
        expected = kind.shape(s, ins, Report("b", name))[0] if name not in ("Linear",) else s["out_features"]
        got = kind.channels(s, tuple(x[0] for x in ins))
        assert got == (None if name == "Flatten" else expected), name


@pytest.mark.parametrize("module", ["layerloom.export", "layerloom.export.channels",
                                    "layerloom.export.pytorch_source", "layerloom.export.names"])
def test_docstring_examples_run(module):
    result = doctest.testmod(importlib.import_module(module))
    assert result.attempted > 0 and result.failed == 0
