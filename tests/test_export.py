"""Export to PyTorch: the generated file compiles, imports only torch, runs, traces with torch.fx,
is accepted by torch.jit.script, and agrees with the ledger block by block (PyTorch is the
reference: tensor shapes, ``sum(p.numel())``, ``FlopCounterMode`` FLOPs / 2)."""
from __future__ import annotations

import ast
import datetime
import os
import subprocess
import sys

import pytest
import torch

from layerloom import Design
from layerloom.cli import main
from layerloom.core.kinds import KINDS
from layerloom.export import ExportRefused, export, load_module, module_source, verify
from layerloom.export.names import NN_MODULE_ATTRIBUTES

SRC = os.path.join(os.path.dirname(__file__), os.pardir, "src")


def every_kind_design() -> Design:
    """One design that uses every block kind, a two-port motif with two outputs, a motif inside a
    motif and a repeat."""
    d = Design("all kinds")
    m = d.motif("pair_mix", width=6)
    a, b = m.input("left"), m.input("right")
    m.add("Output", m.add("Pointwise", m.add("Concat", a, b), out_channels={"param": "width"}))
    m.add("Output", m.add("Multiply", a, b))
    r = d.motif("keep")
    i = r.input()
    r.add("Output", r.add("Add", r.add("Conv2d", i, out_channels=8, kernel=3, padding=1), i))
    outer = d.motif("outer")
    i = outer.input()
    outer.add("Output", outer.add("Motif", i, motif="keep", repeat=2))
    x = d.input(3, 16, 16, name="image")
    x = d.add("Conv2d", x, out_channels=8, kernel=3, padding=1, bias=False)
    x = d.add("BatchNorm2d", x)
    for act in ("ReLU", "ReLU6", "GELU", "SiLU", "Tanh", "Hardswish", "LeakyReLU"):
        x = d.add(act, x)
    x = d.use("keep", x, repeat=3)
    x = d.use("outer", x)
    y = d.add("Sigmoid", d.add("Depthwise", x, kernel=3, padding=1))
    mix = d.use("pair_mix", x, y, width=4)
    x = d.add("Concat", (mix, 0), (mix, 1))
    x = d.add("Pointwise", x, out_channels=8, stride=2)
    x = d.add("MaxPool2d", x, kernel=3, stride=2, ceil_mode=True)
    x = d.add("AvgPool2d", x, kernel=2, stride=1, padding=1)
    x = d.add("ConvTranspose2d", x, out_channels=4)
    x = d.add("Upsample", x, scale=2, mode="bilinear")
    x = d.add("Identity", x)
    x = d.add("AdaptiveAvgPool2d", x, output=2)
    x = d.add("Flatten", x)
    x = d.add("Dropout", x, p=0.25)
    x = d.add("Softmax", d.add("Linear", x, out_features=5))
    d.add("Output", x, name="scores")
    return d


@pytest.fixture(scope="module")
def every_kind(tmp_path_factory):
    design = every_kind_design()
    path = tmp_path_factory.mktemp("export") / "model.py"
    path.write_text(module_source(design, date="2024-03-01"), encoding="utf-8")
    return design, path


def test_every_kind_is_covered():
    design = every_kind_design()
    used = {b.kind for g in (design, *design.motifs.values()) for b in g.blocks.values()}
    assert used == {k for k, spec in KINDS.items() if spec.verifiable}  # Unmapped: tests/test_import_unmapped.py


def test_exported_file_imports_only_torch_and_compiles(every_kind):
    _, path = every_kind
    tree = ast.parse(path.read_text(encoding="utf-8"))
    imported = {a.name.split(".")[0] for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
    imported |= {n.module.split(".")[0] for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)}
    assert imported == {"torch"}
    compile(path.read_text(encoding="utf-8"), str(path), "exec")


def test_every_kind_agrees_with_torch_block_by_block(every_kind):
    design, path = every_kind
    report = verify(design, path)
    assert report.ok, report.table()
    assert [r.name for r in report.rows] == [design.blocks[b].name for b in design.analysis().order]
    # torch's own output for the whole design: (N, 5) scores
    assert report.rows[-1].torch_shapes == ((1, 5),)


@pytest.mark.filterwarnings("ignore:`torch.jit.script` is deprecated:DeprecationWarning")
def test_every_kind_traces_with_fx_and_scripts_with_jit(every_kind):
    design, path = every_kind
    made = export(design)
    assert made.unscriptable == ()  # every kind declares itself scriptable; torch.jit.script checks it below
    module = load_module(path)
    model = getattr(module, made.class_name)().eval()
    x = torch.randn(1, 3, 16, 16)
    traced = torch.fx.symbolic_trace(model)
    scripted = torch.jit.script(model)
    with torch.no_grad():
        expected = model(x)
        assert torch.allclose(traced(x), expected)
        assert torch.allclose(scripted(x), expected)
    assert expected.shape == (1, 5)


def test_forward_lines_name_blocks_and_comment_shapes():
    d = Design("tiny")
    x = d.input(3, 56, 56, name="photo")
    y = d.add("Conv2d", x, out_channels=64, kernel=3, padding=1, name="stem")
    d.add("Output", d.add("Add", y, d.add("ReLU", y, name="act"), name="sum"))
    src = module_source(d, date="2024-01-01")
    assert "self.stem = nn.Conv2d(3, 64, kernel_size=3, padding=1)" in src
    assert "def forward(self, photo):" in src
    lines = [line.strip() for line in src.splitlines()]
    assert "stem = self.stem(photo)  # (N, 64, 56, 56)" in lines
    assert "sum_ = stem + act        # (N, 64, 56, 56)" in lines
    assert "return sum_" in lines


