"""Every block kind against PyTorch, the outside reference: output shape, weights, buffers, MACs.

Each case is a tiny design (Input → block → Output, with a Flatten after each Input for flat
vectors). The PyTorch layer is built by evaluating the kind's own emitted source
(``torch_layer``) with ``nn`` = ``torch.nn`` in scope, so the emitter is checked too; joins are
compared with torch's own operators. The reference figures come from PyTorch alone:

- shape: the output of the layer run on ``torch.zeros``;
- weights: ``sum(p.numel() for p in module.parameters())``;
- buffers: ``sum(b.numel() for b in module.buffers())``;
- MACs: ``torch.utils.flop_counter.FlopCounterMode`` total FLOPs / 2 (it counts two FLOPs per
  multiply-accumulate of convolutions and matrix products, nothing else).

Where Layerloom reports an error finding, PyTorch must refuse the same layer (raise while building
or running it, or produce an empty tensor: a transposed convolution whose output size works out
to 0 runs in PyTorch but yields nothing), and where PyTorch refuses, Layerloom must report an error.
"""
from __future__ import annotations

import functools
import itertools
import operator
import random
from typing import NamedTuple

import pytest
import torch
from torch.utils.flop_counter import FlopCounterMode

from layerloom import Design
from layerloom.core.findings import ERROR
from layerloom.core.kinds import KINDS
from layerloom.core.shapes import Shape

NOT_LAYERS = {"Input", "Output", "Motif", "Unmapped"}  # Unmapped carries measured costs: test_import_unmapped.py
JOIN_OPS = {
    "Add": lambda xs: functools.reduce(operator.add, xs),
    "Multiply": lambda xs: xs[0] * xs[1],
    "Concat": lambda xs: torch.cat(xs, dim=1),
}


class Case(NamedTuple):
    kind: str
    settings: dict
    ins: tuple  # input shapes C×H×W, one per input port
    flat: bool = False  # feed each input through a Flatten first (a vector of C·H·W features)

    def label(self) -> str:
        ins = ",".join("x".join(map(str, s)) for s in self.ins) + ("/flat" if self.flat else "")
        sets = ",".join(f"{k}={v}" for k, v in self.settings.items())
        return f"{self.kind}[{ins}]{{{sets}}}"


def build(case: Case) -> tuple[Design, str]:
    d = Design("kind-check")
    srcs = []
    for c, h, w in case.ins:
        x = d.input(c, h, w)
        srcs.append(d.add("Flatten", x) if case.flat else x)
    bid = d.add(case.kind, *srcs, **case.settings)
    d.add("Output", bid)
    return d, bid


def torch_reference(case: Case, d: Design, bid: str):
    """(shape, weights, buffers, MACs) from PyTorch, or None when PyTorch refuses the layer (raises,
    or returns an empty tensor)."""
    in_shapes = tuple(Shape.flat(c * h * w) if case.flat else Shape.chw(c, h, w) for c, h, w in case.ins)
    xs = [torch.zeros(1, *s) for s in in_shapes]
    settings = d.blocks[bid].settings  # the settings as stored (checked and completed with defaults)
    try:
        if case.kind in JOIN_OPS:
            module, run = None, JOIN_OPS[case.kind]
        else:
            source = KINDS[case.kind].torch_layer(settings, in_shapes, d.analysis().shape(bid))
            module = eval(source, {"nn": torch.nn})
            run = lambda xs: module(*xs)  # noqa: E731
        with FlopCounterMode(display=False) as counter:
            y = run(xs)
    except (ValueError, RuntimeError):
        return None
    if y.numel() == 0:
        return None
    weights = sum(p.numel() for p in module.parameters()) if module is not None else 0
    buffers = sum(b.numel() for b in module.buffers()) if module is not None else 0
    return tuple(y.shape[1:]), weights, buffers, counter.get_total_flops() // 2


def layerloom_figures(d: Design, bid: str):
    row = next(r for r in d.ledger().rows if r.block == bid)
    return tuple(row.shape), row.weights, row.buffers, row.macs


def errors_of(d: Design, bid: str) -> list[str]:
    return [f.code for f in d.analysis().findings_of(bid) if f.severity == ERROR]


# ----- the grid of cases ---------------------------------------------------------------------


