"""The computer a measurement runs on: CPU model, thread count, torch version, runtime."""
from __future__ import annotations

import datetime
import platform

from layerloom.core.measurement import Machine


def cpu_model() -> str:
    """The CPU's model name (from /proc/cpuinfo on Linux, else the platform's processor string)."""
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as f:
            for line in f:
                if line.startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or platform.machine() or "unknown CPU"


def this_machine(threads: int, runtime: str) -> Machine:
    """The machine description for a run with ``threads`` threads on ``runtime`` (torch imported here)."""
    import torch

    if runtime == "onnxruntime":
        import onnxruntime

        runtime = f"onnxruntime {onnxruntime.__version__}"
    return Machine(cpu_model(), threads, torch.__version__, runtime)


def utc_now() -> str:
    return datetime.datetime.now(datetime.timezone.utc).replace(microsecond=0).isoformat()
