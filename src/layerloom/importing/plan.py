"""From the operations a reader found to the blocks of a design (before motifs and layout).

A reader (PyTorch or ONNX) describes its network as :class:`SourceOp` records in execution order,
each reading and producing named values (tensors) whose per-sample shapes it knows (``None`` for
a tensor a design cannot hold, such as the 5-d tensor inside a channel shuffle). :func:`plan`
turns them into :class:`PlannedBlock` records:

- an operation with a chain of kinds becomes those blocks, in series;
- unmapped operations are gathered into groups: one that produces a tensor a design cannot hold
  joins every operation reading it, and a chain of unmapped operations (each reading only the one
  before) is one group. Each value a group hands on becomes one ``Unmapped`` block reading the
  group's inputs; the group's weights, buffers and MACs go to its first such block, so totals stay
  exact.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from layerloom.core.kinds.base import PORTS
from layerloom.core.kinds.unmapped import shape_text
from layerloom.core.shapes import Shape


class ImportFailed(Exception):
    """A source that cannot be imported; the message is one line naming the place and the reason."""


def one_line(e: BaseException) -> str:
    """The first line of an exception's message (at most 200 characters), to quote in ImportFailed."""
    text = str(e).strip().splitlines()
    return text[0][:200] if text else type(e).__name__


@dataclass
class SourceOp:
    """One operation of the source network.

    ``chain``: the blocks it maps to (``None``: unmapped). ``scope``: enclosing module paths,
    outermost first, each with its class name (``None`` when unknown, as in ONNX). For unmapped
    operations: ``label`` names it, ``params`` maps each parameter (or initializer) it reads to
    ``(elements, is_buffer)``, ``macs`` per sample.
    """

    name: str
    label: str
    ins: list[str]
    outs: list[str]
    chain: list | None
    scope: tuple = ()
    params: dict = field(default_factory=dict)
    macs: int = 0
    origin: str = ""  # the source's own name of the operation (a traced node, an ONNX node)


@dataclass
class PlannedBlock:
    """One block to add: ``inputs`` are (index of a planned block, output port)."""

    name: str
    kind: str
    settings: dict
    inputs: list[tuple[int, int]]
    scope: tuple
    origin: str  # the source operation(s) it stands for
    shape: Shape | None = None


def plan(ops: list[SourceOp], shapes: dict[str, Shape | None], inputs: list[tuple[str, str]],
         outputs: list[str]) -> list[PlannedBlock]:
    """Blocks for ``ops``: ``inputs`` are (value, block name) of the network's inputs, ``outputs``
    the values it returns; ``shapes`` holds every value's per-sample shape."""
    for value in outputs:
        if shapes.get(value) is None:
            raise ImportFailed(f"the network returns a tensor ({value}) that is neither N×C×H×W nor N×F with batch 1")
    readers: dict[str, list[int]] = {}
    for i, op in enumerate(ops):
        for v in dict.fromkeys(op.ins):
            readers.setdefault(v, []).append(i)
    group = _groups(ops, shapes, readers)
    blocks: list[PlannedBlock] = []
    source: dict[str, tuple[int, int]] = {}
    for value, name in inputs:
        c, h, w = shapes[value]
        blocks.append(PlannedBlock(name, "Input", {"channels": c, "height": h, "width": w}, [], (), value, shapes[value]))
        source[value] = (len(blocks) - 1, 0)
    members: dict[int, list[int]] = {}
    for i, root in group.items():
        members.setdefault(root, []).append(i)
    returned = set(outputs)
    for i, op in enumerate(ops):
        if i not in group:
            at = [source[v] for v in op.ins]
            for k, (kind, settings) in enumerate(op.chain):
                name = op.name if k == 0 else f"{op.name}_{kind.lower()}"
                blocks.append(PlannedBlock(name, kind, settings, at, op.scope, op.origin or op.name))
                at = [(len(blocks) - 1, 0)]
            if op.outs:
                source[op.outs[0]] = at[0]
                blocks[-1].shape = shapes[op.outs[0]]
        elif group[i] == i:
            _add_group(blocks, source, [ops[k] for k in sorted(members[i])], shapes, readers, ops, returned)
    for k, value in enumerate(outputs):
        blocks.append(PlannedBlock("output" if len(outputs) == 1 else f"output_{k + 1}", "Output", {},
                                   [source[value]], (), value))
    return blocks


def _groups(ops, shapes, readers) -> dict[int, int]:
    """Unmapped operation index → index of its group's first operation."""
    parent = {i: i for i, op in enumerate(ops) if op.chain is None}

    def root(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    def join(a, b):
        parent.setdefault(b, b)
        ra, rb = root(a), root(b)
        if ra != rb:
            parent[max(ra, rb)] = min(ra, rb)

    for i, op in enumerate(ops):
        if i not in parent:
            continue
        for v in op.outs:
            later = readers.get(v, [])
            if shapes.get(v) is None:
                for r in later:
                    join(i, r)
            elif len(later) == 1 and later[0] in parent and set(ops[later[0]].ins) == {v}:
                join(i, later[0])
    return {i: root(i) for i in parent}


def _add_group(blocks, source, members, shapes, readers, ops, returned) -> None:
    produced = {v for op in members for v in op.outs}
    ins = list(dict.fromkeys(v for op in members for v in op.ins if v not in produced))
    member_ids = {id(op) for op in members}
    exits = [v for op in members for v in op.outs
             if v in returned or any(id(ops[r]) not in member_ids for r in readers.get(v, []))]
    labels = [op.label for op in members]
    label = " → ".join(lab for k, lab in enumerate(labels) if k == 0 or lab != labels[k - 1])
    if len(ins) > PORTS:
        raise ImportFailed(f"{members[0].name} ({label}) reads {len(ins)} tensors; a block has at most {PORTS} inputs")
    params: dict = {}
    for op in members:
        params.update(op.params)
    weights = sum(n for n, is_buffer in params.values() if not is_buffer)
    buffers = sum(n for n, is_buffer in params.values() if is_buffer)
    macs = sum(op.macs for op in members)
    at = [source[v] for v in ins]
    names = {v: op.name for op in members for v in op.outs}
    for k, value in enumerate(exits):
        settings = {"operation": label + (f" [{k + 1} of {len(exits)}]" if len(exits) > 1 else ""),
                    "inputs": len(ins), "in_shapes": "; ".join(shape_text(shapes[v]) for v in ins),
                    "out_shape": shape_text(shapes[value]),
                    "weights": weights if k == 0 else 0, "buffers": buffers if k == 0 else 0,
                    "macs": macs if k == 0 else 0}
        name = members[0].name if k == 0 else names[value]
        blocks.append(PlannedBlock(name, "Unmapped", settings, at, _common(op.scope for op in members),
                                   ", ".join(op.origin or op.name for op in members), shapes[value]))
        source[value] = (len(blocks) - 1, 0)


def _common(scopes) -> tuple:
    scopes = list(scopes)
    out = scopes[0]
    for s in scopes[1:]:
        n = 0
        while n < min(len(out), len(s)) and out[n] == s[n]:
            n += 1
        out = out[:n]
    return out