def sampled(kind: str, n: int, seed: int, make, **axes) -> list[Case]:
    """``n`` cases drawn (without repeats, same draw on every run) from the product of ``axes``;
    ``make(**values)`` turns one combination into a Case."""
    combos = list(itertools.product(*axes.values()))
    picks = random.Random(seed).sample(combos, min(n, len(combos)))
    return [make(kind, **dict(zip(axes, p))) for p in picks]


def _conv(kind, chans, size, **s):
    c, out, g = chans
    return Case(kind, {"out_channels": out, "groups": g, **s}, ((c, *size),))


def _depthwise(kind, c, size, **s):
    return Case(kind, s, ((c, *size),))


def _pool(kind, size, **s):
    return Case(kind, s, ((3, *size),))


SIZES_ODD = [(9, 9), (8, 7), (5, 11), (1, 6)]

CASES: list[Case] = []
CASES += sampled("Conv2d", 80, 1, _conv, chans=[(4, 8, 1), (4, 6, 2), (6, 6, 3), (8, 4, 4), (3, 5, 1)],
                 size=SIZES_ODD, kernel=[1, 3, [1, 3], [3, 2], 4], stride=[1, 2, [2, 1], 3],
                 padding=[0, 1, [1, 0], "same", 2], dilation=[1, 2, [1, 2]], bias=[True, False])
CASES += sampled("Pointwise", 24, 2, _conv, chans=[(4, 8, 1), (6, 4, 2), (8, 8, 8)], size=[(5, 5), (4, 7), (1, 1)],
                 stride=[1, 2, [1, 3]], bias=[True, False])
CASES += sampled("Depthwise", 40, 3, _depthwise, c=[3, 4, 8], size=[(7, 7), (6, 9), (4, 4)],
                 multiplier=[1, 2, 3], kernel=[3, [3, 1], 5, 2], stride=[1, 2], padding=[0, 1, "same", [2, 1]],
                 dilation=[1, 2], bias=[True, False])
CASES += sampled("ConvTranspose2d", 50, 4, _conv, chans=[(4, 6, 2), (3, 5, 1), (4, 4, 4)],
                 size=[(4, 4), (3, 5), (1, 1)], kernel=[2, 3, [3, 1], 4], stride=[1, 2, [2, 3]],
                 padding=[0, 1, [1, 0]], output_padding=[0, 1, [1, 0]], dilation=[1, 2], bias=[True, False])
for _i, _pool_kind in enumerate(("MaxPool2d", "AvgPool2d")):
    CASES += sampled(_pool_kind, 40, 5 + _i, _pool, size=[(7, 7), (8, 5), (6, 11), (3, 3)],
                     kernel=[1, 2, 3, [3, 2], 5], stride=[1, 2, [2, 1], 3], padding=[0, 1, [1, 0], 2],
                     ceil_mode=[False, True])
# ceil mode where the last window would start in the right padding (PyTorch drops it)
CASES += [Case(k, {"kernel": kern, "stride": 2, "padding": 1, "ceil_mode": True}, ((3, *size),))
          for k in ("MaxPool2d", "AvgPool2d") for kern, size in ((2, (5, 6)), (3, (6, 7)), ([2, 3], (4, 5)))]
CASES += sampled("AdaptiveAvgPool2d", 15, 7, _pool, size=[(7, 7), (5, 9), (3, 4)], output=[1, 2, [2, 3], 7, [1, 5]])
CASES += sampled("Upsample", 12, 8, _pool, size=[(4, 4), (3, 5)], scale=[1, 2, 3], mode=["nearest", "bilinear"])
CASES += [Case("BatchNorm2d", {"eps": eps, "affine": affine}, (shape,))
          for eps in (1e-5, 1e-3) for affine in (True, False) for shape in ((4, 5, 5), (16, 3, 2))]
for _kind in ("ReLU", "ReLU6", "GELU", "SiLU", "Sigmoid", "Tanh", "Hardswish", "Softmax", "Identity"):
    CASES += [Case(_kind, {}, ((3, 5, 7),)), Case(_kind, {}, ((3, 5, 7),), flat=True)]
CASES += [Case("LeakyReLU", {"negative_slope": 0.2}, ((3, 5, 7),)), Case("LeakyReLU", {}, ((6, 1, 1),), flat=True)]
CASES += [Case("Dropout", {"p": 0.5}, ((3, 5, 7),)), Case("Dropout", {"p": 0.1}, ((3, 5, 7),), flat=True)]
CASES += [Case("Flatten", {}, (s,)) for s in ((3, 5, 7), (1, 1, 1), (16, 2, 2))]
CASES += [Case("Flatten", {}, ((3, 5, 7),), flat=True)]
# Linear after Flatten: 3×4×5 → 60 features
CASES += [Case("Linear", {"out_features": out, "bias": bias, "in_features": expect}, ((3, 4, 5),), flat=True)
          for out in (10, 1) for bias in (True, False) for expect in (0, 60)]
