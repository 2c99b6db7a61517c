"""Import from ONNX and export to ONNX.

Outside references: PyTorch (``sum(p.numel())``, FlopCounterMode / 2, its own ONNX exporter writing
the files read here) and onnxruntime as a second runtime. Fact of the trade (product brief, checked
with torch 2.13): exporting in eval mode with constant folding folds each batch norm into the
convolution before it, so a deployed file has convolutions with biases and no BatchNormalization.
"""
from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np
import onnx
import pytest
import torch
from onnx import TensorProto, helper, numpy_helper
from reference_nets import resnet50 as resnet50_design
from reference_torch_nets import ResNet50, SeedlingCounter
from test_import_torch import torch_counts

from layerloom.core.fileformat import load
from layerloom.export import ExportRefused, VerifyRefused, module_source, verify
from layerloom.export.onnx_file import TOLERANCE, check_onnx, export_onnx
from layerloom.importing import import_module, import_onnx


SAMPLES = Path(__file__).resolve().parents[1] / "samples"


def to_onnx(model, shape, path, fold=False):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        torch.onnx.export(model, (torch.zeros(1, *shape),), str(path), dynamo=False,
                          training=torch.onnx.TrainingMode.EVAL, do_constant_folding=fold)
    return path


def _exported(cls, shape, factory):
    """A reference network and the ONNX file PyTorch writes for it (batch norms kept as nodes)."""
    torch.manual_seed(1)
    model = cls().eval()
    return model, shape, to_onnx(model, shape, factory.mktemp("onnx") / f"{cls.__name__}.onnx")


@pytest.fixture(scope="module")
def resnet_file(tmp_path_factory):
    return _exported(ResNet50, (3, 64, 64), tmp_path_factory)


@pytest.fixture(scope="module")
def seedling_file(tmp_path_factory):
    return _exported(SeedlingCounter, (3, 96, 96), tmp_path_factory)


@pytest.mark.parametrize("which", ["resnet_file", "seedling_file"])
def test_torch_to_onnx_to_design_has_the_same_ledger(which, request):
    model, shape, path = request.getfixturevalue(which)
    params, macs = torch_counts(model, shape)
    via_onnx = import_onnx(path).design
    via_fx = import_module(model, shape).design
    t, f = via_onnx.ledger().totals, via_fx.ledger().totals
    assert t.weights == params  # PyTorch: sum(p.numel())
    assert abs(t.macs - macs) <= 0.005 * macs  # FlopCounterMode / 2
    assert t[:4] == f[:4]  # weights, buffers, MACs, other operations: the same as through torch.fx
    assert not [x for x in via_onnx.findings() if x.severity == "error"]
    report = verify(via_onnx, module_source(via_onnx))  # → export → verify
    assert report.ok, report.table()


def test_onnx_blocks_have_the_shapes_onnxruntime_computes(tmp_path):
    """Every mapped block's output shape equals the tensor onnxruntime produces for that node."""
    import onnxruntime

    model = SeedlingCounter().eval()
    path = to_onnx(model, (3, 96, 96), tmp_path / "s.onnx")
    imported = import_onnx(path, motifs=False)
    m = onnx.load(str(path))
    names = {n.name: n.output[0] for n in m.graph.node}
    wanted = {bid: names[o] for bid, o in imported.origins.items() if o in names}
    for out in wanted.values():
        m.graph.output.append(helper.make_empty_tensor_value_info(out))
    session = onnxruntime.InferenceSession(m.SerializeToString(), providers=["CPUExecutionProvider"])
    x = np.zeros((1, 3, 96, 96), np.float32)
    values = dict(zip([o.name for o in session.get_outputs()], session.run(None, {session.get_inputs()[0].name: x})))
    analysis = imported.design.analysis()
    checked = 0
    for bid, out in wanted.items():
        block = imported.design.blocks[bid]
        if block.name.endswith("_flatten"):
            continue
        assert tuple(analysis.shape(bid)) == values[out].shape[1:], block.name  # onnxruntime
        checked += 1
    assert checked >= 40


def test_resnet50_from_onnx_has_the_bottleneck_motifs(resnet_file):
    """ONNX names no classes; alike units are found from the exporter's scopes and structure."""
    d = import_onnx(resnet_file[2]).design
    assert len(d.motifs) == 2
    uses = sorted((b.settings["motif"], b.settings["repeat"]) for b in d.blocks.values() if b.kind == "Motif")
    assert uses == sorted([("unit", 1)] * 4 + [("unit_2", r) for r in (2, 3, 5, 2)])


def test_a_deployed_file_with_folded_batch_norms(tmp_path):
    """Eval mode with constant folding folds batch norms into convolution biases (product brief):
    the import sees biased convolutions and counts the file's own weights."""
    model = SeedlingCounter().eval()
    path = to_onnx(model, (3, 96, 96), tmp_path / "folded.onnx", fold=True)
    d = import_onnx(path).design
    kinds = {b.kind for g in (d, *d.motifs.values()) for b in g.blocks.values()}
    assert "BatchNorm2d" not in kinds
    graph = onnx.load(str(path)).graph
    sizes = {t.name: int(np.prod(t.dims)) for t in graph.initializer if t.data_type == TensorProto.FLOAT}
    aliases = [sizes[n.input[0]] for n in graph.node if n.op_type == "Identity" and n.input[0] in sizes]
    assert aliases  # the exporter stored equal tensors once and named the others by Identity
    assert d.ledger().totals.weights == sum(sizes.values()) + sum(aliases)  # the file's float tensors


def _graph(nodes, initializers=(), shape=(1, 4, 8, 8), out_shape=None):
    x = helper.make_tensor_value_info("x", TensorProto.FLOAT, shape)
    y = helper.make_tensor_value_info("y", TensorProto.FLOAT, out_shape or shape)
    g = helper.make_graph(nodes, "made-here", [x], [y], list(initializers))
    return helper.make_model(g, opset_imports=[helper.make_opsetid("", 17)])


