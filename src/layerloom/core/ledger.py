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
  rank that depends only on the wiring (:mod:`layerloom.core.wiring`); **depth** is that level.
  **steps** count blocks as executed (a motif use counts the blocks it executes): the Depth
  ledger's x axis.

Counts and bytes are Python integers, exact at any size; only latency (seconds), intensity and
values drawn are floats, which saturate to infinity rather than fail. Rows and totals need no numpy
(the command line's ``ledger`` starts faster without it); the arrays along depth for drawing are
numpy's, imported when first asked for: int64 when every sum fits, else Python integers
(``dtype=object``).
"""
from __future__ import annotations

from functools import cached_property
from math import fsum, prod
from typing import TYPE_CHECKING, NamedTuple

from layerloom.core.design import DTYPES
from layerloom.core.kinds import KINDS
from layerloom.core.kinds.base import FREE
from layerloom.core.shapes import Shape
from layerloom.core.targets import Target
from layerloom.core.units import ratio

if TYPE_CHECKING:
    import numpy as np


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
    import numpy as np

    try:
        a = np.array(values, dtype=np.int64)
    except OverflowError:
        a = None
    if a is not None and (not a.size or int(np.abs(a).max()) * scale * headroom * len(a) < 1 << 62):
        return a * scale
    return np.array(values, dtype=object) * scale


def floats(values) -> np.ndarray:
    """Exact counts as floats for drawing: infinity where one is beyond a float's range."""
    import numpy as np

    return np.array([ratio(v, 1.0) for v in values], dtype=float)


class Ledger:
    """Costs of a design as it is now; see the module docstring for what is counted.

    ``target`` overrides the design's own target for latency estimates. Per step of :attr:`order`,
    as lists: ``counts`` holds (weights, buffers, MACs, other operations), the last two for the whole
    batch; ``live`` the live activation bytes; ``latency`` the estimated seconds (None without a target).
    """

    def __init__(self, analysis, target: Target | None = None):
        analysis.refresh()
        self.analysis = analysis
        design = analysis.design
        self.batch, self.dtype = design.batch, design.dtype
        self.bytes_per_element = DTYPES[design.dtype]
        n = self.batch
        self.target = target if target is not None else design.target
        self.order = list(analysis.order)
        self._rows: list[Row] | None = None
        results = analysis.top.results
        self._results = [results.get(b) for b in self.order]
        self._costs = [r.cost if r is not None else FREE for r in self._results]  # per sample
        scale = n * self.bytes_per_element
        self.live: list[int] = [v * scale for v in analysis.live_profile()]
        peak_at = self.live.index(max(self.live)) if self.live else None
        weights, buffers, macs, other = (sum(column) for column in zip(*self._costs)) if self._costs else FREE
        macs, other = macs * n, other * n
        self.latency: list[float] | None = self._latency() if self.target is not None else None
        self.totals = Totals(weights, buffers, macs, other, self.live[peak_at] if peak_at is not None else 0,
                             self.order[peak_at] if peak_at is not None else None, weights * self.bytes_per_element,
                             fsum(self.latency) if self.latency is not None else None)

    @cached_property
    def counts(self) -> list[tuple[int, int, int, int]]:
        """Per step: (weights, buffers, MACs, other operations), the last two for the whole batch."""
        n = self.batch
        return [(w, b, m * n, o * n) for w, b, m, o in self._costs]

    def _latency(self) -> list[float]:
        """Estimated seconds per block on the target (0 for blocks that do no work; a motif use the
        sum over the blocks it executes)."""
        t = self.target
        out = []
        for bid, r, cost, moved in zip(self.order, self._results, self.counts, self.moved):
            if r is not None and r.executed is not None:
                out.append(self._roofline(r.executed)[0])
            elif r is not None and self._works(bid):
                out.append(max(ratio(cost[2], t.macs_per_second), ratio(moved, t.bytes_per_second)) + t.overhead)
            else:
                out.append(0.0)
        return out

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
        import numpy as np

        return np.array([r is not None and self._works(b) for b, r in zip(self.order, self._results)], dtype=bool)

    def _works(self, block_id: str) -> bool:
        kind = self.analysis.design.blocks[block_id].kind
        return kind not in ("Input", "Output") and not KINDS[kind].view

    @cached_property
    def moved(self) -> list[int]:
        """Bytes each block moves: weights plus input and output activations."""
        n, size = self.batch, self.bytes_per_element
        return [(cost[0] + (r.executed.elements if r.executed is not None
                            else sum(map(prod, r.ins)) + sum(map(prod, r.outs))) * n) * size if r is not None else 0
                for r, cost in zip(self._results, self.counts)]

    # ----- along depth (numpy arrays in depth order, for drawing)
    @cached_property
    def costs(self) -> np.ndarray:
        """:attr:`counts` as an array (one row per block)."""
        return exact_array([v for cost in self.counts for v in cost]).reshape(-1, 4)

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
        return exact_array([r.executed.steps if r is not None and r.executed is not None else 1
                            for r in self._results]).cumsum()

    def _allocates(self, block_id: str) -> bool:
        return not KINDS[self.analysis.design.blocks[block_id].kind].view

    @property
    def cumulative_weights(self) -> np.ndarray:
        return self.costs[:, 0].cumsum()

    @property
    def cumulative_macs(self) -> np.ndarray:
        return self.costs[:, 2].cumsum()

    @property
    def cumulative_latency(self) -> np.ndarray | None:
        return floats(self.latency).cumsum() if self.latency is not None else None

    @property
    def running_peak(self) -> np.ndarray:
        """Largest live activation memory (bytes) reached up to each step."""
        import numpy as np

        live = exact_array(self.live)
        return np.maximum.accumulate(live) if len(live) else live

    # ----- rows
    @property
    def rows(self) -> list[Row]:
        if self._rows is None:
            self._rows = [self._row(i, bid, moved) for i, (bid, moved) in enumerate(zip(self.order, self.moved))]
        return self._rows

    def _row(self, i: int, bid: str, moved: int) -> Row:
        a = self.analysis
        blk = a.design.blocks[bid]
        r = self._results[i]
        if r is None:
            return Row(bid, blk.name, blk.kind, a.level.get(bid, 0), None, 0, 0, 0, 0, 0, None, None, 0, 0.0,
                       0.0 if self.latency is not None else None, "")
        w, b, m, o = self.counts[i]
        out_bytes = self._allocated(bid, r) * self.batch * self.bytes_per_element
        latency, bound = None, ""
        if self.latency is not None:
            latency = self.latency[i]
            if latency:
                if r.executed is not None:  # compute-bound when most of its blocks' time is
                    bound = "compute" if 2 * self._roofline(r.executed)[1] >= latency else "memory"
                else:
                    compute = ratio(m, self.target.macs_per_second)
                    bound = "compute" if compute >= ratio(moved, self.target.bytes_per_second) else "memory"
        return Row(bid, blk.name, blk.kind, a.level.get(bid, 0), r.outs[0] if r.outs else None, w, b, m, o,
                   out_bytes, r.rf, r.jump, moved, ratio(m, moved) if moved else 0.0, latency, bound)
