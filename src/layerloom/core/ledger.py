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
  operations** (one per element per step).
- **output memory**: bytes of the tensor a block allocates (batch × elements × bytes of the
  design's element type); views (Flatten, Identity, Dropout, Output) allocate none.
- **peak live memory**: the largest total of activations alive at once during a forward pass
  run in depth order (see :mod:`layerloom.core.liveness`); weights are not included.
- **receptive field** and **jump** (effective stride): in input pixels, see
  :mod:`layerloom.core.inference`.
- **intensity** (arithmetic intensity): MACs per byte moved, where bytes moved are the block's
  weights plus its input and output activations at the element type (first order: no caches,
  no fusion).
- **depth order**: topological order by longest-path level from the inputs, ties broken by the
  order blocks were added; **depth** is that level.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from layerloom.core.design import DTYPES
from layerloom.core.shapes import Shape


class Row(NamedTuple):
    """One block's line in the ledger (memory in bytes, operations for the whole batch)."""

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
    intensity: float


class Totals(NamedTuple):
    weights: int
    buffers: int
    macs: int
    other: int
    peak_memory: int  # bytes
    peak_block: str | None  # where the peak is reached
    weight_bytes: int


class Ledger:
    """Costs of a design as it is now; see the module docstring for what is counted."""

    def __init__(self, analysis):
        analysis.refresh()
        self.analysis = analysis
        design = analysis.design
        self.batch, self.dtype = design.batch, design.dtype
        self.bytes_per_element = DTYPES[design.dtype]
        self.order = list(analysis.order)
        self._rows: list[Row] | None = None
        results = analysis.top.results
        free = (0, 0, 0, 0)
        costs = np.array([r.cost if r is not None else free for r in map(results.get, self.order)],
                         dtype=np.int64).reshape(-1, 4)
        costs[:, 2:] *= self.batch
        self.costs = costs
        self.live = np.asarray(analysis.live_profile(), dtype=np.int64) * (self.batch * self.bytes_per_element)
        peak_at = int(self.live.argmax()) if len(self.live) else None
        t = costs.sum(axis=0)
        self.totals = Totals(int(t[0]), int(t[1]), int(t[2]), int(t[3]),
                             int(self.live[peak_at]) if peak_at is not None else 0,
                             self.order[peak_at] if peak_at is not None else None,
                             int(t[0]) * self.bytes_per_element)

    # ----- along depth (arrays in depth order)
    @property
    def cumulative_weights(self) -> np.ndarray:
        return np.cumsum(self.costs[:, 0])

    @property
    def cumulative_macs(self) -> np.ndarray:
        return np.cumsum(self.costs[:, 2])

    @property
    def running_peak(self) -> np.ndarray:
        """Largest live activation memory (bytes) reached up to each step."""
        return np.maximum.accumulate(self.live) if len(self.live) else self.live

    # ----- rows
    @property
    def rows(self) -> list[Row]:
        if self._rows is None:
            self._rows = [self._row(bid) for bid in self.order]
        return self._rows

    def _row(self, bid: str) -> Row:
        from layerloom.core.kinds import KINDS

        a = self.analysis
        blk = a.design.blocks[bid]
        r = a.top.results.get(bid)
        if r is None:
            return Row(bid, blk.name, blk.kind, a.level.get(bid, 0), None, 0, 0, 0, 0, 0, None, None, 0.0)
        n, bpe = self.batch, self.bytes_per_element
        out_elems = 0 if KINDS[blk.kind].view else sum(o.elements for o in r.outs)
        in_elems = sum(x.elements for x in r.ins)
        w, b, m, o = r.cost
        moved = (w + n * (in_elems + sum(x.elements for x in r.outs))) * bpe
        return Row(bid, blk.name, blk.kind, a.level.get(bid, 0), r.outs[0] if r.outs else None, w, b, m * n, o * n,
                   out_elems * n * bpe, r.rf, r.jump, (m * n / moved) if moved else 0.0)
