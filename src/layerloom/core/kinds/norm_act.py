"""Batch norm and the element-wise activations.

BatchNorm2d: weights 2·C (scale and shift) when affine; buffers 2·C + 1 (running mean, running
variance, batch counter); other operations 2 per element. Activations: no weights, 1 operation
per element.
"""
from __future__ import annotations

from layerloom.core.kinds.base import Cost, Kind, kw, need_map, register
from layerloom.core.settings import Setting, bool_setting


@register
class BatchNorm2d(Kind):
    name, title, family = "BatchNorm2d", "Batch norm", "Norm & activation"
    stem = "bn"
    keeps = ("inputs",)
    settings = (Setting("eps", "float", 1e-5, "Epsilon", 0.0, 1.0),
                bool_setting("affine", True, "Learned scale and shift"))

    def shape(self, s, ins, report):
        return need_map(ins[0], report.name)

    def cost(self, s, ins, out):
        c = out[0]
        return Cost(2 * c if s["affine"] else 0, 2 * c + 1, 0, 2 * out.elements)

    def summary(self, s):
        return "BN"

    def torch_layer(self, s, ins, out):
        return f"nn.BatchNorm2d({out[0]}" + "".join(
            ", " + a for a in (kw(eps=s["eps"]) if s["eps"] != 1e-5 else "", "" if s["affine"] else "affine=False") if a) + ")"


class Activation(Kind):
    """An element-wise activation; ``module`` is its PyTorch class name."""

    family = "Norm & activation"
    module = ""
    keeps = ("inputs",)

    def cost(self, s, ins, out):
        return Cost(0, 0, 0, out.elements)

    def summary(self, s):
        return ""

    def torch_layer(self, s, ins, out):
        return f"nn.{self.module}()"


def _activation(kind_name: str, title: str, keeps: str) -> None:
    register(type(kind_name, (Activation,), {"name": kind_name, "title": title, "module": kind_name,
                                             "keeps": (keeps,)}))


# what PyTorch's autograd keeps for each one's backward (checked with saved_tensors_hooks)
for _name, _title, _keeps in (("ReLU", "ReLU", "output"), ("ReLU6", "ReLU6", "inputs"), ("GELU", "GELU", "inputs"),
                              ("SiLU", "SiLU (swish)", "inputs"), ("Sigmoid", "Sigmoid", "output"),
                              ("Tanh", "Tanh", "output"), ("Hardswish", "Hard swish", "inputs")):
    _activation(_name, _title, _keeps)


@register
class LeakyReLU(Activation):
    name, title, module = "LeakyReLU", "Leaky ReLU", "LeakyReLU"
    stem = "lrelu"
    settings = (Setting("negative_slope", "float", 0.01, "Negative slope", 0.0, 1.0),)

    def summary(self, s):
        return f"{s['negative_slope']:g}"

    def torch_layer(self, s, ins, out):
        return f"nn.LeakyReLU({s['negative_slope']!r})"
