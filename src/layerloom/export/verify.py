"""Checking exported source against the ledger with PyTorch as the reference.

The generated module is built and run once on zeros of the design's input shape (batch N from
the design) in eval mode. For every top-level block it compares

- the output shape (NCHW): read from the forward's local variables, each named after its block, at
  the end of the forward (a forward hook would miss joins, which are expressions, not modules);
- the weights: ``sum(p.numel())`` over the block's layer (or motif instance);
- the MACs: ``torch.utils.flop_counter.FlopCounterMode`` FLOPs of the block's layer / 2
  (joins, activations, norms and pooling count 0 in both);

and the totals over the whole module. torch is imported inside these functions only.
"""
from __future__ import annotations

import importlib.util
import itertools
import os
import sys
import types
from dataclasses import dataclass
from pathlib import Path

from layerloom.core.kinds import KINDS
from layerloom.core.ledger import Ledger
from layerloom.core.units import count

_serial = itertools.count(1)


@dataclass(frozen=True)
class BlockCheck:
    """One block (or the totals) as the ledger expects it and as torch measured it.

    Shapes include the batch dimension; MACs are for the whole batch.
    """

    name: str
    kind: str
    ledger_shapes: tuple[tuple[int, ...], ...]
    torch_shapes: tuple[tuple[int, ...], ...]
    ledger_weights: int
    torch_weights: int
    ledger_macs: int
    torch_macs: int

    @property
    def agree(self) -> bool:
        return (self.ledger_shapes == self.torch_shapes and self.ledger_weights == self.torch_weights
                and self.ledger_macs == self.torch_macs)


@dataclass(frozen=True)
class VerifyReport:
    """Per-block checks in depth order and the check of the totals; ``ok`` when all agree."""

    rows: tuple[BlockCheck, ...]
    total: BlockCheck

    @property
    def ok(self) -> bool:
        return self.total.agree and all(r.agree for r in self.rows)

    @property
    def disagreements(self) -> list[BlockCheck]:
        return [r for r in (*self.rows, self.total) if not r.agree]

    def table(self) -> str:
        """The checks as a text table, one line per block, the totals last."""
        head = ("block", "kind", "shape: ledger", "shape: torch", "weights: ledger", "weights: torch",
                "MACs: ledger", "MACs: torch", "agree")
        body = [(r.name, r.kind, _shapes(r.ledger_shapes), _shapes(r.torch_shapes), f"{r.ledger_weights:,}",
                 f"{r.torch_weights:,}", f"{r.ledger_macs:,}", f"{r.torch_macs:,}", "yes" if r.agree else "NO")
                for r in (*self.rows, self.total)]
        widths = [max(len(row[c]) for row in (head, *body)) for c in range(len(head))]
        right = {4, 5, 6, 7}
        out = ["  ".join(c.rjust(w) if i in right else c.ljust(w) for i, (c, w) in enumerate(zip(row, widths))).rstrip()
               for row in (head, *body)]
        out.insert(1, "  ".join("-" * w for w in widths))
        out.insert(len(out) - 1, out[1])
        bad = len(self.disagreements)
        out.append(f"{'all agree' if not bad else f'{bad} disagree'}: {count(self.total.torch_weights)} weights, "
                   f"{count(self.total.torch_macs)} MACs measured by torch")
        return "\n".join(out)


def _shapes(shapes) -> str:
    return " ".join("(" + ", ".join(map(str, s)) + ")" for s in shapes) or "-"


def load_module(source: str | os.PathLike) -> types.ModuleType:
    """Import exported code: a ``str`` is the source itself, a path is a file to import.

    The module is registered in ``sys.modules`` under a fresh name, so that tools reading class
    source (``torch.jit.script``) find it.
    """
    name = f"layerloom_exported_{next(_serial)}"
    if isinstance(source, str):
        module = types.ModuleType(name)
        exec(compile(source, f"<{name}>", "exec"), module.__dict__)
    else:
        spec = importlib.util.spec_from_file_location(name, Path(source))
        module = importlib.util.module_from_spec(spec)
        sys.modules[name] = module
        spec.loader.exec_module(module)
    return module


