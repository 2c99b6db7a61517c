"""A measurement: the exported network timed on one machine, as saved in the ``.loom`` file.

Times are seconds: the median of the timed runs and their spread (the interquartile range, 75th
minus 25th percentile). ``blocks`` maps block ids to (median, spread) of that block run alone on
its inputs (see :mod:`layerloom.measure.timing`); blocks that do no work are absent. Reading and
writing need no torch, so the editor shows the last measurement without importing it.
"""
from __future__ import annotations

from typing import TYPE_CHECKING, NamedTuple

if TYPE_CHECKING:
    import numpy as np


class Machine(NamedTuple):
    """Where a measurement was taken."""

    cpu: str
    threads: int
    torch_version: str
    runtime: str  # "torch" or "onnxruntime <version>"

    def describe(self) -> str:
        return f"{self.cpu}, {self.threads} thread{'s' if self.threads != 1 else ''}, {self.runtime}"


class Measurement(NamedTuple):
    machine: Machine
    date: str  # ISO 8601, UTC
    batch: int
    repeat: int
    total: float  # seconds, median of the whole forward
    spread: float
    blocks: dict[str, tuple[float, float]]  # block id → (median, spread) in seconds

    def to_data(self) -> dict:
        m = self.machine
        return {"cpu": m.cpu, "threads": m.threads, "torch_version": m.torch_version, "runtime": m.runtime,
                "date": self.date, "batch": self.batch, "repeat": self.repeat,
                "total_s": self.total, "spread_s": self.spread,
                "blocks": {b: [t, s] for b, (t, s) in self.blocks.items()}}

    @staticmethod
    def from_data(data: dict) -> "Measurement":
        """Inverse of :meth:`to_data` (the schema has checked the types)."""
        return Measurement(Machine(data["cpu"], int(data["threads"]), data["torch_version"], data["runtime"]),
                           data["date"], int(data["batch"]), int(data["repeat"]), float(data["total_s"]),
                           float(data["spread_s"]), {b: (float(t), float(s)) for b, (t, s) in data["blocks"].items()})

    def along(self, order) -> "np.ndarray":
        """Measured seconds per step of ``order`` (0 for blocks not timed)."""
        import numpy as np  # here: reading a design file (which imports this module) needs no numpy

        return np.array([self.blocks.get(b, (0.0, 0.0))[0] for b in order], dtype=float)

    def missing(self, ledger) -> list[str]:
        """Names of blocks that compute but were not timed (added since the measurement)."""
        return [r.name for r, w in zip(ledger.rows, ledger.working) if w and r.block not in self.blocks]


class Timed(NamedTuple):
    """One timed block beside its roofline estimate (seconds; ``ratio`` is measured ÷ estimated)."""

    block: str
    name: str
    kind: str
    measured: float
    spread: float
    estimated: float | None
    ratio: float | None


def compare(ledger, measurement: Measurement) -> list[Timed]:
    """The timed blocks in depth order with the ledger's estimate (when it has a target)."""
    out = []
    for i, r in enumerate(ledger.rows):
        if r.block not in measurement.blocks:
            continue
        t, s = measurement.blocks[r.block]
        est = float(ledger.latency[i]) if ledger.latency is not None else None
        out.append(Timed(r.block, r.name, r.kind, t, s, est, t / est if est else None))
    return out
