"""Targets: hardware profiles for a first-order latency estimate (a roofline).

A target is a peak multiply-accumulate rate, a memory bandwidth and a fixed overhead per layer.
Each block's estimated time is ``max(MACs / peak rate, bytes moved / bandwidth) + overhead``: it is
compute-bound when the first term is larger, memory-bound otherwise. Bytes moved are the block's
weights plus its input and output activations at the design's element type.

This is a first-order estimate: it ignores caches, layer fusion, kernel choice, threading and
data layout. Measured latency on the real device decides.
"""
from __future__ import annotations

import math

from typing import NamedTuple

from layerloom.core.values import quote

CAUTION = ("First-order estimate (roofline): ignores caches, fusion and kernel choice; "
           "measured latency on the real device decides.")


class Target(NamedTuple):
    """A hardware profile. Rates are per second; ``overhead`` is seconds per layer."""

    name: str
    macs_per_second: float
    bytes_per_second: float
    overhead: float = 0.0
    assumptions: str = ""

    def to_data(self) -> dict:
        return {"name": self.name, "gmacs_per_second": self.macs_per_second / 1e9,
                "gbytes_per_second": self.bytes_per_second / 1e9, "overhead_us": round(self.overhead * 1e6, 9),
                "assumptions": self.assumptions}

    @staticmethod
    def from_data(data: dict) -> "Target":
        """Inverse of :meth:`to_data`; raises ValueError naming a missing or non-positive field."""
        try:
            t = Target(str(data["name"]), float(data["gmacs_per_second"]) * 1e9,
                       float(data["gbytes_per_second"]) * 1e9, float(data.get("overhead_us", 0.0)) / 1e6,
                       str(data.get("assumptions", "")))
        except KeyError as e:
            raise ValueError(f"target is missing {quote(e.args[0])}") from None
        except OverflowError:
            t = None
        if t is None or not all(map(math.isfinite, (t.macs_per_second, t.bytes_per_second, t.overhead))):
            raise ValueError("target rates are too large to count with")
        if t.macs_per_second <= 0 or t.bytes_per_second <= 0 or t.overhead < 0:
            raise ValueError(f"target {quote(t.name)} needs a positive MAC rate and bandwidth and an overhead ≥ 0")
        return t


PRESETS: tuple[Target, ...] = (
    Target("small ARM board, 4 cores", 48e9, 4e9, 20e-6,
           "4 cores × 1.5 GHz × 8 fp32 MACs per cycle (two 4-lane FMA units) = 48 GMAC/s; "
           "LPDDR4 at about 4 GB/s sustained; 20 µs per layer for dispatch"),
    Target("phone, 2 big CPU cores", 90e9, 12e9, 10e-6,
           "2 cores × 2.8 GHz × 16 fp32 MACs per cycle = 90 GMAC/s; LPDDR5 at about 12 GB/s sustained; "
           "10 µs per layer"),
    Target("cloud instance, 2 vCPUs", 80e9, 10e9, 5e-6,
           "2 vCPUs × 2.5 GHz × 16 fp32 MACs per cycle (AVX2, two FMA units) = 80 GMAC/s; "
           "about 10 GB/s per vCPU pair; 5 µs per layer"),
    Target("laptop CPU, 8 cores", 384e9, 40e9, 5e-6,
           "8 cores × 3 GHz × 16 fp32 MACs per cycle = 384 GMAC/s; dual-channel DDR4 at about 40 GB/s; "
           "5 µs per layer"),
    Target("desktop GPU, fp16", 30e12, 500e9, 8e-6,
           "about 30 TMAC/s of fp16 matrix throughput reached in convolutions; 500 GB/s memory; "
           "8 µs kernel launch per layer"),
)


def preset(name: str) -> Target:
    """The preset called ``name``; KeyError listing the presets otherwise."""
    for t in PRESETS:
        if t.name == name:
            return t
    raise KeyError(f"no target preset {quote(name)}; presets: {'; '.join(t.name for t in PRESETS)}")
