"""`layerloom check` and `layerloom ledger` on a 500-block file, timed as whole processes (start-up
and imports counted), beside a bare Python start and a process that gets the same numbers from
PyTorch (import torch, build the network on the meta device, run it under FlopCounterMode).

Target (PRODUCT.md): check / ledger of a 500-block file ≤ 0.3 s as a process. Wall time on a shared
machine includes waiting for a core, so the CPU time of each process is printed too. To see what
a command imports: python -X importtime -m layerloom check FILE 2>&1 | sort -t'|' -k2 -n | tail

Run: PYTHONPATH=src:benchmarks python benchmarks/cli_speed.py [--runs N]
"""
from __future__ import annotations

import argparse
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from core_speed import machine_speed
from synthetic import residual_stack

from layerloom.core import fileformat

TORCH_CHILD = r"""
import sys
sys.path[:0] = sys.argv[2:]
from core_speed import torch_pass
from layerloom.core.fileformat import load
torch_pass(load(sys.argv[1]))
"""


def timed(cmd: list[str], runs: int) -> tuple[float, float, float]:
    """Median wall, best wall and median CPU seconds (user + system) of ``runs`` runs of ``cmd``."""
    walls, cpus = [], []
    for _ in range(runs):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t = time.perf_counter()
        subprocess.run(cmd, stdout=subprocess.DEVNULL, check=False, env=os.environ)
        walls.append(time.perf_counter() - t)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        cpus.append(after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime)
    return statistics.median(walls), min(walls), statistics.median(cpus)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=7)
    runs = parser.parse_args().runs
    print(f"this machine: an empty million-step Python loop takes {machine_speed():.0f} ms "
          "(a recent laptop: about 15 ms)")
    here = Path(__file__).resolve().parent
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "synthetic-500.loom"
        fileformat.save(residual_stack(500), path)
        py = [sys.executable]
        rows = [("python start (floor)", py + ["-c", "pass"]),
                ("layerloom check", py + ["-m", "layerloom", "check", str(path)]),
                ("layerloom ledger", py + ["-m", "layerloom", "ledger", str(path)]),
                ("layerloom ledger --json", py + ["-m", "layerloom", "ledger", "--json", str(path)]),
                ("torch meta + FlopCounterMode", py + ["-c", TORCH_CHILD, str(path), str(here)] + sys.path[:1])]
        figures = {}
        for label, cmd in rows:
            figures[label] = timed(cmd, runs if "torch" not in label else max(2, runs // 3))
        torch_wall = figures["torch meta + FlopCounterMode"][0]
        print(f"processes on a 500-block file (median of {runs}; target for check and ledger ≤ 0.3 s wall):")
        for label, (median, best, cpu) in figures.items():
            ratio = f"   torch / this {torch_wall / median:4.1f}×" if "layerloom" in label else ""
            print(f"  {label:<30} wall median {median:.3f} s, best {best:.3f} s, CPU {cpu:.3f} s{ratio}")


if __name__ == "__main__":
    main()
