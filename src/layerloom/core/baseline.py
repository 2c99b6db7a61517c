"""Baselines: a frozen copy of a design's ledger, pinned to compare later versions against.

A baseline is plain JSON-ready data (saved inside the ``.loom`` file): the totals and, per block
in depth order, the name, the blocks executed up to it (``step``: a motif use counts the blocks
it runs), the cumulative weights, MACs and latency and the live activation bytes, so the Depth
ledger can overlay the old curves on the new whatever is grouped into motifs.
"""
from __future__ import annotations

import datetime as _dt
import math
from typing import NamedTuple

from layerloom.core.units import ratio

METRICS = (("weights", "weights"), ("macs", "MACs"), ("peak_memory", "peak live activations"),
           ("latency", "estimated latency"))


class Difference(NamedTuple):
    """One total, now and in the baseline; ``percent`` is None when the baseline is 0."""

    metric: str
    label: str
    current: float  # counts and bytes as exact integers, latency in seconds
    baseline: float

    @property
    def delta(self) -> float:
        return self.current - self.baseline

    @property
    def percent(self) -> float | None:
        return ratio(100 * self.delta, self.baseline) if self.baseline else None


def snapshot(ledger, name: str, when: _dt.date | None = None, curves: bool = True) -> dict:
    """Freeze ``ledger`` as a baseline called ``name`` (dated ``when``, default today). Without
    ``curves``, its totals alone: all a comparison of totals needs, and numpy is not imported."""
    t = ledger.totals
    data = {
        "name": name,
        "pinned": (when or _dt.date.today()).isoformat(),
        "batch": ledger.batch,
        "dtype": ledger.dtype,
        "totals": {"weights": t.weights, "macs": t.macs, "peak_memory": t.peak_memory},
    }
    timed = ledger.latency is not None and math.isfinite(t.latency)  # a file holds no infinity
    if curves:
        data["blocks"] = {
            "name": [ledger.analysis.design.blocks[b].name for b in ledger.order],
            "step": [int(v) for v in ledger.steps],
            "weights": [int(v) for v in ledger.cumulative_weights],
            "macs": [int(v) for v in ledger.cumulative_macs],
            "live": [int(v) for v in ledger.live],
        }
        if timed:
            data["blocks"]["latency"] = [float(v) for v in ledger.cumulative_latency]
    if timed:
        data["totals"]["latency"] = t.latency
        data["target"] = ledger.target.name
    return data


def snapshot_of_file(path, target=None, name: str | None = None, errors: list | None = None,
                     curves: bool = True) -> dict:
    """A baseline from another design file (named ``name``, else the design's own name; its totals
    alone without ``curves``). Without a target of its own, the other design is estimated on
    ``target`` so latencies compare. The other design's error findings, whose blocks onward are not
    counted, are appended to ``errors`` when given. Raises
    :class:`~layerloom.core.fileformat.LoomFileError` for a file that cannot be read."""
    from layerloom.core.fileformat import load
    from layerloom.core.ledger import Ledger

    other = load(path)
    if other.target is None and target is not None:
        other.set_field("target", target)
    if errors is not None:
        from layerloom.core.findings import ERROR

        errors += [f for f in other.findings() if f.severity == ERROR]
    return snapshot(Ledger(other.analysis()), name or other.name, curves=curves)


def compare(ledger, baseline: dict) -> list[Difference]:
    """Totals of ``ledger`` beside those of ``baseline`` (latency only when both have it)."""
    now = ledger.totals._asdict()
    out = []
    for key, label in METRICS:
        if now.get(key) is None or key not in baseline["totals"]:
            continue
        out.append(Difference(key, label, now[key], baseline["totals"][key]))
    return out
