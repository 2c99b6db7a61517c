"""Findings: what is wrong (or worth knowing) about a design, as data.

Every finding has a dotted code (``join.channels``), a severity, the block it is about (for a
block inside a motif: the instance at the top level plus ``path``, the inner block ids), the
input port if one is at fault, a message with the numbers in plain words, and ``numbers``: the
two clashing values when there are two (shown as a badge such as ``256 ≠ 128``).

Codes (the full list lives in :data:`CODES`, each with a one-line meaning).
"""
from __future__ import annotations

from dataclasses import dataclass, field

ERROR, WARNING, NOTE = "error", "warning", "note"
SEVERITY_RANK = {ERROR: 0, WARNING: 1, NOTE: 2}

CODES: dict[str, str] = {
    "join.channels": "branches joined by an addition or product carry different channel counts",
    "join.size": "branches joined carry different heights or widths",
    "join.rank": "a feature map is joined with a flat vector",
    "shape.collapsed": "a height or width falls below 1",
    "shape.rank": "a block that needs a feature map (C×H×W) is fed a flat vector",
    "shape.stride_drops": "a strided step leaves the last rows or columns unused",
    "conv.groups": "groups do not divide the in or out channels",
    "conv.same_stride": "padding 'same' is used with a stride above 1 (PyTorch refuses it)",
    "conv.output_padding": "output padding of a transposed convolution is not below its stride or dilation",
    "pool.padding": "pooling padding is more than half the kernel (PyTorch refuses it)",
    "linear.rank": "a Linear block is fed a feature map instead of a flat vector",
    "linear.features": "the in-features a Linear block expects differ from what arrives",
    "port.unwired": "an input port has no wire",
    "port.multiple": "an input port has more than one wire",
    "port.missing": "a wire goes to an input port the block does not have",
    "graph.cycle": "wires form a loop",
    "graph.dead_end": "a block's output reaches no Output",
    "graph.no_output": "the design has no Output block",
    "motif.missing": "an instance names a motif the design does not define",
    "motif.recursive": "a motif contains itself",
    "motif.repeat_shape": "a repeated motif changes the shape, so its copies cannot be stacked",
    "motif.ports": "an instance's ports do not match its motif",
    "motif.param": "a motif parameter is unknown or its value does not fit the setting it feeds",
    "import.unmapped": "an imported operation no kind describes; it carries its traced shape and costs",
    "import.unmapped_input": "an unmapped operation receives another shape than it was traced with",
    "budget.weights": "the weights pass the design's budget",
    "budget.macs": "the MACs pass the design's budget",
    "budget.memory": "the peak live activation memory passes the design's budget",
    "budget.latency_ms": "the estimated latency on the target passes the design's budget",
    "budget.no_target": "a latency budget is set but no target to estimate latency on",
}


@dataclass(frozen=True)
class Finding:
    """One finding. ``block`` is a top-level block id; ``path`` the ids inside motifs, outermost first;
    ``port`` an input port of the block the finding is about (the last of ``path`` when there is one)."""

    code: str
    severity: str
    block: str
    message: str
    port: int | None = None
    numbers: tuple = ()
    path: tuple[str, ...] = field(default=())

    @property
    def badge(self) -> str:
        """Short text for a badge: ``256 ≠ 128`` when there are two numbers, else the code."""
        if len(self.numbers) == 2:
            return f"{self.numbers[0]} ≠ {self.numbers[1]}"
        return self.code

    def inside(self, instance: str, instance_name: str) -> "Finding":
        """This finding seen from one level up, through the motif instance ``instance``."""
        return Finding(self.code, self.severity, instance, f"{instance_name} › {self.message}",
                       self.port, self.numbers, (self.block, *self.path))


class Stop(Exception):
    """Raised inside a shape rule to end inference of one block with an error finding."""

    def __init__(self, code: str, message: str, port: int | None = None, numbers: tuple = ()):
        super().__init__(message)
        self.code, self.message, self.port, self.numbers = code, message, port, numbers


class Report:
    """Passed to shape rules: the block's name, and a place to put warnings and notes."""

    __slots__ = ("block", "name", "found")

    def __init__(self, block: str, name: str):
        self.block, self.name, self.found = block, name, []

    def add(self, code: str, severity: str, message: str, port: int | None = None, numbers: tuple = ()) -> None:
        self.found.append(Finding(code, severity, self.block, message, port, numbers))


def sort_findings(findings) -> list[Finding]:
    """Errors first, then warnings, then notes; stable within a severity."""
    return sorted(findings, key=lambda f: SEVERITY_RANK[f.severity])