CASES += [Case("Linear", {"out_features": 7}, ((1, 1, 1),), flat=True)]
CASES += [Case("Add", {}, ((4, 5, 6),) * 2), Case("Add", {"inputs": 3}, ((4, 5, 6),) * 3),
          Case("Add", {}, ((4, 5, 6),) * 2, flat=True), Case("Add", {"inputs": 3}, ((2, 1, 1),) * 3, flat=True),
          Case("Concat", {}, ((4, 5, 6), (2, 5, 6))), Case("Concat", {"inputs": 3}, ((4, 5, 6), (2, 5, 6), (7, 5, 6))),
          Case("Concat", {}, ((4, 5, 6), (2, 3, 3)), flat=True),
          # many branches: torch.cat and a sum take any number of tensors (PyTorch documentation)
          Case("Concat", {"inputs": 16}, tuple((c, 5, 6) for c in range(1, 17))),
          Case("Concat", {"inputs": 64}, ((3, 2, 2),) * 64), Case("Add", {"inputs": 16}, ((4, 5, 6),) * 16),
          Case("Multiply", {}, ((4, 5, 6),) * 2), Case("Multiply", {}, ((4, 5, 6), (4, 1, 1))),
          Case("Multiply", {}, ((4, 1, 1), (4, 5, 6))), Case("Multiply", {}, ((4, 5, 6),) * 2, flat=True)]


def test_every_kind_has_cases():
    """A new kind must come with cases here (the grid names each kind it covers)."""
    covered = {c.kind for c in CASES}
    assert set(KINDS) - NOT_LAYERS - covered == set()
    assert 250 <= len(CASES) <= 500


def test_grid_is_mostly_valid():
    """The grid exercises the formulas, not only refusals: most cases are valid in PyTorch."""
    valid = 0
    for case in CASES[::5]:
        d, bid = build(case)
        valid += not errors_of(d, bid)
    assert valid >= 0.6 * len(CASES[::5])


@pytest.mark.filterwarnings("ignore:Using padding='same'")  # PyTorch's own note on even kernels
@pytest.mark.parametrize("case", CASES, ids=Case.label)
def test_kind_matches_torch(case):
    d, bid = build(case)
    reference = torch_reference(case, d, bid)
    errors = errors_of(d, bid)
    if errors:
        assert reference is None, f"Layerloom reports {errors} but PyTorch accepts the layer: {reference}"
        return
    assert reference is not None, "PyTorch refuses a layer Layerloom accepts"
    assert layerloom_figures(d, bid) == reference  # (shape, weights, buffers, MACs) as PyTorch counts them


@pytest.mark.parametrize("case", [c for c in CASES if c.kind in JOIN_OPS], ids=Case.label)
def test_join_expression_matches_torch_op(case):
    """The emitted forward expression of a join computes what torch's own operator computes."""
    d, _ = build(case)
    bid = d.of_kind(case.kind)[0].id
    gen = torch.Generator().manual_seed(0)
    xs = [torch.rand(1, c * h * w, generator=gen) if case.flat else torch.rand(1, c, h, w, generator=gen)
          for c, h, w in case.ins]
    names = [f"x{i}" for i in range(len(xs))]
    expr = KINDS[case.kind].torch_expr(d.blocks[bid].settings, names)
    emitted = eval(expr, {"torch": torch, **dict(zip(names, xs))})
    assert torch.equal(emitted, JOIN_OPS[case.kind](xs))


def test_batch_multiplies_macs_like_torch():
    """The ledger's MACs cover the whole batch; FlopCounterMode on a batch of 3 agrees."""
    case = Case("Conv2d", {"out_channels": 6, "kernel": 3, "stride": 2, "padding": 1}, ((4, 9, 8),))
    d, bid = build(case)
    d.set_field("batch", 3)
    module = eval(KINDS["Conv2d"].torch_layer(d.blocks[bid].settings, (Shape.chw(4, 9, 8),), None), {"nn": torch.nn})
    with FlopCounterMode(display=False) as counter:
        module(torch.zeros(3, 4, 9, 8))
    assert d.ledger().totals.macs == counter.get_total_flops() // 2


