"""The ledger: what each block and the whole design cost, in depth order.

How things are counted (the single place these conventions are written down; README.md repeats
them for users):

- **weights**: learned parameters, as PyTorch's ``sum(p.numel() for p in model.parameters())``:
  convolution and linear weights, biases, batch-norm scale and shift. Batch-norm running mean,
  running variance and batch counter are **buffers**, reported apart.
- **MACs**: multiply-accumulates of convolutions (including depthwise, pointwise and transposed)
  and linear layers, for the whole batch (batch size × per-sample count). PyTorch's
  ``FlopCounterMode`` reports 2 FLOPs per MAC for the same operations. Bias additions, norms,
  activations, pooling, resizing and joins are not MACs; they are counted roughly as **other
  operations** (one per element per step; an addition one per output element per extra input, a
  product one per output element; a concatenation only copies and counts none).
- **output memory**: bytes of the tensor a block allocates (batch × elements × bytes of the
  design's element type); views (Flatten, Identity, Dropout, Output) allocate none.
- **peak live memory**: the largest total of activations alive at once during a forward pass
  run in depth order (see :mod:`layerloom.core.liveness`); weights are not included.
- **receptive field** and **jump** (effective stride): in input pixels, see
  :mod:`layerloom.core.inference`.
- **intensity** (arithmetic intensity): MACs per byte moved, where bytes moved are the block's
  weights plus its input and output activations at the element type (first order: no caches,
  no fusion).
- **estimated latency** (with a target, see :mod:`layerloom.core.targets`): per block
  max(MACs / peak MAC rate, bytes moved / bandwidth) + the target's per-layer overhead, for blocks
  that compute (not Input, Output or views); a first-order roofline estimate.
- **motif uses** are counted as the blocks they execute (ports left out, nested uses opened,
  repeats counted): their weights, MACs, other operations, bytes moved, output memory (what their
  blocks allocate) and latency (each inner block estimated on its own) are the sums over those
  blocks, so every figure is the same whether blocks are grouped into a motif or not.
- **training memory** at batch B (see :mod:`layerloom.core.training_memory`): weights +
  gradients (one copy) + optimizer state (SGD: none; SGD with momentum: one copy; Adam: two copies;
  common practice) + activations kept for the backward pass. First order: each block keeps what its
  backward needs, as PyTorch's autograd does (a convolution, Linear, batch norm, pooling, most
  activations and a Multiply keep their inputs; ReLU, Sigmoid, Tanh and Softmax their output;
  max pooling also an int64 index per output; global average pooling, Add, Concat, Upsample and
  views nothing), each tensor counted once however many blocks keep it; per-channel batch-norm
  statistics and optimizer step counters are not counted. All at the design's element type; with
  mixed precision, activations at fp16 and weights, gradients and optimizer state at fp32 (master
  weights) plus an fp16 working copy of the weights.
- **depth order**: topological order by longest-path level from the inputs, ties broken by a
  rank that depends only on the wiring (:mod:`layerloom.core.wiring`); **depth** is that level. **steps** count blocks as executed (a motif
  use counts the blocks it executes): the Depth ledger's x axis.

Counts and bytes are exact at any size: numpy arrays of them are int64 when every sum fits, else
Python integers (``dtype=object``); only latency (seconds), intensity and steps drawn as floats are
floats, which saturate to infinity rather than fail.
"""
from __future__ import annotations

from itertools import chain
from math import prod
from typing import NamedTuple

import numpy as np

from layerloom.core.design import DTYPES
from layerloom.core.kinds import KINDS
from layerloom.core.shapes import Shape
from layerloom.core.targets import Target
from layerloom.core.units import ratio


