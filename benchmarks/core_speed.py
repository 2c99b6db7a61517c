"""Shape + cost pass speed (prints figures; targets from PRODUCT.md, not asserted).

For designs of about 500, 2,000 and 5,000 blocks: a full pass (every shape, finding and cost, plus
the ledger totals) on a freshly loaded design; then one edit re-inferred at 5,000 blocks. Beside
it, the same network built on PyTorch's meta device and run under FlopCounterMode, with the ratio.
All of ours is timed before torch is imported, as in the editor and the command line.
Targets: ≥ 100× faster than torch's pass; 5,000 blocks ≤ 20 ms; one edit ≤ 2 ms.

Run: PYTHONPATH=src:benchmarks python benchmarks/core_speed.py
"""
from __future__ import annotations

import gc
import statistics
import time

from synthetic import residual_stack

from layerloom.core.fileformat import dumps, parse
from layerloom.core.kinds import KINDS
from layerloom.core.ledger import Ledger

REPEAT = 15  # passes timed per size: the machine is shared, so one slow moment spoils a short series


def best_of(fn, repeat: int = 7) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times) * 1000


def layerloom_pass(text: str) -> float:
    """Milliseconds of a full pass on a design loaded from ``text`` (loading not counted)."""
    def one():
        d = parse(text)
        gc.collect()  # the design of the run before is garbage: freeing it is no part of this pass
        t = time.perf_counter()
        Ledger(d.analysis())
        return (time.perf_counter() - t) * 1000
    return min(one() for _ in range(REPEAT))


def torch_pass(design) -> float:
    """Milliseconds to build ``design`` on the meta device and run it under FlopCounterMode."""
    import torch
    from torch import nn
    from torch.utils.flop_counter import FlopCounterMode

    analysis = design.analysis()
    order = analysis.order

    def run():
        with torch.device("meta"):
            layers = {}
            for bid in order:
                b, r = design.blocks[bid], analysis.result(bid)
                if b.kind not in ("Input", "Output"):
                    src = KINDS[b.kind].torch_layer(b.settings, r.ins, r.outs[0])
                    if src is not None:
                        layers[bid] = eval(src, {"nn": nn})
            with FlopCounterMode(display=False) as counter:
                values = {}
                for bid in order:
                    b = design.blocks[bid]
                    args = [values[w.src] for w in sorted(design.in_wires[bid], key=lambda w: w.dst_port)]
                    if b.kind == "Input":
                        s = b.settings
                        values[bid] = torch.zeros(1, s["channels"], s["height"], s["width"])
                    elif b.kind == "Output":
                        values[bid] = args[0]
                    elif bid in layers:
                        values[bid] = layers[bid](args[0])
                    else:
                        values[bid] = sum(args[1:], args[0])
            return counter.get_total_flops()
    return best_of(run, 3)


def machine_speed() -> float:
    """Milliseconds for an empty loop of a million steps: a yardstick for comparing machines."""
    def loop():
        for _ in range(1_000_000):
            pass
    return best_of(loop, 3)


def main() -> None:
    print(f"this machine: an empty million-step Python loop takes {machine_speed():.0f} ms "
          "(a recent laptop: about 15 ms)")
    print(f"Layerloom shape + cost pass (best of {REPEAT}, ms) against torch meta device + FlopCounterMode (best of 3, ms)")
    designs = [residual_stack(n) for n in (500, 2000, 5000)]
    # ours first: the editor and the command line never hold torch, whose many objects would make
    # every full cycle collection during our pass slower
    ours_all = [layerloom_pass(dumps(design)) for design in designs]
    design = parse(dumps(residual_stack(5000)))
    Ledger(design.analysis())
    convs = [b.id for b in design.of_kind("Conv2d")]
    mid = convs[len(convs) // 2]
    samples = []
    for i in range(40):
        t = time.perf_counter()
        design.set(mid, out_channels=16 if i % 2 else 24)
        design.analysis().refresh()
        samples.append((time.perf_counter() - t) * 1000)
    lines = [(f"  one edit at {len(design.blocks)} blocks (3×3 width of a middle unit, shapes re-inferred "
             f"downstream): median {statistics.median(samples):.3f} ms, worst {max(samples):.3f} ms")]
    samples = []
    for i in range(40):
        t = time.perf_counter()
        design.set(mid, bias=bool(i % 2))
        Ledger(design.analysis())
        samples.append((time.perf_counter() - t) * 1000)
    lines.append(f"  same edit plus a fresh ledger (totals, cumulative arrays): median {statistics.median(samples):.2f} ms")
    for design, ours in zip(designs, ours_all):
        theirs = torch_pass(design)
        print(f"  {len(design.blocks):5d} blocks: layerloom {ours:7.2f} ms   torch {theirs:9.1f} ms   "
              f"ratio {theirs / ours:6.0f}×")
    print(*lines, sep="\n")


if __name__ == "__main__":
    main()
