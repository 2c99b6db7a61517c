"""The ledger as CSV text (for ``layerloom ledger --csv`` and the Depth ledger's CSV export)."""
from __future__ import annotations

import csv
import io
import math

from layerloom.core.units import count

HEADINGS = ("step", "block", "kind", "depth", "out shape", "weights", "buffers", "MACs", "other ops",
            "out memory bytes", "live bytes", "receptive field", "bytes moved", "MACs per byte", "est. seconds",
            "bound")


def rf_text(rf) -> str:
    """Receptive field as ``35`` (square) or ``35×19`` (``4.1e+186`` or ``∞`` when huge); empty when unknown."""
    if rf is None:
        return ""
    h, w = (int(round(v)) if v < 1e15 else count(v) for v in rf)
    return f"{h}" if h == w else f"{h}×{w}"


def pixels(v: float) -> int | float | None:
    """A receptive field or jump for output: whole numbers as ``int``, fractions as they are, and
    None for a value beyond a float's range (JSON has no infinity)."""
    if not math.isfinite(v):
        return None
    return int(v) if float(v).is_integer() else v


def ledger_csv(ledger) -> str:
    """One row per block in depth order, with the headings above."""
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(HEADINGS)
    for i, r in enumerate(ledger.rows):
        w.writerow((i + 1, r.name, r.kind, r.depth, str(r.shape or ""), r.weights, r.buffers, r.macs, r.other,
                    r.memory, ledger.live[i], rf_text(r.rf), r.moved, f"{r.intensity:.3f}",
                    "" if r.latency is None else f"{r.latency:.3e}", r.bound))
    return out.getvalue()
