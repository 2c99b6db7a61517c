"""The block-kind registry: each kind is declared once, with its settings, ports and rules.

A kind is a subclass of :class:`Kind` registered with :func:`register` (which refuses a second
kind of the same name). Its rules see shapes and settings, never tensors:

- ``shape(s, ins, report)`` → the output :class:`~layerloom.core.shapes.Shape`, or raises
  :class:`~layerloom.core.findings.Stop` with an error finding; warnings/notes go to ``report``.
- ``cost(s, ins, out)`` → :class:`Cost` for one sample (the ledger multiplies by the batch size).
- ``window(s, ins)`` → ``(kh, kw, sh, sw)``, the kernel extent and stride in input pixels that the
  receptive-field pass uses, or ``None`` when the block looks at one position at a time.
- ``summary(s)`` → settings in trade notation (``3×3 /2 · 128``).
- ``torch_layer(s, ins, out)`` → source of the ``nn.Module`` that computes the block, or ``None``
  for a block computed by an expression (``torch_expr``). It reads only the channel count (item 0)
  of ``ins`` and ``out``; in a motif class written for any input channels, those counts and the
  settings that are motif parameters are source expressions (:mod:`layerloom.export.channels`),
  so an emitter writes them with ``repr``/f-strings and combines them only with ``+`` and ``*``.
"""
from __future__ import annotations

from typing import Any, NamedTuple

from layerloom.core.findings import Stop
from layerloom.core.settings import Setting, SettingError
from layerloom.core.shapes import Shape
from layerloom.core.values import quote


class Cost(NamedTuple):
    """What one block costs for one sample.

    ``weights``: learned parameters (weights, bias, norm scale and shift), as PyTorch's
    ``sum(p.numel() for p in module.parameters())``. ``buffers``: stored non-learned values (norm
    running mean and variance, batch counter). ``macs``: multiply-accumulates of convolutions and
    linear layers. ``other``: other element-wise operations (norms, activations, pooling, joins), a
    rough count of one per element per step.
    """

    weights: int = 0
    buffers: int = 0
    macs: int = 0
    other: int = 0


FREE = Cost()
PORTS = 64
"""Ports a block may have on each side: numbered 0 to 63, all a file holds (resources/loom.schema.json)."""

KINDS: dict[str, "Kind"] = {}


def register(cls: type["Kind"]) -> type["Kind"]:
    """Class decorator: add one instance of ``cls`` to :data:`KINDS`; refuses duplicate names."""
    kind = cls()
    if kind.name in KINDS:
        raise ValueError(f"block kind {kind.name!r} is declared twice")
    kind.stem = kind.stem or kind.name.lower()
    kind.settings_by_key = {s.key: s for s in kind.settings}
    kind.defaults = {s.key: s.default for s in kind.settings}
    KINDS[kind.name] = kind
    return cls


class Kind:
    """Base of all block kinds; the defaults describe a one-in, one-out, shape-keeping block."""

    name: str = ""
    title: str = ""  # shown on the Parts shelf
    family: str = ""
    stem: str = ""  # default block names are stem_1, stem_2, …; empty means the lower-case name
    settings: tuple[Setting, ...] = ()
    settings_by_key: dict[str, Setting]
    defaults: dict[str, Any]
    view = False  # output aliases the input (no new activation memory)
    flat_input = False  # takes a flat vector only: the editor puts a Flatten before it when added after a map
    keeps: tuple[str, ...] = ()  # what its backward pass keeps, see backward_keeps
    scriptable = True  # accepted by torch.jit.script once exported
    verifiable = True  # its export computes the block (False: a placeholder the user fills in)
    torch_helper = ""  # source of a helper class its torch_layer needs, written once into the export

    def input_count(self, s: dict) -> int:
        return 1

    def output_count(self, s: dict) -> int:
        return 1

    def shape(self, s: dict, ins: tuple[Shape, ...], report) -> Shape:
        return ins[0]

    def cost(self, s: dict, ins: tuple[Shape, ...], out: Shape) -> Cost:
        return FREE

    def window(self, s: dict, ins: tuple[Shape, ...]):
        return None

    def channels(self, s: dict, ins: tuple):
        """Output channel count from the input channel counts ``ins`` (numbers, or expressions that
        support ``+`` and ``*``, as the export's motif classes use); None when it depends on height
        and width. The default keeps input 0's channels."""
        return ins[0]

    def summary(self, s: dict) -> str:
        return ""

    def backward_keeps(self, s: dict) -> tuple[str, ...]:
        """Tensors a training step keeps for this block's backward pass (what PyTorch's autograd
        saves, weights aside): ``"inputs"`` (every input), ``"output"``, ``"indices"`` (one int64
        per output element, max pooling) and ``"mask"`` (one output-sized tensor, dropout)."""
        return self.keeps

    def torch_layer(self, s: dict, ins: tuple[Shape, ...], out: Shape) -> str | None:
        raise NotImplementedError(self.name)

    def torch_expr(self, s: dict, args: list[str]) -> str:
        """Forward expression for kinds without a layer (``torch_layer`` returns ``None``)."""
        raise NotImplementedError(self.name)

    def check_settings(self, settings: dict) -> dict:
        """Complete ``settings`` with defaults and check each; raises SettingError naming the key."""
        out = dict(self.defaults)
        for key, value in settings.items():
            spec = self.settings_by_key.get(key)
            if spec is None:
                raise SettingError(f"{self.name} has no setting {quote(key)} (it has: {', '.join(self.settings_by_key) or 'none'})")
            out[key] = spec.check(value)
        return out