# ----- refusals: the finding code, and PyTorch refuses too -----------------------------------

REFUSALS = [
    (Case("Conv2d", {"out_channels": 6, "groups": 4}, ((8, 5, 5),)), "conv.groups"),
    (Case("Conv2d", {"out_channels": 6, "groups": 3}, ((4, 5, 5),)), "conv.groups"),
    (Case("Pointwise", {"out_channels": 4, "groups": 3}, ((6, 5, 5),)), "conv.groups"),
    (Case("ConvTranspose2d", {"out_channels": 5, "groups": 2}, ((4, 3, 3),)), "conv.groups"),
    (Case("Conv2d", {"kernel": 7, "padding": 1}, ((2, 3, 3),)), "shape.collapsed"),
    (Case("Conv2d", {"kernel": 3, "dilation": 3, "padding": 0}, ((2, 6, 9),)), "shape.collapsed"),
    (Case("Conv2d", {"kernel": [1, 5], "padding": 0}, ((2, 8, 4),)), "shape.collapsed"),
    (Case("Depthwise", {"kernel": 5, "padding": 0}, ((2, 4, 4),)), "shape.collapsed"),
    (Case("MaxPool2d", {"kernel": 5, "stride": 1}, ((2, 3, 3),)), "shape.collapsed"),
    (Case("AvgPool2d", {"kernel": [2, 6], "padding": [0, 1]}, ((2, 4, 3),)), "shape.collapsed"),
    (Case("ConvTranspose2d", {"kernel": 2, "stride": 1, "padding": 1}, ((2, 1, 1),)), "shape.collapsed"),
    (Case("Conv2d", {"stride": 2, "padding": "same"}, ((3, 8, 8),)), "conv.same_stride"),
    (Case("Conv2d", {"stride": [1, 2], "padding": "same"}, ((3, 8, 8),)), "conv.same_stride"),
    (Case("Depthwise", {"stride": 2, "padding": "same"}, ((3, 8, 8),)), "conv.same_stride"),
    (Case("MaxPool2d", {"kernel": 2, "padding": 2}, ((1, 8, 8),)), "pool.padding"),
    (Case("AvgPool2d", {"kernel": 3, "stride": 1, "padding": 2}, ((1, 8, 8),)), "pool.padding"),
    (Case("MaxPool2d", {"kernel": [3, 2], "padding": [1, 2]}, ((1, 8, 8),)), "pool.padding"),
    (Case("ConvTranspose2d", {"stride": 2, "output_padding": 2}, ((2, 4, 4),)), "conv.output_padding"),
    (Case("ConvTranspose2d", {"kernel": 3, "stride": 1, "output_padding": 1}, ((2, 4, 4),)), "conv.output_padding"),
    (Case("ConvTranspose2d", {"kernel": 3, "stride": [2, 1], "output_padding": 1}, ((2, 4, 4),)), "conv.output_padding"),
    (Case("Conv2d", {}, ((12, 1, 1),), flat=True), "shape.rank"),
    (Case("MaxPool2d", {}, ((12, 1, 1),), flat=True), "shape.rank"),
    (Case("Add", {}, ((4, 5, 5), (6, 5, 5))), "join.channels"),
    (Case("Add", {}, ((4, 5, 5), (4, 5, 6))), "join.size"),
    (Case("Add", {"inputs": 3}, ((4, 5, 5), (4, 5, 5), (4, 3, 5))), "join.size"),
    (Case("Concat", {}, ((4, 5, 5), (2, 6, 5))), "join.size"),
    (Case("Multiply", {}, ((4, 5, 5), (3, 1, 1))), "join.channels"),
]


@pytest.mark.parametrize("case, code", REFUSALS, ids=[f"{code}:{c.label()}" for c, code in REFUSALS])
def test_refused_like_torch(case, code):
    d, bid = build(case)
    assert code in errors_of(d, bid)
    assert torch_reference(case, d, bid) is None  # PyTorch raises for the same layer


def test_linear_features_refused_like_torch():
    """A Linear block expecting 10 features fed 12 is an error; nn.Linear(10, 3) refuses 12 too."""
    case = Case("Linear", {"out_features": 3, "in_features": 10}, ((3, 2, 2),), flat=True)
    d, bid = build(case)
    assert errors_of(d, bid) == ["linear.features"]
    with pytest.raises(RuntimeError):
        torch.nn.Linear(10, 3)(torch.zeros(1, 12))
