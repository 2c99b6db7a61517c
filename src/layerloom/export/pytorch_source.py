"""PyTorch source for a design: one ``nn.Module`` class for the design and one for each motif.

The file imports only torch. ``__init__`` declares each layer as an attribute named after its
block; ``forward`` computes the blocks in depth order (the ledger's order), one line per block,
with a variable named after the block and a comment giving its output shape in NCHW. Joins are
plain expressions (``a + b``, ``a * b``, ``torch.cat([a, b], dim=1)``); Input blocks are the
arguments of ``forward`` and Output blocks what it returns (a tuple when there are several).

A motif is one class, instanced per use: its constructor takes the channel counts of its input
ports (``in_channels``, or ``in_channels_1``, ``in_channels_2``, … for several) and its parameters
as keyword arguments with the motif's defaults, and builds its layers from expressions of them
(:mod:`layerloom.export.channels`). A use is ``Bottleneck(in_channels=256, width=64, out=256)``;
a repeat × N is ``nn.Sequential(*[Bottleneck(...) for _ in range(N)])`` (the repeat rule keeps
every copy's input channels equal to the first's). A motif with a layer that needs more than
channel counts (a Linear after a Flatten of a feature map needs C*H*W) is written instead as one
class for each combination of input shapes and parameter values it is used with, with fixed
sizes; the file's docstring and a comment above those classes say so and why.

>>> from layerloom import Design
>>> d = Design("tiny"); x = d.input(3, 8, 8, name="image")
>>> _ = d.add("Output", d.add("Conv2d", x, out_channels=4, name="stem"))
>>> print(module_source(d, date="2024-01-01").split("def forward")[1].splitlines()[1])
        stem = self.stem(image)  # (N, 4, 8, 8)
"""
from __future__ import annotations

import datetime
import textwrap
from dataclasses import dataclass, field

from layerloom.core.findings import ERROR
from layerloom.core.inference import GraphInference
from layerloom.core.kinds import KINDS
from layerloom.core.ledger import Ledger
from layerloom.export.channels import Count, NeedsShapes, out_channels, substitute
from layerloom.export.names import check_class_name, class_identifier, identifier, plain_text

COMMENT_COLUMN = 72  # forward comments line up at most this far right
WRAP = 96  # width of the module docstring's paragraphs
MOTIF_NOTE = ("Each motif is one class: its constructor takes the channel counts of its input ports and the "
              "motif's parameters (with the motif's defaults), each use passes its own values, and a repeat x N "
              "is an nn.Sequential of N instances.")
PER_SHAPE_NOTE = ("Motifs written as one class per combination of input shapes and parameter values (fixed "
                  "sizes, no constructor arguments), because a layer needs more than channel counts:")


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
    header = _header(design, analysis, top, unscriptable, date, writer)
    preamble = f'{header}\n\nimport torch\nfrom torch import nn\n\n__all__ = ["{writer.class_name}"]\n'
    helpers = list(dict.fromkeys(KINDS[k].torch_helper for k in sorted(used) if KINDS[k].torch_helper))
    return Export("\n\n".join([preamble, *helpers, *writer.classes]), writer.class_name, top.outputs, top.modules,
                  unscriptable)


def _header(design, analysis, top: "_Written", unscriptable, date, writer: "_Writer") -> str:
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
    placeholders = sorted({b.name for g in (design, *writer.used_motifs()) for b in g.blocks.values()
                           if not KINDS[b.kind].verifiable})
    if placeholders:
        lines += ["", *textwrap.wrap(f"TO FILL IN: {', '.join(map(plain_text, placeholders))} are operations import "
                                     "could not map; each is an UnmappedOperation whose forward raises until you "
                                     "write it.", WRAP)]
    if writer.shared:
        lines += ["", *textwrap.wrap(MOTIF_NOTE, WRAP)]
    if writer.per_shape:
        listed = "; ".join(f"motif '{plain_text(m)}' ({plain_text(why, 200)})" for m, why in writer.per_shape.items())
        lines += ["", *textwrap.wrap(f"{PER_SHAPE_NOTE} {listed}.", WRAP)]
    return '"""' + "\n".join(lines) + '\n"""'


def _nchw(shape) -> str:
    return "(" + ", ".join(["N", *map(str, shape)]) + ")"


@dataclass
class _Written:
    """One generated class: its forward arguments and how it names its blocks."""

    args: list[str]
    outputs: dict[str, tuple[tuple[str, int | None], ...]]
    modules: dict[str, str]
    channels: list = field(default_factory=list)  # per output port: its channel count (for a motif class)