class Row(NamedTuple):
    """One block's line in the ledger (memory in bytes, operations for the whole batch, time in s)."""

    block: str
    name: str
    kind: str
    depth: int
    shape: Shape | None
    weights: int
    buffers: int
    macs: int
    other: int
    memory: int
    rf: tuple[float, float] | None
    jump: tuple[float, float] | None
    moved: int  # bytes: weights + input and output activations
    intensity: float  # MACs per byte moved
    latency: float | None  # seconds on the target, None without one
    bound: str  # "compute", "memory" or "" (no target, or a block that does no work)


class Totals(NamedTuple):
    weights: int
    buffers: int
    macs: int
    other: int
    peak_memory: int  # bytes
    peak_block: str | None  # where the peak is reached
    weight_bytes: int
    latency: float | None  # seconds on the target, None without one


def exact_array(values: list, scale: int = 1, headroom: int = 1) -> np.ndarray:
    """``values`` × ``scale`` as int64 when any sum of them, times ``headroom``, fits in it; else as
    Python integers."""
    try:
        a = np.array(values, dtype=np.int64)
    except OverflowError:
        a = None
    if a is not None and (not a.size or int(np.abs(a).max()) * scale * headroom * len(a) < 1 << 62):
        return a * scale
    return np.array(values, dtype=object) * scale


def per_second(values: np.ndarray, rate: float) -> np.ndarray:
    """``values / rate`` as floats (infinity where beyond a float's range)."""
    if values.dtype != object:
        return values / rate
    return np.array([ratio(v, rate) for v in values], dtype=float)


def floats(values) -> np.ndarray:
    """Exact counts as floats for drawing: infinity where one is beyond a float's range."""
    return np.array([ratio(v, 1.0) for v in values], dtype=float)


