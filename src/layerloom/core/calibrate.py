"""A target calibrated from a measurement: the roofline's MAC rate, bandwidth and per-layer overhead
fitted to the measured time of each block, by least squares (numpy only).

Model (:mod:`layerloom.core.targets`): ``t = max(MACs / rate, bytes / bandwidth) + overhead``. A
block is compute-bound exactly when its intensity (MACs per byte) is at least rate / bandwidth, so
the blocks sorted by intensity split into a memory-bound lower part and a compute-bound upper part.
Every split is tried: it makes the model linear in (1 / rate, 1 / bandwidth, overhead), solved by
least squares on relative error (each block weighs the same, whatever its size), with no coefficient
below zero (each subset of the three is tried). A rate the split leaves undetermined (a part that
is empty, or a coefficient at zero) is set as high as keeps every block with MACs on its side; with
no block of that side, the split gives no fit. The fit whose full roofline predicts the blocks best
wins. On times that follow a roofline exactly, the true split gives a zero residual, so its rates
come back exactly.

A fit outside :data:`PLAUSIBLE` is refused (:class:`Implausible`), never returned: block times near
the timer's resolution, or a loaded machine whose blocks without MACs take no longer than the
per-layer overhead, can fit a bandwidth or rate no computer has (once 3.31e+07 GB/s, a millionfold
placeholder for a bandwidth the times left undetermined).

Samples are plain blocks (motif instances hold many layers, each with its own overhead) that do
work; the measured module runs in fp32, so bytes are counted at 4 per element.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from layerloom.core.targets import Target

MEASURED_BYTES = 4  # the exported module runs in fp32

PLAUSIBLE = (("MAC rate", "macs_per_second", 1e6, 1e15, 1e9, "GMAC/s"),
             ("memory bandwidth", "bytes_per_second", 1e6, 1e13, 1e9, "GB/s"),
             ("per-layer overhead", "overhead", 0.0, 1.0, 1e-6, "µs"))
"""(figure, Target field, lowest, highest, unit scale, unit) a calibration may give. Generous bounds
from common practice: CPU memory moves tens to hundreds of GB/s (a few TB/s from caches summed over
many cores), the largest CPUs do a few TMAC/s in fp32; a millionth of either is slower than any
computer that runs PyTorch, and an overhead of a second per layer is a stall, not an overhead."""


class Implausible(ValueError):
    """A calibration whose figure no computer has: the times should be measured again."""


class Sample(NamedTuple):
    name: str
    macs: float
    moved: float  # bytes
    seconds: float


def samples(ledger, measurement) -> list[Sample]:
    """One sample per timed plain block; ValueError when the ledger's batch is not the measurement's."""
    if ledger.batch != measurement.batch:
        raise ValueError(f"the measurement ran at batch {measurement.batch}, the design is at batch {ledger.batch}")
    scale = MEASURED_BYTES / ledger.bytes_per_element
    return [Sample(r.name, float(r.macs), r.moved * scale, measurement.blocks[r.block][0])
            for r in ledger.rows if r.block in measurement.blocks and r.kind != "Motif"
            and measurement.blocks[r.block][0] > 0]


def predict(target: Target, data: list[Sample]) -> np.ndarray:
    """Roofline seconds of each sample on ``target``."""
    m = np.array([s.macs for s in data])
    b = np.array([s.moved for s in data])
    return np.maximum(m / target.macs_per_second, b / target.bytes_per_second) + target.overhead


def mape(target: Target, data: list[Sample]) -> float:
    """Median absolute percentage error of ``target``'s predictions of ``data``'s measured times."""
    t = np.array([s.seconds for s in data])
    return float(np.median(np.abs(predict(target, data) - t) / t) * 100)


def calibrate(data: list[Sample], name: str, assumptions: str = "") -> Target:
    """The roofline that best fits ``data``; ValueError when the blocks cannot determine it."""
    m = np.array([s.macs for s in data])
    b = np.array([s.moved for s in data])
    t = np.array([s.seconds for s in data])
    usable = (b > 0) & (t > 0)
    m, b, t = m[usable], b[usable], t[usable]
    rank = np.argsort(m / b if len(m) else m, kind="stable")
    best: tuple[float, tuple] | None = None
    for split in range(len(rank) + 1):  # rank[:split] memory-bound, rank[split:] compute-bound
        compute = np.zeros(len(t), dtype=bool)
        compute[rank[split:]] = True
        found = _solve(m, b, t, compute)
        if found is None:
            continue
        x, y, o = found
        err = float(np.sum(((np.maximum(m * x, b * y) + o) / t - 1) ** 2))
        if best is None or err < best[0]:
            best = (err, found)
    if best is None:
        raise ValueError(f"calibration needs blocks that do work, compute-bound and memory-bound, with measured "
                         f"times: {int(usable.sum())} of {len(data)} samples are usable")
    x, y, o = best[1]
    return plausible(Target(name, 1 / x, 1 / y, o, assumptions))


def plausible(target: Target) -> Target:
    """``target``, or :class:`Implausible` naming the first figure outside :data:`PLAUSIBLE`."""
    for label, field, low, high, scale, unit in PLAUSIBLE:
        value = getattr(target, field)
        if not low <= value <= high:
            raise Implausible(f"the calibrated {label}, {value / scale:.3g} {unit}, is not one a computer has "
                              f"({low / scale:g} to {high / scale:g} {unit}): the block times are too short or "
                              "too noisy to fit (a loaded machine, or blocks near the timer's resolution)")
    return target


def _solve(m, b, t, compute) -> tuple[float, float, float] | None:
    """Least squares (relative) of t = x·m [compute] + y·b [memory] + o with x, y, o ≥ 0; a rate
    left at zero is then set from the other (see the module docstring). None if both are zero."""
    a = np.column_stack([np.where(compute, m, 0.0), np.where(compute, 0.0, b), np.ones(len(t))]) / t[:, None]
    rhs = np.ones(len(t))
    best = None
    for cols in ((0, 1, 2), (0, 1), (0, 2), (1, 2), (0,), (1,)):
        coef = np.zeros(3)
        coef[list(cols)] = np.linalg.lstsq(a[:, cols], rhs, rcond=None)[0]
        if (coef < 0).any():
            continue
        err = float(np.sum((a @ coef - rhs) ** 2))
        if best is None or err < best[0]:
            best = (err, coef)
    if best is None:
        return None
    x, y, o = (float(c) for c in best[1])
    if x <= 0 and y <= 0:
        return None
    if (x <= 0 or y <= 0) and not (m > 0).any():  # no block shows either rate
        return None
    if x <= 0:  # as fast as keeps every block with MACs memory-bound
        x = float(np.min(y * b[m > 0] / m[m > 0]))
    if y <= 0:  # as wide as keeps every block with MACs compute-bound
        y = float(np.min(x * m[m > 0] / b[m > 0]))
    return (x, y, o) if x > 0 and y > 0 else None


def split_halves(data: list[Sample]) -> tuple[list[Sample], list[Sample]]:
    """Every other block, in depth order: the half to fit on and the half held out."""
    return data[::2], data[1::2]
