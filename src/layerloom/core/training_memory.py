"""Memory of one training step at batch B: weights, gradients, optimizer state and the activations
kept for the backward pass (the convention is written in :mod:`layerloom.core.ledger`).

Activations kept: each block keeps what its kind's :meth:`~layerloom.core.kinds.base.Kind.backward_keeps`
names (its inputs, its output, max pooling's int64 indices, dropout's mask), as PyTorch's autograd
does; a tensor kept by several blocks (a ReLU's output that the next convolution keeps as its input,
a Flatten's view) counts once, at the step that produces it. Inside a motif the same is worked out
once per use and multiplied by its repeat count.

>>> from layerloom import Design
>>> d = Design("t", batch=2); x = d.input(3, 8, 8)
>>> y = d.add("ReLU", d.add("Conv2d", x, out_channels=4, kernel=3, padding=1))
>>> _ = d.add("Output", y)
>>> m = training_memory(d.ledger(), "adam")
>>> m.activations == 2 * (3 * 64 + 4 * 64) * 4, m.optimizer_state == 2 * m.weights
(True, True)
"""
from __future__ import annotations

from math import prod
from typing import TYPE_CHECKING, NamedTuple

if TYPE_CHECKING:
    import numpy as np

from layerloom.core import units
from layerloom.core.inference import GraphInference
from layerloom.core.kinds import KINDS
from layerloom.core.values import quote

OPTIMIZERS = {"sgd": 0, "sgd_momentum": 1, "adam": 2}
"""Optimizer → copies of the weights it keeps as state (common practice: SGD with momentum keeps one
velocity per weight, Adam the first and second moments; step counters are not counted)."""

INDEX_BYTES = 8  # max pooling keeps an int64 index per output element
MASTER_BYTES, HALF_BYTES = 4, 2  # mixed precision: fp32 master weights, fp16 activations


class TrainingMemory(NamedTuple):
    """Bytes of one training step; ``weight_copy`` is the fp16 working copy under mixed precision."""

    batch: int
    optimizer: str
    mixed: bool
    weights: int
    gradients: int
    optimizer_state: int
    weight_copy: int
    activations: int

    @property
    def total(self) -> int:
        return self.weights + self.gradients + self.optimizer_state + self.weight_copy + self.activations


def training_text(m: TrainingMemory) -> str:
    """One line: the parts and the total, e.g. for the ledger's summary."""
    copy = f" + fp16 copy {units.size(m.weight_copy)}" if m.mixed else ""
    return (f"training at batch {m.batch} ({m.optimizer.replace('_', ' ')}{', mixed precision' if m.mixed else ''}): "
            f"weights {units.size(m.weights)} + gradients {units.size(m.gradients)} + optimizer state "
            f"{units.size(m.optimizer_state)}{copy} + activations kept for backward {units.size(m.activations)} "
            f"= {units.size(m.total)}")


class _Kept(NamedTuple):
    """Activations one graph keeps, per sample: per step, elements at the activation type and bytes of
    indices; which input ports it keeps; per output port the input port it hands on unchanged (or
    None) and whether its tensor is already counted."""

    elements: list[int]
    fixed: list[int]
    ports: list[bool]
    outs: list[tuple[int | None, bool]]


def kept_for_backward(analysis) -> tuple[list[int], list[int]]:
    """Per step of the depth order: elements (per sample, at the activation type) and index bytes
    (per sample) kept for the backward pass, each at the step that produces the tensor."""
    kept = _Walk(analysis.refresh().top, analysis, {}).result()
    return kept.elements, kept.fixed


