"""PyTorch source for a design: one ``nn.Module`` class for the design, one per motif use.

The file imports only torch. ``__init__`` declares each layer as an attribute named after its
block; ``forward`` computes the blocks in depth order (the ledger's order), one line per block,
with a variable named after the block and a comment giving its output shape in NCHW. Joins are
plain expressions (``a + b``, ``a * b``, ``torch.cat([a, b], dim=1)``); Input blocks are the
arguments of ``forward`` and Output blocks what it returns (a tuple when there are several).

A motif becomes one class for each combination of input shapes and parameter values it is used
with: PyTorch layers take fixed sizes, so a class taking its sizes from its wires would need shape
arithmetic in its constructor, while a class per combination keeps every constructor a plain list
of layers with the numbers the ledger shows. A repeat × N is an ``nn.Sequential`` of N instances.

>>> from layerloom import Design
>>> d = Design("tiny"); x = d.input(3, 8, 8, name="image")
>>> _ = d.add("Output", d.add("Conv2d", x, out_channels=4, name="stem"))
>>> print(module_source(d, date="2024-01-01").split("def forward")[1].splitlines()[1])
        stem = self.stem(image)  # (N, 4, 8, 8)
"""
from __future__ import annotations

import datetime
import textwrap
from dataclasses import dataclass

from layerloom.core.findings import ERROR
from layerloom.core.inference import GraphInference
from layerloom.core.kinds import KINDS
from layerloom.core.ledger import Ledger
from layerloom.export.names import check_class_name, class_identifier, identifier, plain_text

COMMENT_COLUMN = 72  # forward comments line up at most this far right
MOTIF_NOTE = ("Each motif is one class per combination of input shapes and parameter values it is used with, "
              "so every constructor lists its layers with fixed sizes (the numbers in the ledger); "
              "a repeat x N is an nn.Sequential of N instances.")


class ExportRefused(ValueError):
    """A design with error findings: nothing is exported. ``findings`` holds the errors."""

    def __init__(self, findings):
        self.findings = tuple(findings)
        listed = "\n".join(f"  {f.code}: {f.message}" for f in self.findings)
        super().__init__(f"the design has {len(self.findings)} error finding"
                         f"{'s' if len(self.findings) != 1 else ''}, so it is not exported:\n{listed}")


@dataclass(frozen=True)
class Export:
    """Generated source and how its design class names each top-level block.

    ``outputs[block]``: per output port, the forward variable holding it and the tuple index
    (``None`` for a plain tensor); for an Output block, what it receives. ``modules[block]``:
    the attribute of the design class that computes the block (layers and motif instances).
    """

    source: str
    class_name: str
    outputs: dict[str, tuple[tuple[str, int | None], ...]]
    modules: dict[str, str]
    unscriptable: tuple[str, ...]  # kinds used that torch.jit.script refuses


def module_source(design, class_name: str | None = None, date: datetime.date | str | None = None) -> str:
    """The text of a Python file defining the design as an ``nn.Module``; see :func:`export`."""
    return export(design, class_name, date).source


def export(design, class_name: str | None = None, date: datetime.date | str | None = None) -> Export:
    """Generate the PyTorch source of ``design``.

    ``class_name`` names the design's class (default: from the design's name); ``date`` is
    written in the header (default: today). Raises :class:`ExportRefused` when the design has
    error findings, ValueError for a class name that is not a plain identifier.
    """
    errors = [f for f in design.findings() if f.severity == ERROR]
    if errors:
        raise ExportRefused(errors)
    analysis = design.analysis().refresh()
    writer = _Writer(analysis, check_class_name(class_name) if class_name else None)
    top = writer.write_all()
    used = {b.kind for g in (design, *writer.used_motifs()) for b in g.blocks.values()}
    unscriptable = tuple(sorted(k for k in used if not KINDS[k].scriptable))
    header = _header(design, analysis, top, unscriptable, date, bool(writer.signatures))
    preamble = f'{header}\n\nimport torch\nfrom torch import nn\n\n__all__ = ["{writer.class_name}"]\n'
    return Export("\n\n".join([preamble, *writer.classes]), writer.class_name, top.outputs, top.modules, unscriptable)


def _header(design, analysis, top: "_Written", unscriptable, date, motifs: bool) -> str:
    totals = Ledger(analysis).totals
    batch = design.batch
    inputs = ", ".join(f"{top.args[i]} {_nchw(analysis.shape(b.id))}" for i, b in enumerate(design.of_kind("Input")))
    when = date.isoformat() if isinstance(date, datetime.date) else plain_text(date or datetime.date.today().isoformat())
    script = ("torch.jit.script accepts it (every kind used allows it)." if not unscriptable else
              f"torch.jit.script refuses it because of these kinds: {', '.join(unscriptable)}.")
    lines = [f"{plain_text(design.name)}: a PyTorch module exported from a Layerloom design.", "",
             f"Input (NCHW): {inputs or 'none'}.",
             f"Totals: {totals.weights:,} weights (learned parameters) and {totals.macs // batch:,} MACs per sample",
             "(multiply-accumulates of convolutions and linear layers).",
             script, f"Exported on {when}."]
    if motifs:
        lines += ["", *textwrap.wrap(MOTIF_NOTE, 96)]
    return '"""' + "\n".join(lines) + '\n"""'


