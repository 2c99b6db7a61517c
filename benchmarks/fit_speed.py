"""Fit to budget on a 500-block design: the largest fitting candidate of every family, found with the
ledger only (no torch). Target (issue: Fit to budget): ≤ 1 s."""
from __future__ import annotations

import statistics
import sys
import time

from synthetic import residual_stack

from layerloom.core.fit import fit


def main() -> None:
    design = residual_stack(500)
    totals = design.ledger().totals
    budget = {"macs": int(totals.macs * 0.6), "weights": int(totals.weights * 1.2), "memory": totals.peak_memory}
    runs = []
    for _ in range(3):
        start = time.perf_counter()
        result = fit(design, budget)
        runs.append(time.perf_counter() - start)
    assert "torch" not in sys.modules, "fit imported torch"
    best = result.best
    print(f"{len(design.blocks)} blocks; budget: MACs {budget['macs']:,}, weights {budget['weights']:,}, "
          f"peak memory {budget['memory']:,} B")
    print(f"chosen: {best.describe()}: MACs {best.macs:,}, weights {best.weights:,}; "
          f"{len(result.candidates)} fitting candidates listed")
    print(f"fit search: median {statistics.median(runs) * 1e3:.0f} ms of {len(runs)} runs "
          f"(target ≤ 1000 ms) — {'OK' if statistics.median(runs) <= 1.0 else 'MISSED'}")


if __name__ == "__main__":
    main()
