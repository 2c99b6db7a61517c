"""Convolution kinds: Conv2d, the pointwise (1×1) convolution, depthwise and transposed convolution.

Weights = out·(in/groups)·kh·kw (+ out for bias). MACs per sample = output elements · (in/groups)·kh·kw
for a convolution, input positions · kh·kw · in·out/groups for a transposed convolution (the
convention of ``torch.utils.flop_counter``).
"""
from __future__ import annotations

from layerloom.core.findings import Stop
from layerloom.core.kinds.base import Cost, Kind, conv_length, kw, need_map, register
from layerloom.core.settings import bool_setting, int_setting, padding_setting, pair, pair_setting, pair_text
from layerloom.core.shapes import Shape

OUT = int_setting("out_channels", 64, "Out channels", help="number of filters; in-channels come from the wire")
BIAS = bool_setting("bias", True, "Bias", help="add a learned bias per output channel (often off before a batch norm)")
STRIDE = pair_setting("stride", 1, "Stride")
DILATION = pair_setting("dilation", 1, "Dilation")
GROUPS = int_setting("groups", 1, "Groups", help="split channels into groups; must divide in and out channels")


def _groups_fit(c: int, out: int, g: int, name: str) -> None:
    if c % g or out % g:
        bad, total = (c, "in") if c % g else (out, "out")
        raise Stop("conv.groups", f"{name}: groups {g} do not divide the {bad} {total} channels", numbers=(bad, g))


def _conv_map(name, x, k, s, p, d, report) -> tuple[int, int]:
    """Output height and width of a convolution or pooling window over map ``x``."""
    if p == "same":
        if s != 1:
            raise Stop("conv.same_stride", f"{name}: padding 'same' needs stride 1, not {pair_text(s)}; "
                       "give the padding as a number instead")
        return x[1], x[2]
    (kh, kw_), (sh, sw), (ph, pw), (dh, dw) = pair(k), pair(s), pair(p), pair(d)
    return (conv_length(x[1], kh, sh, ph, dh, name, "height", report),
            conv_length(x[2], kw_, sw, pw, dw, name, "width", report))


def _conv_window(s: dict):
    (kh, kw_), (sh, sw), (dh, dw) = pair(s["kernel"]), pair(s["stride"]), pair(s["dilation"])
    return dh * (kh - 1) + 1, dw * (kw_ - 1) + 1, sh, sw


def _conv_summary(k, s, out=None, extra="") -> str:
    text = pair_text(k)
    if pair(s) != (1, 1):
        text += " /" + (str(s) if isinstance(s, int) else pair_text(s))
    if extra:
        text += " " + extra
    return text + (f" · {out}" if out is not None else "")


@register
class Conv2d(Kind):
    name, title, family = "Conv2d", "Convolution", "Convolution"
    keeps = ("inputs",)
    stem = "conv"
    settings = (OUT, pair_setting("kernel", 3, "Kernel"), STRIDE, padding_setting(1), DILATION, GROUPS, BIAS)

    def shape(self, s, ins, report):
        x = need_map(ins[0], report.name)
        out = s["out_channels"]
        _groups_fit(x[0], out, s["groups"], report.name)
        h, w = _conv_map(report.name, x, s["kernel"], s["stride"], s["padding"], s["dilation"], report)
        return Shape.chw(out, h, w)

    def cost(self, s, ins, out):
        kh, kw_ = pair(s["kernel"])
        per_out = ins[0][0] // s["groups"] * kh * kw_
        return Cost(out[0] * per_out + (out[0] if s["bias"] else 0), 0, out.elements * per_out, 0)

    def window(self, s, ins):
        return _conv_window(s)

    def channels(self, s, ins):
        return s["out_channels"]

    def summary(self, s):
        g = f"g{s['groups']}" if s["groups"] > 1 else ""
        return _conv_summary(s["kernel"], s["stride"], s["out_channels"], g)

    def torch_layer(self, s, ins, out):
        return (f"nn.Conv2d({ins[0][0]}, {s['out_channels']}, "
                + kw(kernel_size=s["kernel"], stride=_nd(s["stride"]), padding=_nd(s["padding"], 0),
                     dilation=_nd(s["dilation"]), groups=_nd(s["groups"]),
                     bias=None if s["bias"] else False) + ")")


@register
class Pointwise(Kind):
    """A 1×1 convolution: keeps height and width (at stride 1), sets channels to its filter count."""

    name, title, family = "Pointwise", "1×1 convolution", "Convolution"
    keeps = ("inputs",)
    stem = "pw"
    settings = (OUT, STRIDE, GROUPS, BIAS)

    def shape(self, s, ins, report):
        x = need_map(ins[0], report.name)
        out = s["out_channels"]
        _groups_fit(x[0], out, s["groups"], report.name)
        h, w = _conv_map(report.name, x, 1, s["stride"], 0, 1, report)
        return Shape.chw(out, h, w)

    def cost(self, s, ins, out):
        per_out = ins[0][0] // s["groups"]
        return Cost(out[0] * per_out + (out[0] if s["bias"] else 0), 0, out.elements * per_out, 0)

    def window(self, s, ins):
        sh, sw = pair(s["stride"])
        return 1, 1, sh, sw

    def channels(self, s, ins):
        return s["out_channels"]

    def summary(self, s):
        g = f"g{s['groups']}" if s["groups"] > 1 else ""
        return _conv_summary(1, s["stride"], s["out_channels"], g)

    def torch_layer(self, s, ins, out):
        return (f"nn.Conv2d({ins[0][0]}, {s['out_channels']}, kernel_size=1"
                + _tail(kw(stride=_nd(s["stride"]), groups=_nd(s["groups"]),
                           bias=None if s["bias"] else False)) + ")")


