"""Flat-vector and pass-through kinds: Flatten, Linear, Dropout, Softmax, Identity.

Linear: weights in·out (+ out for bias), MACs in·out per sample. Flatten, Dropout (at inference)
and Identity hand on their input unchanged (no new activation memory). Softmax: 3 operations per
element (exponent, sum, divide).
"""
from __future__ import annotations

from layerloom.core.findings import Stop
from layerloom.core.kinds.base import Cost, Kind, register
from layerloom.core.settings import Setting, bool_setting, int_setting
from layerloom.core.shapes import Shape


@register
class Flatten(Kind):
    name, title, family = "Flatten", "Flatten", "Dense"
    view = True

    def shape(self, s, ins, report):
        return Shape.flat(ins[0].elements)

    def window(self, s, ins):
        x = ins[0]
        return (x[1], x[2], x[1], x[2]) if len(x) == 3 else None

    def channels(self, s, ins):
        return None  # C·H·W features: they depend on height and width

    def torch_layer(self, s, ins, out):
        return "nn.Flatten(1)"



@register
class Linear(Kind):
    name, title, family = "Linear", "Linear (fully connected)", "Dense"
    keeps = ("inputs",)
    stem = "fc"
    flat_input = True
    settings = (int_setting("out_features", 1000, "Out features"),
                bool_setting("bias", True, "Bias"),
                int_setting("in_features", 0, "Expected in features", minimum=0,
                            help="0 takes them from the wire; a number states what you expect and is checked"))

    def shape(self, s, ins, report):
        x = ins[0]
        if len(x) != 1:
            raise Stop("linear.rank", f"{report.name} is fed a {x} feature map; a Linear block needs a flat vector "
                       f"(insert a Flatten or a global pool before it)")
        expected = s["in_features"]
        if expected and expected != x[0]:
            raise Stop("linear.features", f"{report.name} expects {expected} in features but receives {x[0]}",
                       numbers=(x[0], expected))
        return Shape.flat(s["out_features"])

    def cost(self, s, ins, out):
        n_in, n_out = ins[0][0], out[0]
        return Cost(n_in * n_out + (n_out if s["bias"] else 0), 0, n_in * n_out, 0)

    def channels(self, s, ins):
        return s["out_features"]

    def summary(self, s):
        return f"→ {s['out_features']}"

    def torch_layer(self, s, ins, out):
        return f"nn.Linear({ins[0][0]}, {out[0]}" + ("" if s["bias"] else ", bias=False") + ")"


@register
class Dropout(Kind):
    name, title, family = "Dropout", "Dropout", "Dense"
    keeps = ("mask",)
    settings = (Setting("p", "float", 0.5, "Drop probability", 0.0, 1.0),)
    view = True

    def summary(self, s):
        return f"p {s['p']:g}"

    def torch_layer(self, s, ins, out):
        return f"nn.Dropout({s['p']!r})"


@register
class Softmax(Kind):
    name, title, family = "Softmax", "Softmax (over channels)", "Dense"
    keeps = ("output",)

    def cost(self, s, ins, out):
        return Cost(0, 0, 0, 3 * out.elements)

    def torch_layer(self, s, ins, out):
        return "nn.Softmax(dim=1)"


@register
class Identity(Kind):
    name, title, family = "Identity", "Identity", "Plumbing"
    view = True

    def torch_layer(self, s, ins, out):
        return "nn.Identity()"
