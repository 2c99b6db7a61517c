"""Training memory against a real training step in PyTorch (the outside reference):
``torch.autograd.graph.saved_tensors_hooks`` sees every tensor autograd keeps for the backward pass;
gradients and optimizer state are read from the parameters and the optimizer after one step."""
from __future__ import annotations

import pytest
import torch

import small_designs
from layerloom.core.training_memory import OPTIMIZERS, training_curve, training_memory
from layerloom.export import export, load_module


def _model(design):
    made = export(design, "Net")
    return getattr(load_module(made.source), made.class_name)().train()


def _inputs(design):
    return [torch.randn(design.batch, *design.analysis().shape(b.id)) for b in design.of_kind("Input")]


def _saved_activation_bytes(model, inputs) -> tuple[int, torch.Tensor]:
    """Bytes of the distinct storages autograd saves in one forward, weights and buffers aside."""
    own = {t.untyped_storage().data_ptr() for t in (*model.parameters(), *model.buffers())}
    saved: dict[int, int] = {}

    def pack(t):
        s = t.untyped_storage()
        if s.data_ptr() not in own:
            saved[s.data_ptr()] = s.nbytes()
        return t

    with torch.autograd.graph.saved_tensors_hooks(pack, lambda t: t):
        out = model(*inputs)
    loss = sum(o.sum() for o in (out if isinstance(out, tuple) else (out,)))
    return sum(saved.values()), loss


@pytest.mark.parametrize("make", small_designs.ALL, ids=lambda f: f.__name__)
def test_kept_activations_match_what_torch_saves_for_backward(make):
    torch.manual_seed(0)
    design = make(batch=2)
    ours = training_memory(design.ledger()).activations
    model = _model(design)
    theirs, loss = _saved_activation_bytes(model, _inputs(design))
    loss.backward()  # the whole training step runs: the saved tensors are the ones backward uses
    torch.optim.SGD(model.parameters(), lr=0.01, momentum=0.9).step()
    # PyTorch keeps a few per-channel batch-norm statistics on top (2 × C floats per norm): within 10 %
    assert abs(ours - theirs) <= 0.10 * theirs, (ours, theirs)


@pytest.mark.parametrize("optimizer, make", [("sgd_momentum", small_designs.residual_motifs),
                                             ("adam", small_designs.branches_concat),
                                             ("sgd_momentum", small_designs.assorted_kinds),
                                             ("adam", small_designs.gated_separable)])
def test_gradients_and_optimizer_state_match_a_real_step_exactly(optimizer, make):
    torch.manual_seed(0)
    design = make(batch=2)
    model = _model(design)
    _, loss = _saved_activation_bytes(model, _inputs(design))
    loss.backward()
    params = list(model.parameters())
    opt = (torch.optim.SGD(params, lr=0.01, momentum=0.9) if optimizer == "sgd_momentum"
           else torch.optim.Adam(params, lr=0.01))
    opt.step()
    grads = sum(p.grad.numel() * p.grad.element_size() for p in params)
    # state tensors shaped like their parameter: SGD's momentum buffer; Adam's two moments (the step
    # counter, one number per parameter tensor, is not counted)
    state = sum(v.numel() * v.element_size() for p in params for v in opt.state[p].values()
                if torch.is_tensor(v) and v.shape == p.shape)
    ours = training_memory(design.ledger(), optimizer)
    assert ours.gradients == grads
    assert ours.optimizer_state == state
    assert ours.weights == sum(p.numel() * p.element_size() for p in params)


def test_mixed_precision_halves_activations_and_keeps_fp32_master_weights():
    ledger = small_designs.plain_stack(batch=4).ledger()
    full, mixed = training_memory(ledger, "adam"), training_memory(ledger, "adam", mixed=True)
    indices = 8 * 4 * 8 * 8 * 8  # max pooling's int64 indices (8 × 8 × 8 outputs per sample) keep their size
    assert mixed.activations - indices == (full.activations - indices) // 2
    assert mixed.weights == full.weights and mixed.weight_copy == full.weights // 2
    assert mixed.total == full.total - (full.activations - mixed.activations) + mixed.weight_copy


def test_training_curve_ends_at_the_total_and_grows_along_depth():
    ledger = small_designs.inverted_repeat().ledger()
    for optimizer in OPTIMIZERS:
        curve = training_curve(ledger, optimizer)
        assert len(curve) == len(ledger.order) and (curve[1:] >= curve[:-1]).all()
        assert curve[-1] == training_memory(ledger, optimizer).total
    with pytest.raises(ValueError, match="rmsprop"):
        training_memory(ledger, "rmsprop")


def test_ledger_command_prints_and_returns_the_training_line():
    import json
    import subprocess
    import sys
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    env = {"PYTHONPATH": str(root / "src"), "PATH": "/usr/bin:/bin"}
    args = [sys.executable, "-m", "layerloom", "ledger", "samples/fastener_sorter.loom", "--batch", "4", "--optimizer", "adam"]
    text = subprocess.run(args, capture_output=True, text=True, cwd=root, env=env)
    data = json.loads(subprocess.run(args + ["--json"], capture_output=True, text=True, cwd=root, env=env).stdout)
    from layerloom.core.fileformat import load

    design = load(root / "samples" / "fastener_sorter.loom")
    design.set_field("batch", 4)
    expected = training_memory(design.ledger(), "adam")
    assert data["training"]["activations"] == expected.activations and data["training"]["optimizer"] == "adam"
    assert "training at batch 4 (adam)" in text.stdout and "activations kept for backward" in text.stdout
    mixed = subprocess.run(args + ["--mixed-precision"], capture_output=True, text=True, cwd=root, env=env).stdout
    assert "(adam, mixed precision)" in mixed and "fp16 copy" in mixed
