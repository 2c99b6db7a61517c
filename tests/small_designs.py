"""Small designs of our own for tests that run the exported module (training memory, measuring):
each few blocks and a few thousand elements, so a real forward and backward on CPU takes milliseconds."""
from __future__ import annotations

from layerloom import Design
from layerloom.core.motif_library import define


def _conv_bn_relu(d, x, out, stride=1, act="ReLU"):
    x = d.add("Conv2d", x, out_channels=out, kernel=3, stride=stride, padding=1, bias=False)
    return d.add(act, d.add("BatchNorm2d", x))


def plain_stack(batch: int = 2) -> Design:
    """A camera-board classifier: conv stages, max pooling, global pooling and a Linear head."""
    d = Design("plain-stack", batch=batch)
    x = _conv_bn_relu(d, d.input(3, 16, 16), 8)
    x = d.add("MaxPool2d", x, kernel=2, stride=2)
    x = _conv_bn_relu(d, x, 16, act="ReLU6")
    x = d.add("Flatten", d.add("AdaptiveAvgPool2d", x))
    d.add("Output", d.add("Softmax", d.add("Linear", x, out_features=5)))
    return d


def residual_motifs(batch: int = 2) -> Design:
    """Bottleneck motifs with a projection and a repeated identity unit."""
    d = Design("residual-motifs", batch=batch)
    define(d, "bottleneck_projection", "down")
    define(d, "bottleneck", "unit")
    x = _conv_bn_relu(d, d.input(3, 12, 12), 8)
    x = d.use("down", x, width=8, out=16, stride=2)
    x = d.use("unit", x, repeat=2, width=4, out=16)
    d.add("Output", d.add("Linear", d.add("Flatten", d.add("AdaptiveAvgPool2d", x)), out_features=3))
    return d


def branches_concat(batch: int = 2) -> Design:
    """A multi-branch motif and a concatenation at the top level."""
    d = Design("branches-concat", batch=batch)
    define(d, "multi_branch", "branches")
    x = _conv_bn_relu(d, d.input(3, 10, 10), 8)
    y = d.use("branches", x, b1=4, b3_reduce=4, b3=8, b5_reduce=2, b5=4, pool_proj=4)
    z = d.add("Pointwise", x, out_channels=6)
    x = d.add("Concat", y, z)
    d.add("Output", d.add("Linear", d.add("Flatten", d.add("AdaptiveAvgPool2d", x)), out_features=4))
    return d


def gated_separable(batch: int = 2) -> Design:
    """Depthwise-separable units and a squeeze-and-excite gate (a broadcast Multiply)."""
    d = Design("gated-separable", batch=batch)
    define(d, "separable", "sep")
    define(d, "se_gate", "gate")
    x = _conv_bn_relu(d, d.input(3, 16, 16), 8, stride=2)
    x = d.use("sep", x, out=16, stride=1)
    x = d.use("gate", x, channels=16, reduced=4)
    x = d.use("sep", x, out=24, stride=2)
    d.add("Output", d.add("Linear", d.add("Flatten", d.add("AdaptiveAvgPool2d", x)), out_features=2))
    return d


def assorted_kinds(batch: int = 2) -> Design:
    """The other activations, average pooling, upsampling and a transposed convolution."""
    d = Design("assorted-kinds", batch=batch)
    x = d.input(3, 8, 8)
    a = d.add("SiLU", d.add("Conv2d", x, out_channels=6, kernel=3, padding=1))
    b = d.add("GELU", d.add("Pointwise", a, out_channels=6))
    c = d.add("Tanh", d.add("Conv2d", b, out_channels=6, kernel=3, padding=1))
    c = d.add("Hardswish", d.add("Add", c, a))
    c = d.add("LeakyReLU", d.add("AvgPool2d", c, kernel=2, stride=2))
    c = d.add("Upsample", c, scale=2, mode="bilinear")
    c = d.add("Sigmoid", d.add("ConvTranspose2d", c, out_channels=4, kernel=2, stride=2))
    c = d.add("AdaptiveAvgPool2d", c, output=2)
    d.add("Output", d.add("Linear", d.add("Flatten", c), out_features=3))
    return d


def inverted_repeat(batch: int = 2) -> Design:
    """An inverted residual motif repeated three times (ReLU6, depthwise, identity shortcut)."""
    d = Design("inverted-repeat", batch=batch)
    define(d, "inverted_residual", "ir")
    x = _conv_bn_relu(d, d.input(3, 12, 12), 8)
    x = d.use("ir", x, repeat=3, expand=24, width=8)
    d.add("Output", d.add("Pointwise", x, out_channels=4))
    return d


ALL = (plain_stack, residual_motifs, branches_concat, gated_separable, assorted_kinds, inverted_repeat)
