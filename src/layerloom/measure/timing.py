"""Timing the exported network on this computer: the whole forward and each block alone.

The design is exported (:mod:`layerloom.export`), built with torch's default random weights in
eval mode, and fed random inputs of batch B. After ``warmup`` untimed runs, the whole forward is
timed ``repeat`` times; its median and spread (interquartile range) are kept.

Each block is timed by **replay**: one forward pass is run with its local variables captured (the
exported forward names a variable after every block), then each block's layer, motif instance or
join expression is called alone on the very tensors it received, ``repeat`` times after one warm-up.
Replay was chosen over forward hooks, which see layers only (joins are expressions in the forward,
not modules), and over torch's profiler, whose operator events would have to be mapped back to
blocks and carry their own recording overhead. Replay times exactly the work the ledger counts for
each block; the whole forward, timed on its own, shows what running the blocks together changes
(caches, allocation), so the sum of the blocks is an approximation of the whole, not equal to it.

With ``runtime="onnxruntime"`` the model and each block are exported to ONNX (TorchScript exporter,
eval mode) and run by onnxruntime's CPU provider with the same thread count.
"""
from __future__ import annotations

import io
import time
import warnings
from typing import Callable

import numpy as np

from layerloom.core.kinds import KINDS
from layerloom.core.ledger import Ledger
from layerloom.core.measurement import Measurement
from layerloom.measure.machine import this_machine, utc_now

RUNTIMES = ("torch", "onnxruntime")


class Cancelled(Exception):
    """The caller asked the measurement to stop."""


def measure(design, batch: int | None = None, threads: int | None = None, runtime: str = "torch",
            repeat: int = 10, warmup: int = 2, progress: Callable[[int, int], None] | None = None,
            cancelled: Callable[[], bool] | None = None) -> Measurement:
    """Time ``design`` (well formed) on this computer; see the module docstring.

    ``batch`` defaults to the design's, ``threads`` to torch's current count. ``progress(done, total)``
    is called after every timed call; when ``cancelled()`` turns true, :class:`Cancelled` is raised.
    """
    import torch

    from layerloom.export import export, load_module
    from layerloom.export.verify import _forward_locals, _value

    if runtime not in RUNTIMES:
        raise ValueError(f"runtime {runtime!r} is not one of {', '.join(RUNTIMES)}")
    if repeat < 1 or warmup < 0:
        raise ValueError(f"repeat must be ≥ 1 and warm-up ≥ 0, not {repeat} and {warmup}")
    batch = batch or design.batch
    before = torch.get_num_threads()
    threads = threads or before
    made = export(design, "Measured")
    torch.manual_seed(0)
    model = getattr(load_module(made.source), made.class_name)().eval()
    analysis = design.analysis()
    inputs = [torch.randn(batch, *analysis.shape(b.id)) for b in design.of_kind("Input")]
    ledger = Ledger(analysis)
    timed = [b for b, w in zip(ledger.order, ledger.working) if w]
    steps = warmup + repeat + len(timed) * (1 + repeat)
    done = 0

    def tick() -> None:
        nonlocal done
        done += 1
        if progress is not None:
            progress(done, steps)
        if cancelled is not None and cancelled():
            raise Cancelled("measurement cancelled")

    torch.set_num_threads(threads)
    try:
        with torch.inference_mode():
            variables = _forward_locals(model, inputs)
            runner = _OnnxRunner(threads) if runtime == "onnxruntime" else _TorchRunner()
            whole = runner.prepare(model, inputs)
            total, spread = _time(whole, warmup, repeat, tick)
            blocks = {}
            for bid in timed:
                blk = design.blocks[bid]
                args = [_value(variables, *made.outputs[w.src][w.src_port])
                        for w in sorted(design.in_wires[bid], key=lambda w: w.dst_port)]
                attr = made.modules.get(bid)
                layer = getattr(model, attr) if attr else _expression(KINDS[blk.kind].torch_expr(blk.settings,
                                                                         [f"a{k}" for k in range(len(args))]), len(args))
                blocks[bid] = _time(runner.prepare(layer, args), 1, repeat, tick)
    finally:
        torch.set_num_threads(before)
    return Measurement(this_machine(threads, runtime), utc_now(), batch, repeat, total, spread, blocks)


def _time(call: Callable[[], object], warmup: int, repeat: int, tick) -> tuple[float, float]:
    """Median and interquartile range (seconds) of ``repeat`` timed calls after ``warmup`` untimed ones."""
    for _ in range(warmup):
        call()
        tick()
    runs = []
    for _ in range(repeat):
        start = time.perf_counter()
        call()
        runs.append(time.perf_counter() - start)
        tick()
    q1, median, q3 = np.percentile(runs, [25, 50, 75])
    return float(median), float(q3 - q1)


def _expression(code: str, n: int):
    """A module computing a join's forward expression of arguments ``a0 … a{n-1}``."""
    import torch

    fn = eval(f"lambda {', '.join(f'a{k}' for k in range(n))}: {code}", {"torch": torch})  # our own export's text

    class Join(torch.nn.Module):
        def forward(self, *args):
            return fn(*args)

    return Join()


class _TorchRunner:
    @staticmethod
    def prepare(module, args) -> Callable[[], object]:
        return lambda: module(*args)


class _OnnxRunner:
    def __init__(self, threads: int):
        import onnxruntime

        self.options = onnxruntime.SessionOptions()
        self.options.intra_op_num_threads = threads
        self.options.inter_op_num_threads = 1

    def prepare(self, module, args) -> Callable[[], object]:
        import onnxruntime
        import torch

        buffer = io.BytesIO()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # the TorchScript exporter announces its deprecation
            torch.onnx.export(module, tuple(args), buffer, dynamo=False)
        session = onnxruntime.InferenceSession(buffer.getvalue(), self.options, providers=["CPUExecutionProvider"])
        feed = {i.name: a.numpy() for i, a in zip(session.get_inputs(), args)}
        return lambda: session.run(None, feed)
