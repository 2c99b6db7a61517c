"""Pooling and resizing: MaxPool2d, AvgPool2d (with ceil mode), AdaptiveAvgPool2d, Upsample.

No weights and no MACs (PyTorch's flop counter counts none); other operations: one per window
element read (pooling), one per output element (resizing).
"""
from __future__ import annotations

from layerloom.core.findings import Stop
from layerloom.core.kinds.base import Cost, Kind, conv_length, kw, need_map, register
from layerloom.core.settings import Setting, bool_setting, int_setting, pair, pair_setting, pair_text
from layerloom.core.shapes import Shape


class Pool(Kind):
    family = "Pooling & resizing"
    module = ""
    keeps = ("inputs",)
    settings = (pair_setting("kernel", 2, "Kernel"), pair_setting("stride", 2, "Stride"),
                pair_setting("padding", 0, "Padding", minimum=0, help="at most half the kernel"),
                bool_setting("ceil_mode", False, "Ceil mode", help="round the output size up instead of down"))

    def shape(self, s, ins, report):
        name = report.name
        x = need_map(ins[0], name)
        sizes = []
        for axis, n, k, st, p in zip(("height", "width"), x[1:], pair(s["kernel"]), pair(s["stride"]), pair(s["padding"])):
            if 2 * p > k:
                raise Stop("pool.padding", f"{name}: padding {p} is more than half the kernel {k}", numbers=(p, k // 2))
            sizes.append(conv_length(n, k, st, p, 1, name, axis, report, s["ceil_mode"]))
        return Shape.chw(x[0], *sizes)

    def cost(self, s, ins, out):
        kh, kw_ = pair(s["kernel"])
        return Cost(0, 0, 0, out.elements * kh * kw_)

    def window(self, s, ins):
        (kh, kw_), (sh, sw) = pair(s["kernel"]), pair(s["stride"])
        return kh, kw_, sh, sw

    def summary(self, s):
        st = s["stride"]
        text = f"{self.word} {pair_text(s['kernel'])}"
        return text + (f" /{st if isinstance(st, int) else pair_text(st)}" if pair(st) != (1, 1) else "")

    def torch_layer(self, s, ins, out):
        return (f"nn.{self.module}(" + kw(kernel_size=s["kernel"], stride=s["stride"],
                                         padding=s["padding"] if s["padding"] != 0 else None,
                                         ceil_mode=True if s["ceil_mode"] else None) + ")")


@register
class MaxPool2d(Pool):
    name, title, module, word = "MaxPool2d", "Max pooling", "MaxPool2d", "max"
    keeps = ("inputs", "indices")
    stem = "maxpool"


@register
class AvgPool2d(Pool):
    name, title, module, word = "AvgPool2d", "Average pooling", "AvgPool2d", "avg"
    stem = "avgpool"


@register
class AdaptiveAvgPool2d(Pool):
    """Average pooling to a fixed output size; output 1 is global average pooling."""

    name, title, module = "AdaptiveAvgPool2d", "Global / adaptive average pool", "AdaptiveAvgPool2d"
    stem = "pool"
    settings = (pair_setting("output", 1, "Output size", help="1 gives global average pooling"),)

    def shape(self, s, ins, report):
        x = need_map(ins[0], report.name)
        return Shape.chw(x[0], *pair(s["output"]))

    def cost(self, s, ins, out):
        return Cost(0, 0, 0, ins[0].elements)

    def window(self, s, ins):
        (oh, ow), x = pair(s["output"]), ins[0]
        kh, kw_ = -(-x[1] // oh), -(-x[2] // ow)
        return kh, kw_, max(x[1] // oh, 1), max(x[2] // ow, 1)

    def backward_keeps(self, s):
        """Global pooling is a mean, whose backward needs only the input's size."""
        return () if pair(s["output"]) == (1, 1) else self.keeps

    def summary(self, s):
        return "global" if pair(s["output"]) == (1, 1) else f"to {pair_text(s['output'])}"

    def torch_layer(self, s, ins, out):
        return f"nn.AdaptiveAvgPool2d({s['output']!r})"


@register
class Upsample(Kind):
    name, title, family = "Upsample", "Upsample", "Pooling & resizing"
    settings = (int_setting("scale", 2, "Scale", maximum=64),
                Setting("mode", "choice", "nearest", "Mode", choices=("nearest", "bilinear")))

    def shape(self, s, ins, report):
        x = need_map(ins[0], report.name)
        f = s["scale"]
        return Shape.chw(x[0], x[1] * f, x[2] * f)

    def cost(self, s, ins, out):
        return Cost(0, 0, 0, out.elements * (4 if s["mode"] == "bilinear" else 1))

    def window(self, s, ins):
        return 1, 1, 1 / s["scale"], 1 / s["scale"]

    def summary(self, s):
        return f"×{s['scale']} {s['mode']}"

    def torch_layer(self, s, ins, out):
        extra = ", align_corners=False" if s["mode"] == "bilinear" else ""
        f = s["scale"]
        factor = repr(float(f)) if isinstance(f, int) else f"float({f!r})"  # f: a number or a motif parameter
        return f"nn.Upsample(scale_factor={factor}, mode={s['mode']!r}{extra})"