class VerifyRefused(ValueError):
    """The design holds placeholders (unmapped operations) that cannot run, so there is nothing to verify."""


def placeholders(design) -> list[str]:
    """Names of the blocks (in the design and its motifs) whose export is a placeholder to fill in."""
    return [b.name for g in (design, *design.motifs.values()) for b in g.blocks.values()
            if not KINDS[b.kind].verifiable]


def refuse_placeholders(design) -> None:
    """Raise :class:`VerifyRefused` naming the placeholders, if the design has any."""
    names = placeholders(design)
    if names:
        listed = ", ".join(names[:5]) + (f" and {len(names) - 5} more" if len(names) > 5 else "")
        raise VerifyRefused(f"cannot verify: {len(names)} block{'s are' if len(names) != 1 else ' is'} an unmapped "
                            f"operation ({listed}) exported as a placeholder; fill it in or replace it with blocks, "
                            "or export without --verify")


def verify(design, source: str | os.PathLike) -> VerifyReport:
    """Build the exported module, run it once and compare every block with the ledger.

    ``source`` is the exported text, or the path of the written file. Needs torch. Raises
    :class:`VerifyRefused` for a design with unmapped operations (their export cannot run).
    """
    refuse_placeholders(design)
    import torch
    from torch.utils.flop_counter import FlopCounterMode

    from layerloom.export.pytorch_source import export

    module = load_module(source)
    if not getattr(module, "__all__", None):
        raise ValueError(f"{source if not isinstance(source, str) else 'the source'} is not a Layerloom export: "
                         "it has no __all__ naming the design's class")
    class_name = module.__all__[0]
    plan = export(design, class_name)
    model = getattr(module, class_name)().eval()
    analysis = design.analysis()
    batch = design.batch
    inputs = [torch.zeros(batch, *analysis.shape(b.id)) for b in design.of_kind("Input")]
    with torch.no_grad(), FlopCounterMode(display=False) as counter:
        variables = _forward_locals(model, inputs)
    flops = counter.get_flop_counts()
    ledger = Ledger(analysis)
    rows = []
    for row in ledger.rows:
        blk = design.blocks[row.block]
        attr = plan.modules.get(row.block)
        layer = getattr(model, attr) if attr else None
        tensors = [_value(variables, v, k) for v, k in plan.outputs[row.block]]
        rows.append(BlockCheck(
            blk.name, blk.kind, tuple((batch, *s) for s in analysis.result(row.block).outs),
            tuple(tuple(x.shape) if x is not None else () for x in tensors),
            row.weights, sum(p.numel() for p in layer.parameters()) if layer is not None else 0,
            row.macs, sum(flops.get(f"{class_name}.{attr}", {}).values()) // 2 if attr else 0))
    t = ledger.totals
    total = BlockCheck("total", "", (), (), t.weights, sum(p.numel() for p in model.parameters()),
                       t.macs, counter.get_total_flops() // 2)
    return VerifyReport(tuple(rows), total)


def _value(variables: dict, name: str, index: int | None):
    """The forward's variable ``name`` (item ``index`` of it, for a motif with several outputs), or None."""
    x = variables.get(name)
    return x if index is None or x is None else x[index]


def _forward_locals(model, inputs) -> dict:
    """Run ``model`` once on ``inputs``; return the local variables of its ``forward`` at its end."""
    code = type(model).forward.__code__
    seen: dict = {}

    def watch(frame, event, arg):
        if event == "return" and frame.f_code is code:
            seen.update(frame.f_locals)

    previous = sys.getprofile()
    sys.setprofile(watch)
    try:
        model(*inputs)
    finally:
        sys.setprofile(previous)
    return seen
