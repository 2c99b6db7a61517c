"""``layerloom import`` and ``layerloom export --onnx`` on the command line: what they write and
say, and one clear line (exit 2, no traceback) for each kind of malformed input."""
from __future__ import annotations

import textwrap
import warnings

import onnx
import pytest
import torch

from layerloom.cli import main
from layerloom.core.fileformat import load

NET = textwrap.dedent("""
    import torch
    from torch import nn

    class Sorter(nn.Module):
        def __init__(self, classes=4):
            super().__init__()
            self.conv = nn.Conv2d(3, 8, 3, padding=1)
            self.fc = nn.Linear(8, classes)

        def forward(self, x):
            return self.fc(torch.relu(self.conv(x)).mean((2, 3)))

    def make_sorter(classes=4):
        return Sorter(classes)

    class Branchy(nn.Module):
        def forward(self, x):
            if x.sum() > 0:
                return x
            return -x
""")


@pytest.fixture
def folder(tmp_path, monkeypatch):
    (tmp_path / "nets.py").write_text(NET, encoding="utf-8")
    (tmp_path / "raises.py").write_text("import torch\nraise ValueError('no camera attached')\n", encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    return tmp_path


def test_import_writes_a_design_and_says_the_file_runs(folder, capsys):
    assert main(["import", "nets.py:make_sorter", "-o", "s.loom", "--input", "3x32x32", "--args", '{"classes": 7}']) == 0
    out = capsys.readouterr().out
    assert out.splitlines()[0] == "import runs nets.py's code — only import code you trust"
    d = load(folder / "s.loom")
    assert [b.kind for b in d.blocks.values()] == ["Input", "Conv2d", "ReLU", "AdaptiveAvgPool2d", "Flatten",
                                                  "Linear", "Output"]
    assert d.ledger().totals.weights == (3 * 8 * 9 + 8) + (8 * 7 + 7)  # PyTorch's parameter count of Sorter(7)
    assert "wrote s.loom: 7 blocks" in out


def test_export_onnx_and_verify(folder, capsys):
    assert main(["import", "nets.py:Sorter", "-o", "s.loom", "--input", "3x32x32"]) == 0
    assert main(["export", "s.loom", "--onnx", "s.onnx", "--verify"]) == 0
    out = capsys.readouterr().out
    assert "ONNX file agrees" in out and "within 0.0001" in out
    assert onnx.load(str(folder / "s.onnx")).graph.node
    assert main(["export", "s.loom"]) == 2
    assert "export needs -o MODEL.py or --onnx MODEL.onnx" in capsys.readouterr().err


def test_onnx_file_imports_from_the_command_line(folder, capsys):
    model = torch.nn.Sequential(torch.nn.Conv2d(3, 4, 3), torch.nn.ReLU())
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        torch.onnx.export(model, (torch.zeros(1, 3, 16, 16),), "m.onnx", dynamo=False)
    assert main(["import", "m.onnx", "-o", "m.loom"]) == 0
    out = capsys.readouterr().out
    assert "runs" not in out  # reading an ONNX file runs no code
    assert [b.kind for b in load(folder / "m.loom").blocks.values()] == ["Input", "Conv2d", "ReLU", "Output"]


def _truncated(folder):
    model = torch.nn.Sequential(torch.nn.Conv2d(3, 4, 3))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        torch.onnx.export(model, (torch.zeros(1, 3, 16, 16),), "whole.onnx", dynamo=False)
    data = (folder / "whole.onnx").read_bytes()
    (folder / "cut.onnx").write_bytes(data[: len(data) // 3])
    m = onnx.load("whole.onnx")
    m.opset_import[0].version = 404
    onnx.save(m, "future.onnx")
    return data


@pytest.mark.parametrize("source, expected", [
    ("raises.py:Net", "raises.py raised ValueError while it ran: no camera attached"),
    ("nets.py:Branchy", "Branchy does not trace with torch.fx (TraceError"),
    ("cut.onnx", "cut.onnx is not a readable ONNX file, perhaps truncated"),
    ("future.onnx", "future.onnx uses ONNX opset 404"),
    ("weights.pt", "a .pt file is a pickle, and unpickling can run any code it holds"),
    ("nets.py:Missing", "nets.py has no Missing"),
    ("nets.py:make_sorter --args [1]", "--args must be a JSON object"),
    ("nets.py:Sorter --input 3x8", "input shape '3x8' must be three numbers"),
])
def test_malformed_inputs_give_one_line_and_exit_2(folder, capsys, source, expected):
    _truncated(folder)
    (folder / "weights.pt").write_bytes(b"\x80\x04not really a pickle")
    assert main(["import", *source.split(), "-o", "out.loom"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("layerloom: ") and expected in err
    assert "Traceback" not in err
    assert not (folder / "out.loom").exists()


def test_export_refuses_verify_on_unmapped_blocks(folder, capsys):
    (folder / "roll.py").write_text("import torch\nclass Roll(torch.nn.Module):\n"
                                    "    def forward(self, x):\n        return torch.roll(x, 1, 2)\n", encoding="utf-8")
    assert main(["import", "roll.py:Roll", "-o", "r.loom", "--input", "3x8x8"]) == 0
    assert "1 unmapped operation(s)" in capsys.readouterr().out
    assert main(["export", "r.loom", "-o", "r.py", "--verify"]) == 2
    err = capsys.readouterr().err
    assert "cannot verify: 1 block is an unmapped operation (roll)" in err and not (folder / "r.py").exists()
    assert main(["export", "r.loom", "--onnx", "r.onnx"]) == 2
    assert main(["export", "r.loom", "-o", "r.py"]) == 0  # without --verify: the placeholder is written
    assert "UnmappedOperation('roll'" in (folder / "r.py").read_text(encoding="utf-8")
