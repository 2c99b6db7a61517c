"""Open a design file and analyse it: read, parse, schema check, build, full shape + cost pass and
the ledger totals, against PyTorch building the same network on the meta device and running it
under FlopCounterMode (the way to get the same numbers from torch itself).

Target (PRODUCT.md): open + full pass ≥ 100× faster than torch's pass, reading and validating the
file counted. Each open is timed as in a fresh process: the design of the run before (a design and
its analysis refer to each other, so the cycle collector frees them) is collected before the clock starts. Prints each phase, so a slow one shows. Figures of one run on a shared machine are
noisy: compare the ratio, and the yardstick printed first.

Run: PYTHONPATH=src:benchmarks python benchmarks/open_speed.py
"""
from __future__ import annotations

import gc
import tempfile
import time
from pathlib import Path

from core_speed import machine_speed, torch_pass
from synthetic import residual_stack

from layerloom.core import fileformat
from layerloom.core.ledger import Ledger

REPEAT = 40  # opens timed per size (each a few ms): the machine is shared, so a short series may hold no quiet moment


def measure(path: Path) -> tuple[float, dict[str, float]]:
    """Milliseconds of ``load`` + a full pass + ledger totals, as a user's open does, and of each
    phase of the same work (each the best of ``REPEAT``; the two alternate, so a slow moment of the
    machine falls on both)."""
    whole, best = 1e9, {}
    for _ in range(REPEAT):
        gc.collect()  # as in a fresh process: no design of the run before left to collect
        t = time.perf_counter()
        Ledger(fileformat.load(path).analysis()).totals
        whole = min(whole, (time.perf_counter() - t) * 1000)
        gc.collect()
        t0 = time.perf_counter()
        data = fileformat.decode(path.read_bytes().decode("utf-8"))
        t1 = time.perf_counter()
        fileformat.validate(data)
        t2 = time.perf_counter()
        design = fileformat._build(data)
        t3 = time.perf_counter()
        Ledger(design.analysis()).totals
        t4 = time.perf_counter()
        for name, ms in (("read + JSON", t1 - t0), ("schema", t2 - t1), ("build", t3 - t2), ("pass + ledger", t4 - t3)):
            best[name] = min(best.get(name, 1e9), ms * 1000)
    return whole, best


def main() -> None:
    print(f"this machine: an empty million-step Python loop takes {machine_speed():.0f} ms "
          "(a recent laptop: about 15 ms)")
    with tempfile.TemporaryDirectory() as folder:
        measured = []
        for n in (500, 2000):  # ours first: the editor and the command line never hold torch's objects
            design = residual_stack(n)
            path = Path(folder) / f"synthetic-{n}.loom"
            fileformat.save(design, path)
            fileformat.load(path)  # warm: the schema is compiled once per process
            measured.append((design, path, *measure(path)))
        for design, path, ours, split in measured:
            theirs = torch_pass(design)
            print(f"  {len(design.blocks):5d} blocks ({path.stat().st_size // 1024} KiB): open + pass + ledger "
                  f"{ours:6.2f} ms   torch {theirs:8.1f} ms   ratio {theirs / ours:5.0f}× (target ≥ 100×)")
            print("        " + "   ".join(f"{k} {v:.2f}" for k, v in split.items()) + " (ms, each best of "
                  f"{REPEAT})")

if __name__ == "__main__":
    main()
