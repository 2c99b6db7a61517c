"""Unmapped: an operation brought in by import that no other kind describes.

It carries what was measured at import: the operation's name, the input and output shapes it was
traced with, and its weights, buffers and MACs per sample (MACs from PyTorch's ``FlopCounterMode``
/ 2 for a PyTorch module; an ONNX file's operations are counted by the rules of
:mod:`layerloom.importing.onnx_graph`). So the design stays whole and its ledger stays right.
Every such block has the note ``import.unmapped``; fed any other shape than the traced one it
stops with ``import.unmapped_input``, since what it carries no longer holds. It exports as a
placeholder module whose forward the user must write, so an export with one is never verified.
"""
from __future__ import annotations

from layerloom.core.findings import Stop
from layerloom.core.kinds.base import PORTS, Cost, Kind, register
from layerloom.core.settings import Setting, SettingError, int_setting
from layerloom.core.shapes import Shape
from layerloom.core.values import quote

PLACEHOLDER = '''class UnmappedOperation(nn.Module):
    """Placeholder for an operation Layerloom imported but could not map: write its forward."""

    def __init__(self, operation, out_shape):
        super().__init__()
        self.operation, self.out_shape = operation, out_shape

    def forward(self, *inputs):
        raise NotImplementedError(f"fill in the unmapped operation {self.operation} (output {self.out_shape} per sample)")
'''


def shape_text(shape) -> str:
    """``(64, 56, 56)`` → ``64×56×56``; several shapes are joined with ``; ``."""
    return "×".join(str(d) for d in shape)


def parse_shapes(text: str) -> tuple[Shape, ...]:
    """``3×8×8; 10`` → (Shape(3×8×8), Shape(10)); a shape is C×H×W or F. ValueError saying why."""
    shapes = []
    for part in text.split(";"):
        dims = part.replace("x", "×").strip().split("×")
        try:
            numbers = [int(d) for d in dims]
        except ValueError:
            raise ValueError(f"{quote(part.strip())} is not a shape C×H×W or F") from None
        if len(numbers) not in (1, 3) or min(numbers) < 1:
            raise ValueError(f"{quote(part.strip())} is not a shape C×H×W or F of sizes ≥ 1")
        shapes.append(Shape(numbers))
    return tuple(shapes)


COUNT = dict(minimum=0, maximum=1 << 62)


@register
class Unmapped(Kind):
    name, title, family = "Unmapped", "Unmapped operation (from import)", "Plumbing"
    stem = "unmapped"
    scriptable = False
    verifiable = False
    settings = (Setting("operation", "text", "operation", "Operation", help="what import found (module or function)"),
                int_setting("inputs", 1, "Inputs", maximum=PORTS),
                Setting("in_shapes", "text", "64×56×56", "Traced input shapes", help="per input port, joined by ;"),
                Setting("out_shape", "text", "64×56×56", "Traced output shape"),
                int_setting("weights", 0, "Weights", **COUNT, help="learned parameters, measured at import"),
                int_setting("buffers", 0, "Buffers", **COUNT),
                int_setting("macs", 0, "MACs per sample", **COUNT, help="measured at import"))

    def check_settings(self, settings: dict) -> dict:
        out = super().check_settings(settings)
        for key in ("in_shapes", "out_shape"):
            try:
                shapes = parse_shapes(out[key])
            except ValueError as e:
                raise SettingError(f"{self.settings_by_key[key].label}: {e}") from None
        if len(shapes) != 1:
            raise SettingError(f"Traced output shape must be one shape, not {quote(out['out_shape'])}")
        if len(parse_shapes(out["in_shapes"])) != out["inputs"]:
            raise SettingError(f"Traced input shapes {quote(out['in_shapes'])} must give one shape per input "
                               f"({out['inputs']})")
        return out

    def input_count(self, s):
        return s["inputs"]

    def shape(self, s, ins, report):
        for port, (got, traced) in enumerate(zip(ins, parse_shapes(s["in_shapes"]))):
            if got != traced:
                raise Stop("import.unmapped_input", f"{report.name} ({s['operation']}) was measured on {traced} at "
                           f"import but receives {got}; its shape and costs no longer hold", port, (str(got), str(traced)))
        report.add("import.unmapped", "note", f"{report.name} is {s['operation']}, which import could not map: it "
                   f"carries the traced shape and costs, and exports as a placeholder to fill in")
        return parse_shapes(s["out_shape"])[0]

    def cost(self, s, ins, out):
        return Cost(s["weights"], s["buffers"], s["macs"], 0)

    def channels(self, s, ins):
        return None

    def summary(self, s):
        return s["operation"] if len(s["operation"]) <= 24 else s["operation"][:23] + "…"

    def torch_layer(self, s, ins, out):
        return f"UnmappedOperation({s['operation']!r}, {s['out_shape']!r})"

    torch_helper = PLACEHOLDER

