"""Budgets: cost limits of a design, and the findings that say where a design passes them.

A budget may limit total ``weights``, total ``macs`` (for the batch), ``memory`` (peak live
activation bytes) and ``latency_ms`` (estimated on the design's target). Each ``budget.*`` finding
is a warning on the block where the cumulative curve (or, for memory, the live activations) first
goes over the limit, with the overrun in its message.
"""
from __future__ import annotations

import math
from itertools import accumulate

from layerloom.core import units
from layerloom.core.findings import NOTE, WARNING, Finding
from layerloom.core.units import ratio
from layerloom.core.values import quote

LIMITS = {
    "weights": "weights",
    "macs": "MACs",
    "memory": "peak live activation memory",
    "latency_ms": "estimated latency",
}


def check_budget(budget: dict) -> dict:
    """Return a clean copy of ``budget``; ValueError naming the key and the value when one is wrong."""
    clean = {}
    for key, value in budget.items():
        if key not in LIMITS:
            raise ValueError(f"budget has no limit {quote(key)} (limits: {', '.join(LIMITS)})")
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not value > 0:
            raise ValueError(f"budget {key} must be a number above 0, not {quote(value)}")
        try:
            clean[key] = float(value) if key == "latency_ms" else int(value)
        except OverflowError:
            raise ValueError(f"budget {key} is too large") from None
        if clean[key] == math.inf:
            raise ValueError(f"budget {key} is too large")
    return clean


def _text(key: str, value: float) -> str:
    if key == "memory":
        return units.size(value)
    if key == "latency_ms":
        return f"{value:.3g} ms"
    return units.count(value)


def budget_findings(ledger, budget: dict) -> list[Finding]:
    """One warning per limit the design passes, on the block where it is passed."""
    found = []
    blocks = ledger.analysis.design.blocks
    curves = {"weights": list(accumulate(c[0] for c in ledger.counts)),
              "macs": list(accumulate(c[2] for c in ledger.counts)), "memory": ledger.live}
    if ledger.latency is not None:
        curves["latency_ms"] = [v * 1e3 for v in accumulate(ledger.latency)]
    for key, limit in budget.items():
        curve = curves.get(key)
        if curve is None:
            found.append(Finding("budget.no_target", NOTE, "", "the latency budget needs a target to estimate "
                                 "latency on; choose one in the design's settings"))
            continue
        first = next((i for i, v in enumerate(curve) if v > limit), None)
        if first is None:
            continue
        at = ledger.order[first]
        worst = max(curve)
        what = LIMITS[key]
        so_far = "alive there" if key == "memory" else "so far"
        total = "the peak is" if key == "memory" else "the design totals"
        found.append(Finding(f"budget.{key}", WARNING, at,
                             f"{what}: the budget of {_text(key, limit)} is passed at {blocks[at].name} "
                             f"({_text(key, curve[first])} {so_far}); {total} {_text(key, worst)}, "
                             f"{ratio(100 * worst, limit):.0f} % of the budget",
                             numbers=(_text(key, worst), _text(key, limit))))
    return found