class _Walk:
    """One graph walked in its depth order. A tensor is keyed by the step that produces it and its
    port, or ``("port", p)`` for a motif's input port p (a tensor of the caller's)."""

    def __init__(self, inference: GraphInference, analysis, cache: dict):
        self.inference, self.analysis, self.cache = inference, analysis, cache
        g = inference.graph
        self.inside = inference.params is not None
        n = len(inference.order)
        self.elements, self.fixed = [0] * n, [0] * n
        self.ports = [False] * len(g.of_kind("Input")) if self.inside else []
        self.owner: dict[tuple[str, int], tuple] = {}  # (block, output port) → tensor key
        self.size: dict[tuple, int] = {}
        self.counted: set = set()

    def keep(self, key) -> None:
        """The tensor ``key`` is kept for backward (counted once, at the step that made it)."""
        if key is None or key in self.counted:
            return
        if key[0] == "port":
            self.ports[key[1]] = True
        else:
            self.counted.add(key)
            self.elements[key[0]] += self.size[key]

    def made(self, i: int, bid: str, port: int, shape) -> None:
        self.owner[(bid, port)] = (i, port)
        self.size[(i, port)] = prod(shape)

    def result(self) -> _Kept:
        inf = self.inference
        g = inf.graph
        port_of = {b.id: p for p, b in enumerate(g.of_kind("Input"))}
        for i, bid in enumerate(inf.order):
            blk, r = g.blocks[bid], inf.results.get(bid)
            if r is None:
                continue
            ins = [self.owner.get((w.src, w.src_port)) for w in sorted(g.in_wires[bid], key=lambda w: w.dst_port)]
            s = inf.resolved_settings(blk) if self.inside else blk.settings
            if blk.kind == "Input" and self.inside:
                self.owner[(bid, 0)] = ("port", port_of[bid])
            elif blk.kind == "Motif":
                self.motif(i, bid, s, r, ins)
            else:
                self.block(i, bid, KINDS[blk.kind], s, r, ins)
        outs = []
        for b in g.of_kind("Output"):
            key = self.owner.get((b.id, 0))
            outs.append((key[1], False) if key is not None and key[0] == "port" else (None, key in self.counted))
        return _Kept(self.elements, self.fixed, self.ports, outs)

    def block(self, i, bid, kind, s, r, ins) -> None:
        keeps = kind.backward_keeps(s)
        if kind.view and "mask" not in keeps:  # hands on its input (dropout makes a new tensor when training)
            self.owner[(bid, 0)] = ins[0] if ins else None
            return
        for p, shape in enumerate(r.outs):
            self.made(i, bid, p, shape)
        if "inputs" in keeps:
            for key in ins:
                self.keep(key)
        if "output" in keeps:
            self.keep((i, 0))
        if "mask" in keeps:
            self.elements[i] += prod(r.outs[0])
        if "indices" in keeps:
            self.fixed[i] += INDEX_BYTES * prod(r.outs[0])

    def motif(self, i, bid, s, r, ins) -> None:
        """One motif use (× repeat): its inside walked once per input shapes and parameters."""
        motif = self.analysis.design.motifs[s["motif"]]
        params = {**motif.params, **{k: v for k, v in s.items() if k not in ("motif", "repeat")}}
        key = (motif.name, r.ins, tuple(sorted(params.items())))
        inner = self.cache.get(key)
        if inner is None:
            run = GraphInference(motif, self.analysis, r.ins, params, self.inference.stack + (motif.name,))
            run.run()
            inner = self.cache[key] = _Walk(run, self.analysis, self.cache).result()
        repeat = s["repeat"]
        self.elements[i] += repeat * sum(inner.elements)
        self.fixed[i] += repeat * sum(inner.fixed)
        for p, kept in enumerate(inner.ports):
            if kept:
                self.keep(ins[p])
        for j, (through, already) in enumerate(inner.outs):
            if through is not None:
                self.owner[(bid, j)] = ins[through]
                continue
            self.made(i, bid, j, r.outs[j])
            if already:
                self.counted.add((i, j))
        if repeat > 1 and inner.ports and inner.ports[0] and inner.outs and not inner.outs[0][1]:
            self.elements[i] += (repeat - 1) * prod(r.ins[0])  # each later copy keeps the previous copy's output


def training_memory(ledger, optimizer: str = "sgd_momentum", mixed: bool = False) -> TrainingMemory:
    """Training memory of the ledger's design at its batch size and element type (or mixed precision)."""
    weight_bytes = _weight_bytes(ledger, optimizer, mixed)
    w = ledger.totals.weights
    return TrainingMemory(ledger.batch, optimizer, mixed, w * weight_bytes, w * weight_bytes,
                          w * weight_bytes * OPTIMIZERS[optimizer], w * HALF_BYTES if mixed else 0,
                          sum(_activation_bytes(ledger, mixed)))


def training_curve(ledger, optimizer: str = "sgd_momentum", mixed: bool = False) -> np.ndarray:
    """Cumulative training memory (bytes) along the depth order: weights with their gradients,
    optimizer state and fp16 copy, plus the activations kept for backward, up to each step."""
    import numpy as np  # here: the command line imports this module for its optimizer names

    weight_bytes = _weight_bytes(ledger, optimizer, mixed)
    per_weight = weight_bytes * (2 + OPTIMIZERS[optimizer]) + (HALF_BYTES if mixed else 0)
    kept = np.array(_activation_bytes(ledger, mixed), dtype=object)
    return np.cumsum(ledger.costs[:, 0].astype(object) * per_weight + kept)


def _weight_bytes(ledger, optimizer: str, mixed: bool) -> int:
    if optimizer not in OPTIMIZERS:
        raise ValueError(f"optimizer {quote(optimizer)} is not one of {', '.join(OPTIMIZERS)}")
    return MASTER_BYTES if mixed else ledger.bytes_per_element


def _activation_bytes(ledger, mixed: bool) -> list[int]:
    """Bytes kept for backward per step, for the whole batch (Python integers: exact at any size)."""
    elements, index_bytes = kept_for_backward(ledger.analysis)
    size = HALF_BYTES if mixed else ledger.bytes_per_element
    return [(e * size + i) * ledger.batch for e, i in zip(elements, index_bytes)]