def test_header_names_design_input_totals_and_the_given_date(every_kind):
    design, path = every_kind
    src = path.read_text(encoding="utf-8")
    header = ast.get_docstring(ast.parse(src))
    totals = design.ledger().totals
    model = getattr(load_module(path), export(design).class_name)()
    weights = sum(p.numel() for p in model.parameters())  # PyTorch's count of learned parameters
    assert weights == totals.weights
    assert header.startswith("all kinds:")
    assert "image (N, 3, 16, 16)" in header
    assert f"{weights:,} weights" in header and f"{totals.macs:,} MACs per sample" in header
    assert "Exported on 2024-03-01." in header
    assert os.getcwd() not in src and str(path.parent) not in src
    today = module_source(design)
    assert f"Exported on {datetime.date.today().isoformat()}." in today
    assert "Exported on 1999-12-31." in module_source(design, date=datetime.date(1999, 12, 31))


def test_design_with_errors_is_refused_with_its_findings(tmp_path):
    d = Design("clash")
    x = d.input(3, 8, 8)
    a = d.add("Conv2d", x, out_channels=16)
    b = d.add("Conv2d", x, out_channels=8)
    d.add("Output", d.add("Add", a, b))
    with pytest.raises(ExportRefused) as e:
        module_source(d)
    assert [f.code for f in e.value.findings] == ["join.channels"]
    assert "8 channels to 16 channels" in str(e.value)
    from layerloom.core.fileformat import save

    save(d, tmp_path / "clash.loom")
    out = tmp_path / "model.py"
    assert main(["export", str(tmp_path / "clash.loom"), "-o", str(out)]) == 1
    assert not out.exists()


def test_command_line_export_and_verify(tmp_path, capsys):
    from layerloom.core.fileformat import save

    design = every_kind_design()
    save(design, tmp_path / "all.loom")
    out = tmp_path / "net.py"
    assert main(["export", str(tmp_path / "all.loom"), "-o", str(out), "--class-name", "Sorter", "--verify"]) == 0
    printed = capsys.readouterr().out
    assert "class Sorter" in out.read_text(encoding="utf-8")
    assert "all agree" in printed and printed.count(" yes") == len(design.blocks) + 1
    assert main(["export", str(tmp_path / "all.loom"), "-o", str(out), "--class-name", "not valid"]) == 2


def test_verify_reports_a_layer_that_disagrees():
    d = Design("tamper")
    x = d.input(3, 8, 8)
    d.add("Output", d.add("Conv2d", x, out_channels=4, bias=False, name="stem"))
    src = module_source(d)
    tampered = src.replace("nn.Conv2d(3, 4, kernel_size=3, padding=1, bias=False)", "nn.Conv2d(3, 4, kernel_size=3)")
    assert tampered != src
    report = verify(d, tampered)
    assert not report.ok
    bad = {r.name for r in report.disagreements}
    assert bad == {"stem", "output_1", "total"}  # the Output block receives the stem's tensor
    stem = next(r for r in report.rows if r.name == "stem")
    assert (stem.ledger_shapes, stem.torch_shapes) == (((1, 4, 8, 8),), ((1, 4, 6, 6),))
    assert stem.torch_weights - stem.ledger_weights == 4  # the bias PyTorch adds by default
    assert "NO" in report.table()


def test_nn_module_attribute_list_covers_this_torch():
    public = {n for n in dir(torch.nn.Module) if not n.startswith("_")} | set(vars(torch.nn.Module()))
    assert {n for n in public if not n.startswith("_")} <= NN_MODULE_ATTRIBUTES


def test_importing_layerloom_and_export_does_not_import_torch():
    code = "import sys, layerloom, layerloom.export; print('torch' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         env={**os.environ, "PYTHONPATH": SRC})
    assert out.stdout.strip() == "False"


def test_a_sixteen_branch_concat_exports_saves_and_agrees_with_torch(tmp_path):
    """16 branches joined by one Concat (the limit is 64 inputs, the ports a file holds): the shape
    is the sum of the branches' channels, as torch.cat gives it; the export runs and agrees with
    the ledger block by block, traces with torch.fx, goes through ONNX and back within tolerance,
    and the file reads back with the same figures."""
    from layerloom.core.fileformat import dumps, load, save
    from layerloom.export.onnx_file import check_onnx, export_onnx

    d = Design("fan-in")
    x = d.input(3, 8, 8)
    branches = [d.add("Pointwise", x, out_channels=c) for c in range(1, 17)]
    cat = d.add("Concat", *branches, inputs=16)
    d.add("Output", d.add("Pointwise", cat, out_channels=4))
    assert d.analysis().shape(cat) == (136, 8, 8)  # 1 + 2 + … + 16 channels
    made = export(d)
    report = verify(d, made.source)
    assert report.ok, report.table()
    row = next(r for r in report.rows if r.name == d.blocks[cat].name)
    assert row.torch_shapes == ((1, 136, 8, 8),)
    model = getattr(load_module(made.source), made.class_name)().eval()
    with torch.no_grad():
        assert torch.allclose(torch.fx.symbolic_trace(model)(torch.ones(1, 3, 8, 8)), model(torch.ones(1, 3, 8, 8)))
    onnx_model = export_onnx(d, tmp_path / "fan_in.onnx")
    assert check_onnx(d, onnx_model, tmp_path / "fan_in.onnx").ok
    save(d, tmp_path / "fan_in.loom")
    again = load(tmp_path / "fan_in.loom")
    assert dumps(again) == dumps(d) and again.ledger().totals == d.ledger().totals