@register
class Depthwise(Kind):
    """A depthwise convolution: one filter (or ``multiplier`` filters) per input channel."""

    name, title, family = "Depthwise", "Depthwise convolution", "Convolution"
    keeps = ("inputs",)
    stem = "dw"
    settings = (pair_setting("kernel", 3, "Kernel"), STRIDE, padding_setting(1), DILATION,
                int_setting("multiplier", 1, "Channel multiplier", maximum=64,
                            help="filters per input channel; out channels = in channels × multiplier"),
                BIAS)

    def shape(self, s, ins, report):
        x = need_map(ins[0], report.name)
        h, w = _conv_map(report.name, x, s["kernel"], s["stride"], s["padding"], s["dilation"], report)
        return Shape.chw(x[0] * s["multiplier"], h, w)

    def cost(self, s, ins, out):
        kh, kw_ = pair(s["kernel"])
        return Cost(out[0] * kh * kw_ + (out[0] if s["bias"] else 0), 0, out.elements * kh * kw_, 0)

    def window(self, s, ins):
        return _conv_window(s)

    def channels(self, s, ins):
        return ins[0] * s["multiplier"]

    def summary(self, s):
        m = f"×{s['multiplier']}" if s["multiplier"] > 1 else ""
        return _conv_summary(s["kernel"], s["stride"], None, ("dw " + m).strip())

    def torch_layer(self, s, ins, out):
        c = ins[0][0]
        return (f"nn.Conv2d({c}, {c * s['multiplier']}, "
                + kw(kernel_size=s["kernel"], stride=_nd(s["stride"]), padding=_nd(s["padding"], 0),
                     dilation=_nd(s["dilation"]), groups=c, bias=None if s["bias"] else False) + ")")


@register
class ConvTranspose2d(Kind):
    """A transposed convolution; output size (H−1)·s − 2p + d(k−1) + output padding + 1."""

    name, title, family = "ConvTranspose2d", "Transposed convolution", "Convolution"
    keeps = ("inputs",)
    stem = "upconv"
    settings = (OUT, pair_setting("kernel", 2, "Kernel"), pair_setting("stride", 2, "Stride"),
                pair_setting("padding", 0, "Padding", minimum=0),
                pair_setting("output_padding", 0, "Output padding", minimum=0,
                             help="extra rows/columns on one side; must be below the stride or the dilation"),
                DILATION, GROUPS, BIAS)

    def shape(self, s, ins, report):
        name = report.name
        x = need_map(ins[0], name)
        out = s["out_channels"]
        _groups_fit(x[0], out, s["groups"], name)
        sizes = []
        for axis, n, k, st, p, op, d in zip(("height", "width"), x[1:], pair(s["kernel"]), pair(s["stride"]),
                                            pair(s["padding"]), pair(s["output_padding"]), pair(s["dilation"])):
            if op >= max(st, d):
                raise Stop("conv.output_padding", f"{name}: output padding {op} must be below the stride {st} "
                           f"or the dilation {d}", numbers=(op, max(st, d)))
            size = (n - 1) * st - 2 * p + d * (k - 1) + op + 1
            if size < 1:
                raise Stop("shape.collapsed", f"{name}: the output {axis} would be {size}; reduce the padding {p}",
                           numbers=(size, 1))
            sizes.append(size)
        return Shape.chw(out, *sizes)

    def cost(self, s, ins, out):
        kh, kw_ = pair(s["kernel"])
        x = ins[0]
        per_in = out[0] // s["groups"] * kh * kw_
        return Cost(x[0] * per_in + (out[0] if s["bias"] else 0), 0, x.elements * per_in, 0)

    def window(self, s, ins):
        (kh, kw_), (sh, sw) = pair(s["kernel"]), pair(s["stride"])
        return -(-kh // sh), -(-kw_ // sw), 1 / sh, 1 / sw

    def channels(self, s, ins):
        return s["out_channels"]

    def summary(self, s):
        return _conv_summary(s["kernel"], s["stride"], s["out_channels"], "up")

    def torch_layer(self, s, ins, out):
        return (f"nn.ConvTranspose2d({ins[0][0]}, {s['out_channels']}, "
                + kw(kernel_size=s["kernel"], stride=s["stride"], padding=_nd(s["padding"], 0),
                     output_padding=_nd(s["output_padding"], 0), groups=_nd(s["groups"]),
                     bias=None if s["bias"] else False, dilation=_nd(s["dilation"])) + ")")


def _nd(value, default=1):
    """``None`` when ``value`` is PyTorch's default, so the generated call stays short."""
    return None if value == default or value == (default, default) else value


def _tail(text: str) -> str:
    return ", " + text if text else ""

