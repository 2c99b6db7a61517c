"""How long scripts take to build a design with ``Design.add``: 2,000 and 20,000 blocks in a chain.

Linear growth means the time per block stays about the same at ten times the blocks (a quadratic
``add`` took 0.2 s for 2,000 blocks and 25 s for 20,000). Prints figures; not a test.
"""
from __future__ import annotations

import time

from layerloom import Design

KINDS = ("Conv2d", "BatchNorm2d", "ReLU")


def build(blocks: int) -> float:
    """Seconds to add ``blocks`` blocks one by one (convolution, norm, activation, repeated)."""
    start = time.perf_counter()
    d = Design("chain")
    x = d.input(16, 32, 32)
    for i in range(blocks - 2):
        kind = KINDS[i % 3]
        x = d.add(kind, x, out_channels=16, kernel=3, padding=1) if kind == "Conv2d" else d.add(kind, x)
    d.add("Output", x)
    return time.perf_counter() - start


def main() -> None:
    print("Design.add, blocks in a chain (best of 3):")
    per_block = {}
    for n in (2_000, 20_000):
        best = min(build(n) for _ in range(3 if n <= 2_000 else 1))
        per_block[n] = best / n * 1e6
        print(f"  {n:>6,} blocks: {best:7.3f} s  ({per_block[n]:.1f} µs per block)")
    print(f"  per-block time at 20,000 ÷ at 2,000: {per_block[20_000] / per_block[2_000]:.2f} "
          "(1 is linear; a quadratic add gives about 10)")


if __name__ == "__main__":
    main()