class Ledger:
    """Costs of a design as it is now; see the module docstring for what is counted.

    ``target`` overrides the design's own target for latency estimates.
    """

    def __init__(self, analysis, target: Target | None = None):
        analysis.refresh()
        self.analysis = analysis
        design = analysis.design
        self.batch, self.dtype = design.batch, design.dtype
        self.bytes_per_element = DTYPES[design.dtype]
        self.target = target if target is not None else design.target
        self.order = list(analysis.order)
        self._rows: list[Row] | None = None
        results = analysis.top.results
        self._results = [results.get(b) for b in self.order]
        free = (0, 0, 0, 0)
        costs = exact_array(list(chain.from_iterable(r.cost if r is not None else free for r in self._results)),
                            headroom=self.batch).reshape(-1, 4)
        costs[:, 2:] *= self.batch
        self.costs = costs
        self.live = exact_array(analysis.live_profile(), self.batch * self.bytes_per_element)
        peak_at = int(self.live.argmax()) if len(self.live) else None
        t = costs.sum(axis=0)
        self.latency = self._latency() if self.target is not None else None
        self.totals = Totals(int(t[0]), int(t[1]), int(t[2]), int(t[3]),
                             int(self.live[peak_at]) if peak_at is not None else 0,
                             self.order[peak_at] if peak_at is not None else None,
                             int(t[0]) * self.bytes_per_element,
                             float(self.latency.sum()) if self.latency is not None else None)

    def _latency(self) -> np.ndarray:
        """Estimated seconds per block on the target (zeros for blocks that do no work; a motif use
        the sum over the blocks it executes)."""
        t = self.target
        compute = per_second(self.costs[:, 2], t.macs_per_second)
        memory = per_second(self.moved, t.bytes_per_second)
        latency = np.where(self.working, np.maximum(compute, memory) + t.overhead, 0.0)
        for i, r in enumerate(self._results):
            if r is not None and r.executed is not None:
                latency[i] = self._roofline(r.executed)[0]
        return latency

    def _roofline(self, executed) -> tuple[float, float]:
        """Seconds the blocks a motif use executes take: (estimate, its compute-bound part)."""
        t, n, size = self.target, self.batch, self.bytes_per_element
        total = compute_part = 0.0
        for (w, m, e), count in executed.work:
            compute, memory = ratio(m * n, t.macs_per_second), ratio((w + e * n) * size, t.bytes_per_second)
            total += count * (max(compute, memory) + t.overhead)
            compute_part += count * compute
        return total, compute_part

    @property
    def working(self) -> np.ndarray:
        """Per step: whether the block computes something (not Input, Output, a view or a block
        without a result)."""
        return np.array([r is not None and self._works(b) for b, r in zip(self.order, self._results)], dtype=bool)

    def _works(self, block_id: str) -> bool:
        kind = self.analysis.design.blocks[block_id].kind
        return kind not in ("Input", "Output") and not KINDS[kind].view

    # ----- along depth (arrays in depth order)
    @property
    def moved(self) -> np.ndarray:
        """Bytes each block moves: weights plus input and output activations."""
        n = self.batch
        elems = [(r.executed.elements if r.executed is not None else sum(map(prod, r.ins)) + sum(map(prod, r.outs))) * n
                 if r is not None else 0 for r in self._results]
        return exact_array([w + e for w, e in zip(self.costs[:, 0].tolist(), elems)], self.bytes_per_element)

    @property
    def out_memory(self) -> np.ndarray:
        """Bytes of the tensors each block allocates (0 for views and blocks without a shape)."""
        return exact_array([self._allocated(b, r) for b, r in zip(self.order, self._results)],
                           self.batch * self.bytes_per_element)

    def _allocated(self, block_id: str, r) -> int:
        if r is None or not self._allocates(block_id):
            return 0
        return r.executed.allocated if r.executed is not None else sum(map(prod, r.outs))

    @property
    def steps(self) -> np.ndarray:
        """Blocks executed up to and including each block (a motif use counts the blocks it executes)."""
        return np.cumsum(exact_array([r.executed.steps if r is not None and r.executed is not None else 1
                                      for r in self._results]))

    def _allocates(self, block_id: str) -> bool:
        return not KINDS[self.analysis.design.blocks[block_id].kind].view

    @property
    def cumulative_weights(self) -> np.ndarray:
        return np.cumsum(self.costs[:, 0])

    @property
    def cumulative_macs(self) -> np.ndarray:
        return np.cumsum(self.costs[:, 2])

    @property
    def cumulative_latency(self) -> np.ndarray | None:
        return np.cumsum(self.latency) if self.latency is not None else None

    @property
    def running_peak(self) -> np.ndarray:
        """Largest live activation memory (bytes) reached up to each step."""
        return np.maximum.accumulate(self.live) if len(self.live) else self.live

    # ----- rows
    @property
    def rows(self) -> list[Row]:
        if self._rows is None:
            moved = self.moved
            self._rows = [self._row(i, bid, int(moved[i])) for i, bid in enumerate(self.order)]
        return self._rows

    def _row(self, i: int, bid: str, moved: int) -> Row:
        a = self.analysis
        blk = a.design.blocks[bid]
        r = self._results[i]
        if r is None:
            return Row(bid, blk.name, blk.kind, a.level.get(bid, 0), None, 0, 0, 0, 0, 0, None, None, 0, 0.0,
                       0.0 if self.latency is not None else None, "")
        w, b, m, o = (int(v) for v in self.costs[i])
        out_bytes = self._allocated(bid, r) * self.batch * self.bytes_per_element
        latency, bound = None, ""
        if self.latency is not None:
            latency = float(self.latency[i])
            if latency:
                if r.executed is not None:  # compute-bound when most of its blocks' time is
                    bound = "compute" if 2 * self._roofline(r.executed)[1] >= latency else "memory"
                else:
                    compute = ratio(m, self.target.macs_per_second)
                    bound = "compute" if compute >= ratio(moved, self.target.bytes_per_second) else "memory"
        return Row(bid, blk.name, blk.kind, a.level.get(bid, 0), r.outs[0] if r.outs else None, w, b, m, o,
                   out_bytes, r.rf, r.jump, moved, ratio(m, moved) if moved else 0.0, latency, bound)