def test_gate_patterns_and_clip_map_to_activations(tmp_path):
    """x · HardSigmoid(x) (alpha 1/6, beta 1/2) is hard swish, x · Sigmoid(x) is SiLU, Clip(0, 6) is
    ReLU6 (their definitions in the ONNX operator documentation)."""
    lo, hi = numpy_helper.from_array(np.array(0, np.float32), "lo"), numpy_helper.from_array(np.array(6, np.float32), "hi")
    nodes = [helper.make_node("HardSigmoid", ["x"], ["h"], alpha=1 / 6, beta=0.5), helper.make_node("Mul", ["x", "h"], ["a"]),
             helper.make_node("Sigmoid", ["a"], ["s"]), helper.make_node("Mul", ["s", "a"], ["b"]),
             helper.make_node("Clip", ["b", "lo", "hi"], ["y"])]
    onnx.save(_graph(nodes, [lo, hi]), tmp_path / "g.onnx")
    d = import_onnx(str(tmp_path / "g.onnx")).design
    assert [b.kind for b in d.blocks.values()] == ["Input", "Hardswish", "SiLU", "ReLU6", "Output"]


def test_an_unmapped_onnx_operation_keeps_its_shape_and_weights(tmp_path):
    w = numpy_helper.from_array(np.ones((4, 4, 3, 3), np.float32), "w")
    nodes = [helper.make_node("Conv", ["x", "w"], ["c"], pads=[1, 1, 1, 1]),
             helper.make_node("LpNormalization", ["c"], ["y"], axis=1)]
    onnx.save(_graph(nodes, [w]), tmp_path / "u.onnx")
    imported = import_onnx(str(tmp_path / "u.onnx"))
    assert [b.kind for b in imported.design.blocks.values()] == ["Input", "Conv2d", "Unmapped", "Output"]
    assert any("MACs are not counted" in n for n in imported.notes)
    assert [f.code for f in imported.design.findings()] == ["import.unmapped"]
    assert imported.design.ledger().totals.weights == 4 * 4 * 9


def test_input_sizes_can_be_replaced(tmp_path):
    path = to_onnx(SeedlingCounter().eval(), (3, 96, 96), tmp_path / "s.onnx")
    d = import_onnx(path, (3, 64, 64)).design
    assert tuple(d.analysis().shape(d.of_kind("Input")[0].id)) == (3, 64, 64)


# ----- export


def test_onnx_export_of_resnet50_agrees_with_torch_and_the_ledger(tmp_path):
    design = resnet50_design()
    model = export_onnx(design, tmp_path / "r.onnx")
    check = check_onnx(design, model, tmp_path / "r.onnx")
    assert check.ok, check.text()
    assert check.max_abs_diff <= TOLERANCE  # onnxruntime against torch
    t = design.ledger().totals
    assert t.weights == 25_557_032  # torchvision documentation
    assert check.file_elements == t.weights + t.buffers - 53 == 25_557_032 + 2 * 26_560  # 53 batch norms
    nodes = {n.op_type for n in onnx.load(str(tmp_path / "r.onnx")).graph.node}
    assert "BatchNormalization" in nodes  # kept as nodes, not folded


def test_onnx_check_finds_a_changed_weight(tmp_path):
    design = load(SAMPLES / "fastener_sorter.loom")
    path = tmp_path / "r.onnx"
    model = export_onnx(design, path)
    m = onnx.load(str(path))
    t = next(t for t in m.graph.initializer if t.name.endswith("weight") and len(t.dims) == 4)
    t.CopyFrom(numpy_helper.from_array(numpy_helper.to_array(t) * 2, t.name))
    onnx.save(m, str(path))
    check = check_onnx(design, model, path)
    assert not check.ok and t.name in check.missing and check.max_abs_diff > TOLERANCE


def test_onnx_export_refuses_unmapped_and_broken_designs(tmp_path):
    from layerloom import Design

    d = Design("holes")
    x = d.input(3, 8, 8)
    d.add("Output", d.add("Unmapped", x, operation="roll", in_shapes="3×8×8", out_shape="3×8×8"))
    with pytest.raises(VerifyRefused, match="unmapped operation"):
        export_onnx(d, tmp_path / "h.onnx")
    broken = Design("broken")
    x = broken.input(3, 8, 8)
    broken.add("Output", broken.add("Add", x, broken.add("Conv2d", x, out_channels=4)))
    with pytest.raises(ExportRefused):
        export_onnx(broken, tmp_path / "b.onnx")


def test_a_custom_operator_without_shape_information_imports_whole(tmp_path):
    """ONNX shape inference knows nothing of another domain's operator: the operator and what reads
    its unknown-shaped output become one unmapped block ending where a shape is known again."""
    w = numpy_helper.from_array(np.ones((4, 4, 1, 1), np.float32), "w")
    nodes = [helper.make_node("Conv", ["x", "w"], ["c"]), helper.make_node("Swizzle", ["c"], ["s"], domain="acme"),
             helper.make_node("Relu", ["s"], ["y"])]
    model = _graph(nodes, [w])
    model.opset_import.append(helper.make_opsetid("acme", 1))
    onnx.save(model, tmp_path / "custom.onnx")
    d = import_onnx(str(tmp_path / "custom.onnx")).design
    assert [(b.kind, b.settings.get("operation")) for b in d.blocks.values()] == [
        ("Input", None), ("Pointwise", None), ("Unmapped", "Swizzle → Relu"), ("Output", None)]
    assert str(d.analysis().shape(d.of_kind("Unmapped")[0].id)) == "4×8×8"
