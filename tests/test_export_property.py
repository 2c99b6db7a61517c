"""Differential test of the PyTorch export: random well-formed designs are exported, built and run
in torch, and every block's output shape, weights and MACs must equal the ledger.

The reference is PyTorch itself: shapes of the tensors the exported forward computes,
``sum(p.numel())`` and ``torch.utils.flop_counter.FlopCounterMode`` FLOPs / 2 (PRODUCT.md).
200 examples by default; ``LAYERLOOM_LONG=1`` draws 2,000.
"""
from __future__ import annotations

import os

from hypothesis import given, settings
from hypothesis import strategies as st

from layerloom import Design
from layerloom.core.findings import ERROR
from layerloom.export import module_source, verify

LONG = os.environ.get("LAYERLOOM_LONG") == "1"
ACTIVATIONS = ("ReLU", "ReLU6", "GELU", "SiLU", "Sigmoid", "Tanh", "Hardswish", "LeakyReLU", "Identity", "Dropout")


def _shape(d, x):
    g, port = (x, 0) if isinstance(x, str) else x
    return d.analysis().shape(g, port)


def _divisors(n: int) -> list[int]:
    return [k for k in range(1, n + 1) if n % k == 0]


def _conv(draw, d, x):
    c, h, w = _shape(d, x)
    g = draw(st.sampled_from(_divisors(c)))
    out = g * draw(st.integers(1, max(1, 12 // g)))
    kernel = draw(st.sampled_from([1, 2, 3, [1, 3], [3, 1]]))
    kh, kw = (kernel, kernel) if isinstance(kernel, int) else kernel
    stride = draw(st.sampled_from([1, 1, 2, [1, 2]]))
    dilation = draw(st.sampled_from([1, 1, 2]))
    if draw(st.booleans()) and stride == 1:
        padding = "same"
    else:
        padding = [draw(st.integers(0, kh // 2 + dilation - 1)), draw(st.integers(0, kw // 2 + dilation - 1))]
        if h + 2 * padding[0] < dilation * (kh - 1) + 1 or w + 2 * padding[1] < dilation * (kw - 1) + 1:
            dilation, padding = 1, [kh // 2, kw // 2]
    return d.add("Conv2d", x, out_channels=out, kernel=kernel, stride=stride, padding=padding, dilation=dilation,
                 groups=g, bias=draw(st.booleans()))


def _pointwise(draw, d, x):
    c = _shape(d, x)[0]
    g = draw(st.sampled_from(_divisors(c)))
    return d.add("Pointwise", x, out_channels=g * draw(st.integers(1, max(1, 12 // g))),
                 stride=draw(st.sampled_from([1, 2])), groups=g, bias=draw(st.booleans()))


def _depthwise(draw, d, x):
    _, h, w = _shape(d, x)
    k = draw(st.sampled_from([3, 5])) if min(h, w) >= 3 else 1
    return d.add("Depthwise", x, kernel=k, stride=draw(st.sampled_from([1, 2])), padding=k // 2,
                 multiplier=draw(st.sampled_from([1, 1, 2])), bias=draw(st.booleans()))


def _transposed(draw, d, x):
    c, h, w = _shape(d, x)
    if max(h, w) > 10:
        return _pool(draw, d, x)
    stride = draw(st.sampled_from([1, 2]))
    g = draw(st.sampled_from(_divisors(c)))
    return d.add("ConvTranspose2d", x, out_channels=g * draw(st.integers(1, 3)), kernel=draw(st.sampled_from([2, 3])),
                 stride=stride, output_padding=draw(st.integers(0, stride - 1)), groups=g, bias=draw(st.booleans()))


def _pool(draw, d, x):
    _, h, w = _shape(d, x)
    k = draw(st.sampled_from([2, 3])) if min(h, w) >= 3 else 1
    return d.add(draw(st.sampled_from(["MaxPool2d", "AvgPool2d"])), x, kernel=k, stride=draw(st.sampled_from([1, 2])),
                 padding=draw(st.integers(0, k // 2)), ceil_mode=draw(st.booleans()))


def _norm_act(draw, d, x):
    if draw(st.booleans()):
        x = d.add("BatchNorm2d", x, affine=draw(st.booleans()))
    return d.add(draw(st.sampled_from(ACTIVATIONS)), x)


def _resize(draw, d, x):
    _, h, w = _shape(d, x)
    if max(h, w) <= 8:
        return d.add("Upsample", x, scale=2, mode=draw(st.sampled_from(["nearest", "bilinear"])))
    return d.add("AdaptiveAvgPool2d", x, output=draw(st.sampled_from([2, [3, 2], 4])))


def _residual(draw, d, x):
    c, h, w = _shape(d, x)
    project = draw(st.booleans())
    stride = draw(st.sampled_from([1, 2])) if project else 1
    out = draw(st.integers(1, 12)) if project else c
    y = d.add("Conv2d", x, out_channels=out, kernel=3, padding=1, stride=stride, bias=False)
    y = d.add("BatchNorm2d", y)
    short = d.add("Pointwise", x, out_channels=out, stride=stride, bias=False) if project else x
    if draw(st.booleans()):
        third = d.add("ReLU", short)
        return d.add("Add", y, short, third, inputs=3)
    return d.add("Add", y, short)


def _concat(draw, d, x):
    a = d.add("Pointwise", x, out_channels=draw(st.integers(1, 8)))
    b = d.add("MaxPool2d", x, kernel=3, stride=1, padding=1)
    if draw(st.booleans()):
        return d.add("Concat", a, b, x, inputs=3)
    return d.add("Concat", a, b)


def _gate(draw, d, x):
    c = _shape(d, x)[0]
    g = d.add("AdaptiveAvgPool2d", x)
    g = d.add("Pointwise", g, out_channels=draw(st.integers(1, 4)))
    g = d.add("ReLU", g)
    g = d.add("Sigmoid", d.add("Pointwise", g, out_channels=c))
    return d.add("Multiply", x, g) if draw(st.booleans()) else d.add("Multiply", g, x)


def _motifs(d: Design) -> None:
    """Motifs of the random designs: a residual unit (repeatable), a two-port fork with two
    outputs, a motif that holds a use of the residual unit repeated by a parameter, a stage whose
    kernel, padding, stride, groups and depthwise multiplier are parameters, a resampler whose
    scale and pooled size are parameters, and a classifier head (its Linear needs C*H*W, so it is
    written per input shape)."""
    m = d.motif("unit", width=4, channels=8)
    i = m.input("x")
    y = m.add("Pointwise", i, out_channels={"param": "width"}, bias=False)
    y = m.add("ReLU", m.add("BatchNorm2d", y))
    y = m.add("Conv2d", y, out_channels={"param": "channels"}, kernel=3, padding=1)
    m.add("Output", m.add("Add", y, i))
    f = d.motif("fork", out=4)
    a, b = f.input("a"), f.input("b")
    f.add("Output", f.add("Pointwise", f.add("Concat", a, b), out_channels={"param": "out"}))
    f.add("Output", f.add("Multiply", a, b))
    n = d.motif("nest", width=2, channels=8, times=2)
    i = n.input()
    y = n.add("Motif", i, motif="unit", repeat={"param": "times"}, width={"param": "width"},
              channels={"param": "channels"})
    n.add("Output", n.add("SiLU", y))
    s = d.motif("stage", groups=1, out=4, kernel=3, pad=1, stride=1, mult=1)
    i = s.input()
    y = s.add("Conv2d", i, out_channels=_p("out"), kernel=_p("kernel"), padding=_p("pad"), stride=_p("stride"),
              groups=_p("groups"), bias=False)
    y = s.add("Depthwise", y, kernel=3, padding=1, multiplier=_p("mult"))
    s.add("Output", s.add("BatchNorm2d", s.add("Concat", y, s.add("Pointwise", y, out_channels=3))))
    r = d.motif("resample", scale=2, size=2)
    i = r.input()
    r.add("Output", r.add("AdaptiveAvgPool2d", r.add("Upsample", i, scale=_p("scale")), output=_p("size")))
    c = d.motif("classifier", classes=4)
    i = c.input()
    c.add("Output", c.add("Linear", c.add("Flatten", c.add("AdaptiveAvgPool2d", i, output=2)),
                          out_features=_p("classes")))


def _p(name: str) -> dict:
    return {"param": name}


MOTIFS = ("unit", "fork", "nest", "stage", "resample")


def _use(draw, d, x, which=None):
    c = _shape(d, x)[0]
    which = which or draw(st.sampled_from(MOTIFS))
    if which == "fork":
        y = d.add("Tanh", x)
        m = d.use("fork", x, y, out=draw(st.integers(1, 6)))
        return d.add("Concat", (m, 0), (m, 1))
    if which == "stage":
        g, k = draw(st.sampled_from(_divisors(c))), draw(st.sampled_from([1, 3]))
        return d.use("stage", x, groups=g, out=g * draw(st.integers(1, max(1, 8 // g))), kernel=k, pad=k // 2,
                     stride=draw(st.sampled_from([1, 2])), mult=draw(st.sampled_from([1, 2])))
    if which == "resample":
        return d.use("resample", x, scale=draw(st.integers(1, 2)), size=draw(st.integers(1, 4)))
    return d.use(which, x, repeat=draw(st.integers(1, 3)), width=draw(st.integers(1, 6)), channels=c,
                 **({"times": draw(st.integers(1, 3))} if which == "nest" else {}))


def _uses(draw, d, x):
    """Two uses of one motif in a row, each with its own parameter values."""
    which = draw(st.sampled_from(MOTIFS))
    return _use(draw, d, _use(draw, d, x, which), which)


STEPS = (_conv, _pointwise, _depthwise, _transposed, _pool, _norm_act, _resize, _residual, _concat, _gate,
         _use, _use, _uses, _uses)  # motif uses drawn more often than plain blocks


@st.composite
def designs(draw) -> Design:
    d = Design("random")
    _motifs(d)
    c, h, w = draw(st.integers(1, 6)), draw(st.integers(4, 14)), draw(st.integers(4, 14))
    x = d.input(c, h, w)
    if draw(st.booleans()):
        x = d.add("Add", x, d.input(c, h, w))
    outputs = []
    for step in draw(st.lists(st.sampled_from(STEPS), min_size=1, max_size=6)):
        x = step(draw, d, x)
        if draw(st.integers(0, 9)) == 0:
            outputs.append(x)
    head = draw(st.sampled_from(["none", "pool", "flatten", "motif"]))
    if head == "motif":
        x = d.use("classifier", x, classes=draw(st.integers(1, 10)))
    elif head != "none":
        if head == "pool":
            x = d.add("AdaptiveAvgPool2d", x)
        x = d.add("Flatten", x)
        x = d.add("Linear", x, out_features=draw(st.integers(1, 10)), bias=draw(st.booleans()))
        if draw(st.booleans()):
            x = d.add("Softmax", x)
    for y in (*outputs, x):
        d.add("Output", y)
    if draw(st.booleans()):
        d.set_field("batch", 2)
    return d


@settings(max_examples=2000 if LONG else 200, deadline=None)
@given(designs())
def test_exported_module_matches_the_ledger_block_by_block(design):
    errors = [f.message for f in design.findings() if f.severity == ERROR]
    assert not errors, errors  # the strategy builds well-formed designs only
    source = module_source(design, date="2000-01-01")
    report = verify(design, source)
    assert report.ok, "\n" + source + "\n" + report.table()
    totals = design.ledger().totals
    # torch's own counts: sum(p.numel()) over the module, FlopCounterMode FLOPs / 2
    assert (report.total.torch_weights, report.total.torch_macs) == (totals.weights, totals.macs)
    assert len(report.rows) == len(design.blocks)