def need_map(x: Shape, name: str, port: int = 0) -> Shape:
    """Stop with ``shape.rank`` unless ``x`` is a feature map."""
    if len(x) != 3:
        raise Stop("shape.rank", f"{name} needs a feature map C×H×W but receives a flat vector of {x[0]} features; "
                   "remove the Flatten before it or move it after", port)
    return x


def conv_length(n: int, k: int, s: int, p: int, d: int, name: str, axis: str, report, ceil: bool = False) -> int:
    """Output length along one axis by PyTorch's formula floor((n + 2p − d(k−1) − 1)/s) + 1.

    With ``ceil`` (pooling's ceil mode) the division rounds up, but a window may not start in the
    right padding. Stops with ``shape.collapsed`` when the kernel does not fit; notes
    ``shape.stride_drops`` when whole input rows or columns at the end are never read.
    """
    span = n + 2 * p - d * (k - 1) - 1
    if span < (1 - s if ceil else 0):  # in ceil mode a window may overhang the end, as in PyTorch
        raise Stop("shape.collapsed", f"{name}: the {axis} {n} (padding {p}) is smaller than the kernel extent "
                   f"{d * (k - 1) + 1}, so the output {axis} would fall below 1", numbers=(n, d * (k - 1) + 1))
    if ceil:
        out = -(-span // s) + 1
        if (out - 1) * s >= n + p:
            out -= 1
        return out
    dropped = span % s - p
    if dropped > 0 and d * (k - 1) + 1 >= s:
        report.add("shape.stride_drops", "note",
                   f"{name}: stride {s} over {axis} {n} leaves the last {dropped} {'row' if axis == 'height' else 'column'}"
                   f"{'s' if dropped > 1 else ''} unread")
    return span // s + 1


def both_axes(rule) -> tuple[int, int]:
    """``(rule("height", 0), rule("width", 1))``; when both axes collapse, one ``shape.collapsed``
    names both (numbers ``h×w`` of each side), not only the height."""
    sizes, collapsed = [], []
    for i, axis in enumerate(("height", "width")):
        try:
            sizes.append(rule(axis, i))
        except Stop as e:
            if e.code != "shape.collapsed":
                raise
            collapsed.append(e)
    if len(collapsed) == 2:
        h, w = collapsed
        raise Stop("shape.collapsed", f"{h.message}; and {w.message.split(': ', 1)[-1]}", h.port,
                   tuple(f"{a}×{b}" for a, b in zip(h.numbers, w.numbers)))
    if collapsed:
        raise collapsed[0]
    return sizes[0], sizes[1]


def kw(**pairs: Any) -> str:
    """Keyword arguments in source form, skipping ``None``: ``kw(stride=2)`` → ``stride=2``."""
    return ", ".join(f"{k}={_py(v)}" for k, v in pairs.items() if v is not None)


def _py(v: Any) -> str:
    if isinstance(v, (list, tuple)):
        return "(" + ", ".join(repr(i) for i in v) + ")"
    return repr(v)
