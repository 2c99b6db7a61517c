"""Operations no kind describes import whole as ``Unmapped`` blocks carrying their traced shape,
weights and MACs, with the note ``import.unmapped``; they export as a placeholder and are never
verified. Outside references: PyTorch's ``sum(p.numel())``, FlopCounterMode / 2 and the shapes the
module computes on the CPU.
"""
from __future__ import annotations

import pytest
import torch
from reference_torch_nets import ChannelShuffleNet
from test_import_torch import torch_counts, torch_shapes

from layerloom import Design
from layerloom.core.fileformat import dumps, parse
from layerloom.core.settings import SettingError
from layerloom.export import VerifyRefused, load_module, module_source, verify
from layerloom.importing import ImportFailed, import_module


@pytest.fixture(scope="module")
def shuffle():
    torch.manual_seed(2)
    model = ChannelShuffleNet().eval()
    return model, import_module(model, (3, 32, 32))


def test_channel_shuffle_imports_whole_with_its_note_and_right_totals(shuffle):
    model, imported = shuffle
    d = imported.design
    unmapped = {b.name: b for b in d.blocks.values() if b.kind == "Unmapped"}
    assert sorted(imported.unmapped) == sorted(unmapped) and len(unmapped) == 2
    shuffle_block = next(b for b in unmapped.values() if "transpose" in b.settings["operation"])
    assert shuffle_block.settings["operation"] == "view → transpose → contiguous → view"  # one block for the chain
    notes = [f for f in d.findings() if f.code == "import.unmapped"]
    assert {f.block for f in notes} == {b.id for b in unmapped.values()} and {f.severity for f in notes} == {"note"}
    params, macs = torch_counts(model, (3, 32, 32))
    t = d.ledger().totals
    assert t.weights == params  # PyTorch: sum(p.numel()), including the F.conv2d weight an Unmapped block carries
    assert t.macs == macs  # FlopCounterMode / 2, the unmapped convolution's MACs measured at import
    conv = next(b for b in unmapped.values() if b.settings["operation"] == "conv2d")
    assert conv.settings["weights"] == model.mix.numel() and conv.settings["macs"] == 16 * 32 * 9 * 16 * 16
    shapes = torch_shapes(model, (3, 32, 32))
    for bid, origin in imported.origins.items():
        block = d.blocks[bid]
        last = origin.split(", ")[-1]
        if block.kind != "Output" and last in shapes:
            assert tuple(d.analysis().shape(bid)) == shapes[last], block.name  # PyTorch on the CPU


def test_unmapped_blocks_export_as_a_placeholder_and_refuse_verify(shuffle):
    _, imported = shuffle
    d = imported.design
    source = module_source(d, date="2024-01-01")
    assert "class UnmappedOperation(nn.Module):" in source and "TO FILL IN:" in source
    module = load_module(source)
    model = getattr(module, module.__all__[0])()
    with pytest.raises(NotImplementedError, match="view → transpose"):
        model(torch.zeros(1, 3, 32, 32))
    with pytest.raises(VerifyRefused, match="2 blocks are an unmapped operation"):
        verify(d, source)


def test_a_changed_input_is_an_error_at_the_unmapped_block(shuffle):
    _, imported = shuffle
    d = parse(dumps(imported.design))  # and the kind survives a save and load
    d.set(d.of_kind("Input")[0].id, height=64, width=64)
    errors = [f for f in d.findings() if f.severity == "error"]
    assert [f.code for f in errors] == ["import.unmapped_input"]
    assert "measured on 32×16×16 at import but receives 32×32×32" in errors[0].message


def test_unmapped_settings_are_checked():
    d = Design("t")
    x = d.input(3, 8, 8)
    with pytest.raises(SettingError, match="Traced output shape"):
        d.add("Unmapped", x, in_shapes="3×8×8", out_shape="3×8")
    with pytest.raises(SettingError, match="one shape per input"):
        d.add("Unmapped", x, inputs=2, in_shapes="3×8×8", out_shape="3×8×8")


def test_an_operation_with_several_outputs_gives_one_block_per_output():
    class Split(torch.nn.Module):
        def __init__(self):
            super().__init__()
            self.conv = torch.nn.Conv2d(3, 8, 3, padding=1)

        def forward(self, x):
            a, b = torch.chunk(self.conv(x), 2, dim=1)
            return torch.cat([b, a], dim=1)

    imported = import_module(Split(), (3, 8, 8))
    blocks = [b for b in imported.design.blocks.values() if b.kind == "Unmapped"]
    assert [b.settings["operation"] for b in blocks] == ["chunk → getitem [1 of 2]", "chunk → getitem [2 of 2]"]
    assert [str(imported.design.analysis().shape(b.id)) for b in blocks] == ["4×8×8", "4×8×8"]
    assert imported.design.ledger().totals.weights == 3 * 8 * 9 + 8  # PyTorch: Conv2d(3, 8, 3) parameters


class _Fan(torch.nn.Module):
    """``n`` 1×1 convolutions of the input joined by ``join`` (torch.cat or torch.stack, which take
    any number of tensors: PyTorch documentation)."""

    def __init__(self, n: int, join: str):
        super().__init__()
        self.convs = torch.nn.ModuleList(torch.nn.Conv2d(3, 2, 1) for _ in range(n))
        self.join = join

    def forward(self, x):
        ys = [c(x) for c in self.convs]
        return torch.cat(ys, dim=1) if self.join == "cat" else torch.stack(ys, dim=1).flatten(1, 2)


@pytest.mark.parametrize("join, kind", [("cat", "Concat"), ("stack", "Unmapped")])
def test_a_join_of_twelve_tensors_imports_with_torchs_shape_and_counts(join, kind):
    """Before, a cat of more than 8 tensors was left unmapped and an unmapped operation reading more
    than 8 raised a SettingError out of import."""
    model = _Fan(12, join).eval()
    d = import_module(model, (3, 8, 8)).design
    joins = [b for b in d.blocks.values() if b.kind == kind]
    assert len(joins) == 1 and len(d.in_wires[joins[0].id]) == 12
    assert d.analysis().shape(joins[0].id) == (24, 8, 8) == model(torch.zeros(1, 3, 8, 8)).shape[1:]
    t = d.ledger().totals
    assert (t.weights, t.macs) == torch_counts(model, (3, 8, 8))


@pytest.mark.parametrize("join", ["cat", "stack"])
def test_a_join_of_more_tensors_than_a_block_has_ports_is_refused_by_name(join):
    with pytest.raises(ImportFailed, match=rf"^{join} \({join}.*\) reads 70 tensors; a block has at most 64 inputs$"):
        import_module(_Fan(70, join), (3, 8, 8))