def _nchw(shape) -> str:
    return "(" + ", ".join(["N", *map(str, shape)]) + ")"


@dataclass
class _Written:
    """One generated class: its forward arguments and how it names its blocks."""

    args: list[str]
    outputs: dict[str, tuple[tuple[str, int | None], ...]]
    modules: dict[str, str]


class _Writer:
    """Writes the classes of one design: motif classes first (in order of first use), then the design."""

    def __init__(self, analysis, class_name: str | None):
        self.analysis = analysis
        self.class_names: set[str] = set()
        design = analysis.design
        self.class_name = class_name or class_identifier(design.name, "Network", set())
        self.class_names.add(self.class_name)
        self.signatures: dict[tuple, GraphInference] = {}  # (motif, input shapes, params) → its inference
        self.motif_class: dict[tuple, str] = {}
        self._collect(analysis.top)
        for key in self.signatures:
            self.motif_class[key] = class_identifier(key[0], "Motif", self.class_names)
        self.classes: list[str] = []

    def used_motifs(self):
        return [inner.graph for inner in self.signatures.values()]

    def _signature(self, inference, blk) -> tuple:
        s = _settings(inference, blk)
        motif = self.analysis.design.motifs[s["motif"]]
        params = {**motif.params, **{k: v for k, v in s.items() if k not in ("motif", "repeat")}}
        return (motif.name, inference.results[blk.id].ins, tuple(sorted(params.items())))

    def _collect(self, inference) -> None:
        """Find every motif signature used under ``inference``, inner ones first."""
        g = inference.graph
        for bid in inference.order:
            blk = g.blocks[bid]
            if blk.kind != "Motif":
                continue
            key = self._signature(inference, blk)
            if key in self.signatures:
                continue
            motif = self.analysis.design.motifs[key[0]]
            inner = GraphInference(motif, self.analysis, key[1], dict(key[2]), inference.stack + (motif.name,))
            inner.run()
            self._collect(inner)
            self.signatures[key] = inner

    def write_all(self) -> _Written:
        for key, inner in self.signatures.items():
            shapes = ", ".join(_nchw(x) for x in key[1])
            params = "".join(f", {plain_text(k, 40)}={v}" for k, v in key[2])
            self._write(self.motif_class[key], f"Motif '{plain_text(key[0])}' for input {shapes}{params}.", inner)
        design = self.analysis.design
        return self._write(self.class_name, f"The design '{plain_text(design.name)}' ({len(design.blocks)} blocks).",
                           self.analysis.top)

    def _write(self, name: str, doc: str, inference) -> _Written:
        g = inference.graph
        taken = set(self.class_names)
        ident = {b.id: identifier(b.name, KINDS[b.kind].stem, taken) for b in g.blocks.values() if b.kind != "Output"}
        args = [ident[b.id] for b in g.of_kind("Input")]
        outputs: dict[str, tuple] = {b: ((ident[b], None),) for b in g.blocks if g.blocks[b].kind == "Input"}
        modules: dict[str, str] = {}
        init, steps = [], []
        for bid in inference.order:
            blk = g.blocks[bid]
            if blk.kind == "Input":
                continue
            sources = [outputs[w.src][w.src_port] for w in sorted(g.in_wires[bid], key=lambda w: w.dst_port)]
            if blk.kind == "Output":
                outputs[bid] = tuple(sources)
                continue
            r = inference.results[bid]
            s = _settings(inference, blk)
            values = [v if k is None else f"{v}[{k}]" for v, k in sources]
            layer = self._layer(inference, blk, s, r)
            var = ident[bid]
            if layer is None:
                code = KINDS[blk.kind].torch_expr(s, values)
            else:
                init.append(f"self.{var} = {layer}")
                modules[bid] = var
                code = f"self.{var}({', '.join(values)})"
            steps.append((f"{var} = {code}", ", ".join(_nchw(o) for o in r.outs)))
            outputs[bid] = ((var, None),) if len(r.outs) == 1 else tuple((var, k) for k in range(len(r.outs)))
        returned = [v if k is None else f"{v}[{k}]" for b in g.of_kind("Output") for v, k in outputs[b.id]]
        width = min(max((len(c) for c, _ in steps), default=0), COMMENT_COLUMN)
        lines = [f"class {name}(nn.Module):", f'    """{doc}"""', "", "    def __init__(self):",
                 "        super().__init__()", *(f"        {line}" for line in init), "",
                 f"    def forward(self{''.join(', ' + a for a in args)}):",
                 *(f"        {code:<{width}}  # {shape}" for code, shape in steps)]
        if returned:
            lines.append(f"        return {', '.join(returned)}")
        self.classes.append("\n".join(lines) + "\n")
        return _Written(args, outputs, modules)

    def _layer(self, inference, blk, s, r) -> str | None:
        if blk.kind != "Motif":
            return KINDS[blk.kind].torch_layer(s, r.ins, r.outs[0])
        cls = self.motif_class[self._signature(inference, blk)]
        repeat = s["repeat"]
        return f"{cls}()" if repeat == 1 else f"nn.Sequential(*[{cls}() for _ in range({repeat})])"


def _settings(inference, blk) -> dict:
    """The block's settings with motif parameters filled in (inside a motif)."""
    return inference.resolved_settings(blk) if inference.params is not None else blk.settings
