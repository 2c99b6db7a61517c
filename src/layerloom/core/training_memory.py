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
from typing import NamedTuple

import numpy as np

from layerloom.core import units
from layerloom.core.inference import GraphInference
from layerloom.core.kinds import KINDS

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


def kept_for_backward(analysis) -> tuple[np.ndarray, np.ndarray]:
    """Per step of the depth order: elements (per sample, at the activation type) and index bytes
    (per sample) kept for the backward pass, each at the step that produces the tensor."""
    top = analysis.refresh().top
    kept = _walk(top, analysis, {})
    return np.asarray(kept.elements, dtype=np.int64), np.asarray(kept.fixed, dtype=np.int64)


def _walk(inference: GraphInference, analysis, cache: dict) -> _Kept:
    g, results, order = inference.graph, inference.results, inference.order
    inside = inference.params is not None
    n = len(order)
    elements, fixed = [0] * n, [0] * n
    ports = [False] * len(g.of_kind("Input")) if inside else []
    owner: dict[tuple[str, int], tuple] = {}  # (block, port) → ("port", p) or (step, port)
    size: dict[tuple, int] = {}
    counted: set = set()
    port_of = {b.id: p for p, b in enumerate(g.of_kind("Input"))}

    def keep(key) -> None:
        if key is None or key in counted:
            return
        if key[0] == "port":
            ports[key[1]] = True
        else:
            counted.add(key)
            elements[key[0]] += size[key]

    for i, bid in enumerate(order):
        blk, r = g.blocks[bid], results.get(bid)
        if r is None:
            continue
        ins = [owner.get((w.src, w.src_port)) for w in sorted(g.in_wires[bid], key=lambda w: w.dst_port)]
        kind = KINDS[blk.kind]
        s = inference.resolved_settings(blk) if inside else blk.settings
        if blk.kind == "Input" and inside:
            owner[(bid, 0)] = ("port", port_of[bid])
            continue
        if blk.kind == "Motif":
            _motif(i, bid, s, r, ins, analysis, inference, cache, owner, size, counted, keep, elements, fixed)
            continue
        keeps = kind.backward_keeps(s)
        if kind.view and "mask" not in keeps:
            owner[(bid, 0)] = ins[0] if ins else None
            continue
        for p, shape in enumerate(r.outs):
            owner[(bid, p)] = (i, p)
            size[(i, p)] = prod(shape)
        if "inputs" in keeps:
            for key in ins:
                keep(key)
        if "output" in keeps:
            keep((i, 0))
        if "mask" in keeps:
            elements[i] += prod(r.outs[0])
        if "indices" in keeps:
            fixed[i] += INDEX_BYTES * prod(r.outs[0])
    outs = []
    for b in g.of_kind("Output"):
        key = owner.get((b.id, 0))
        outs.append((key[1], False) if key is not None and key[0] == "port" else (None, key in counted))
    return _Kept(elements, fixed, ports, outs)


def _motif(i, bid, s, r, ins, analysis, inference, cache, owner, size, counted, keep, elements, fixed) -> None:
    """One motif use (× repeat) at step ``i`` of the outer graph."""
    motif = analysis.design.motifs[s["motif"]]
    params = {**motif.params, **{k: v for k, v in s.items() if k not in ("motif", "repeat")}}
    key = (motif.name, r.ins, tuple(sorted(params.items())))
    inner = cache.get(key)
    if inner is None:
        run = GraphInference(motif, analysis, r.ins, params, inference.stack + (motif.name,))
        run.run()
        inner = cache[key] = _walk(run, analysis, cache)
    repeat = s["repeat"]
    elements[i] += repeat * sum(inner.elements)
    fixed[i] += repeat * sum(inner.fixed)
    for p, kept in enumerate(inner.ports):
        if kept:
            keep(ins[p])
    for j, (through, already) in enumerate(inner.outs):
        if through is not None:
            owner[(bid, j)] = ins[through]
            continue
        owner[(bid, j)] = (i, j)
        size[(i, j)] = prod(r.outs[j])
        if already:
            counted.add((i, j))
    if repeat > 1 and inner.ports and inner.ports[0] and inner.outs and not inner.outs[0][1]:
        elements[i] += (repeat - 1) * prod(r.ins[0])  # each later copy keeps the previous copy's output


def training_memory(ledger, optimizer: str = "sgd_momentum", mixed: bool = False) -> TrainingMemory:
    """Training memory of the ledger's design at its batch size and element type (or mixed precision)."""
    weight_bytes = _weight_bytes(ledger, optimizer, mixed)
    w = ledger.totals.weights
    return TrainingMemory(ledger.batch, optimizer, mixed, w * weight_bytes, w * weight_bytes,
                          w * weight_bytes * OPTIMIZERS[optimizer], w * HALF_BYTES if mixed else 0,
                          int(_activation_bytes(ledger, mixed).sum()))


def training_curve(ledger, optimizer: str = "sgd_momentum", mixed: bool = False) -> np.ndarray:
    """Cumulative training memory (bytes) along the depth order: weights with their gradients,
    optimizer state and fp16 copy, plus the activations kept for backward, up to each step."""
    weight_bytes = _weight_bytes(ledger, optimizer, mixed)
    per_weight = weight_bytes * (2 + OPTIMIZERS[optimizer]) + (HALF_BYTES if mixed else 0)
    return np.cumsum(ledger.costs[:, 0] * per_weight + _activation_bytes(ledger, mixed))


def _weight_bytes(ledger, optimizer: str, mixed: bool) -> int:
    if optimizer not in OPTIMIZERS:
        raise ValueError(f"optimizer {optimizer!r} is not one of {', '.join(OPTIMIZERS)}")
    return MASTER_BYTES if mixed else ledger.bytes_per_element


def _activation_bytes(ledger, mixed: bool) -> np.ndarray:
    """Bytes kept for backward per step, for the whole batch."""
    elements, index_bytes = kept_for_backward(ledger.analysis)
    return (elements * (HALF_BYTES if mixed else ledger.bytes_per_element) + index_bytes) * ledger.batch