@dataclass
class _MotifClass:
    """A motif written as one class: its name, constructor arguments and the channel counts of its
    output ports as expressions of those arguments."""

    name: str
    ports: list[str]  # argument per input port
    params: dict[str, str]  # motif parameter → argument
    outs: list = field(default_factory=list)


class _Writer:
    """Writes the classes of one design: motif classes first (inner motifs before the motifs that
    use them), then the design."""

    def __init__(self, analysis, class_name: str | None):
        self.analysis = analysis
        design = analysis.design
        self.class_name = class_name or class_identifier(design.name, "Network", set())
        self.class_names: set[str] = {self.class_name}
        self.signatures: dict[tuple, GraphInference] = {}  # (motif, input shapes, params) → its inference
        self._collect(analysis.top)
        self.uses: dict[str, list[tuple]] = {}  # motif → its signatures, motifs in order of first use
        for key in self.signatures:
            self.uses.setdefault(key[0], []).append(key)
        self.shared: dict[str, _MotifClass] = {}  # motifs written as one class
        self.per_shape: dict[str, str] = {}  # motifs written per signature → why
        self.signature_class: dict[tuple, str] = {}
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
        design = self.analysis.design
        for name, keys in self.uses.items():
            motif = design.motifs[name]
            cls = class_identifier(name, "Motif", self.class_names)
            try:
                self._write_shared(cls, motif, keys)
            except NeedsShapes as e:
                self._write_per_shape(cls, motif, keys, str(e))
        return self._write(self.class_name, f"The design '{plain_text(design.name)}' ({len(design.blocks)} blocks).",
                           self.analysis.top)

    def _write_shared(self, cls: str, motif, keys) -> None:
        taken = set(self.class_names)
        n_ports = len(motif.ports()[0])
        ports = [identifier("in_channels" if n_ports == 1 else f"in_channels_{k + 1}", "in_channels", taken)
                 for k in range(n_ports)]
        shared = _MotifClass(cls, ports, {p: identifier(p, "param", taken) for p in motif.params})
        first = self.signatures[keys[0]]
        values = dict(keys[0][2])
        use = ", ".join([_nchw(x) for x in keys[0][1]] + [f"{shared.params[p]}={values[p]}" for p in motif.params])
        doc = f"Motif '{plain_text(motif.name)}' for any input channels; the comments show its first use: {use}."
        signature = ports + [f"{shared.params[p]}={v}" for p, v in motif.params.items()]
        written = self._write(cls, doc, first, shared, [self.signatures[k] for k in keys], signature)
        shared.outs = written.channels
        self.shared[motif.name] = shared

    def _write_per_shape(self, cls: str, motif, keys, why: str) -> None:
        self.per_shape[motif.name] = why
        note = textwrap.wrap(f"Motif '{plain_text(motif.name)}' is written per input shape and parameter values: "
                             f"{plain_text(why, 200)}.", WRAP - 2)
        for k, key in enumerate(keys):
            name = cls if k == 0 else class_identifier(motif.name, "Motif", self.class_names)
            self.signature_class[key] = name
            shapes = ", ".join(_nchw(x) for x in key[1])
            params = "".join(f", {plain_text(p, 40)}={v}" for p, v in key[2])
            self._write(name, f"Motif '{plain_text(motif.name)}' for input {shapes}{params}.", self.signatures[key],
                        note=note)

    def _write(self, name: str, doc: str, inference, shared: _MotifClass | None = None, uses=(),
               signature=(), note=()) -> _Written:
        """One class for ``inference``'s graph. With ``shared``, layers are built from channel
        expressions of its arguments (valid for every inference in ``uses``); else from the sizes
        ``inference`` found."""
        g = inference.graph
        taken = set(self.class_names)
        ident = {b.id: identifier(b.name, KINDS[b.kind].stem, taken) for b in g.blocks.values() if b.kind != "Output"}
        args = [ident[b.id] for b in g.of_kind("Input")]
        outputs: dict[str, tuple] = {b: ((ident[b], None),) for b in g.blocks if g.blocks[b].kind == "Input"}
        channels: dict[str, list] = {}
        if shared is not None:
            channels = {b.id: [Count.of(a)] for b, a in zip(g.of_kind("Input"), shared.ports)}
        modules: dict[str, str] = {}
        init, steps = [], []
        for bid in inference.order:
            blk = g.blocks[bid]
            if blk.kind == "Input":
                continue
            wires = sorted(g.in_wires[bid], key=lambda w: w.dst_port)
            sources = [outputs[w.src][w.src_port] for w in wires]
            if blk.kind == "Output":
                outputs[bid] = tuple(sources)
                if shared is not None:
                    channels[bid] = [channels[w.src][w.src_port] for w in wires]
                continue
            r = inference.results[bid]
            values = [v if k is None else f"{v}[{k}]" for v, k in sources]
            if shared is None:
                s = _settings(inference, blk)
                layer = self._layer(inference, blk, s, r.ins, r.outs)
            else:
                s = {k: Count.of(shared.params[v["param"]]) if type(v) is dict else v for k, v in blk.settings.items()}
                ins = [channels[w.src][w.src_port] for w in wires]
                try:
                    layer, channels[bid] = self._shared_layer(uses, blk, s, ins)
                except NeedsShapes as e:
                    raise NeedsShapes(f"{blk.kind} '{plain_text(blk.name)}' {e}") from None
            var = ident[bid]
            if layer is None:
                code = KINDS[blk.kind].torch_expr(s, values)
            else:
                init.append(f"self.{var} = {layer}")
                modules[bid] = var
                code = f"self.{var}({', '.join(values)})"
            steps.append((f"{var} = {code}", ", ".join(_nchw(o) for o in r.outs)))
            outputs[bid] = ((var, None),) if len(r.outs) == 1 else tuple((var, k) for k in range(len(r.outs)))
        outs = g.of_kind("Output")
        returned = [v if k is None else f"{v}[{k}]" for b in outs for v, k in outputs[b.id]]
        width = min(max((len(c) for c, _ in steps), default=0), COMMENT_COLUMN)
        lines = [*(f"# {line}" for line in note), f"class {name}(nn.Module):", f'    """{doc}"""', "",
                 f"    def __init__({', '.join(['self', *signature])}):",
                 "        super().__init__()", *(f"        {line}" for line in init), "",
                 f"    def forward(self{''.join(', ' + a for a in args)}):",
                 *(f"        {code:<{width}}  # {shape}" for code, shape in steps)]
        if returned:
            lines.append(f"        return {', '.join(returned)}")
        self.classes.append("\n".join(lines) + "\n")
        return _Written(args, outputs, modules, [c for b in outs for c in channels.get(b.id, [])])

    def _layer(self, inference, blk, s, ins, outs) -> str | None:
        """A layer with the sizes one inference found."""
        if blk.kind != "Motif":
            return KINDS[blk.kind].torch_layer(s, ins, outs[0])
        key = self._signature(inference, blk)
        cls = self.signature_class.get(key)
        if cls is not None:
            return _repeated(f"{cls}()", s["repeat"])
        return self._use(s, [x[0] for x in ins])[0]

    def _shared_layer(self, uses, blk, s, ins) -> tuple[str | None, list]:
        """A layer built from channel expressions, and the channel counts of its outputs."""
        if blk.kind == "Motif":
            return self._use(s, ins)
        flat = all(len(u.results[blk.id].ins[0]) == 1 for u in uses)
        out = out_channels(blk.kind, s, tuple(ins), plain_text(blk.name), flat)
        return KINDS[blk.kind].torch_layer(s, tuple((c,) for c in ins), (out,)), [out]

    def _use(self, s, ins) -> tuple[str, list]:
        """The instance of a motif written as one class, and the channel counts of its outputs."""
        motif = self.analysis.design.motifs[s["motif"]]
        cls = self.shared.get(motif.name)
        if cls is None:
            raise NeedsShapes(f"uses motif '{plain_text(motif.name)}', which is written per input shape")
        values = {**motif.params, **{k: v for k, v in s.items() if k not in ("motif", "repeat")}}
        named = {**dict(zip(cls.ports, ins)), **{cls.params[p]: v for p, v in values.items()}}
        call = f"{cls.name}({', '.join(f'{a}={v!r}' for a, v in named.items())})"
        return _repeated(call, s["repeat"]), [substitute(c, named) for c in cls.outs]


def _repeated(call: str, repeat) -> str:
    return call if repeat == 1 else f"nn.Sequential(*[{call} for _ in range({repeat!r})])"


def _settings(inference, blk) -> dict:
    """The block's settings with motif parameters filled in (inside a motif)."""
    return inference.resolved_settings(blk) if inference.params is not None else blk.settings
