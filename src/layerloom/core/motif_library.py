"""A shelf of common motifs: residual units, a multi-branch unit, depthwise-separable and inverted
residual units, and a squeeze-and-excite gate, each with parameters for its widths.

Each entry builds the motif's definition; :func:`library_edit` turns it into an edit that adds the
definition to a design (under a free name), so dropping one on the canvas can be undone. Widths
that must equal the incoming channel count (an identity shortcut, a gate) are parameters too: a
mismatch shows as a ``join.channels`` finding inside the motif, with its mend.
"""
from __future__ import annotations

from typing import Callable, NamedTuple

from layerloom.core.design import Design, Motif
from layerloom.core.edits import AddBlock, AddMotif, AddWire, Edit
from layerloom.core.layout import tidy_positions


class LibraryMotif(NamedTuple):
    key: str  # default motif name in a design
    title: str  # shown on the shelf
    description: str
    params: dict
    build: Callable[[Motif], None]


def _p(name: str) -> dict:
    return {"param": name}


def _conv_bn(m: Motif, x: str, out, kernel: int, stride=1, relu: bool = True, name: str | None = None) -> str:
    x = m.add("Conv2d", x, out_channels=out, kernel=kernel, stride=stride, padding=kernel // 2, bias=False, name=name)
    x = m.add("BatchNorm2d", x)
    return m.add("ReLU", x) if relu else x


def _basic(m: Motif) -> None:
    x = m.input()
    y = _conv_bn(m, x, _p("width"), 3, name="conv_a")
    y = _conv_bn(m, y, _p("width"), 3, relu=False, name="conv_b")
    m.add("Output", m.add("ReLU", m.add("Add", y, x, name="residual")))


def _bottleneck(m: Motif, projection: bool) -> None:
    x = m.input()
    y = _conv_bn(m, x, _p("width"), 1, name="reduce")
    y = _conv_bn(m, y, _p("width"), 3, _p("stride") if projection else 1, name="spatial")
    y = _conv_bn(m, y, _p("out"), 1, relu=False, name="expand")
    short = x
    if projection:
        short = m.add("Pointwise", x, out_channels=_p("out"), stride=_p("stride"), bias=False, name="projection")
        short = m.add("BatchNorm2d", short)
    m.add("Output", m.add("ReLU", m.add("Add", y, short, name="residual")))


def _branches(m: Motif) -> None:
    x = m.input()
    b1 = m.add("ReLU", m.add("Pointwise", x, out_channels=_p("b1"), name="branch_1x1"))
    r3 = m.add("ReLU", m.add("Pointwise", x, out_channels=_p("b3_reduce"), name="reduce_3x3"))
    b3 = m.add("ReLU", m.add("Conv2d", r3, out_channels=_p("b3"), kernel=3, padding=1, name="branch_3x3"))
    r5 = m.add("ReLU", m.add("Pointwise", x, out_channels=_p("b5_reduce"), name="reduce_5x5"))
    b5 = m.add("ReLU", m.add("Conv2d", r5, out_channels=_p("b5"), kernel=5, padding=2, name="branch_5x5"))
    pool = m.add("MaxPool2d", x, kernel=3, stride=1, padding=1, name="pool")
    bp = m.add("ReLU", m.add("Pointwise", pool, out_channels=_p("pool_proj"), name="pool_proj"))
    m.add("Output", m.add("Concat", b1, b3, b5, bp, inputs=4, name="join"))


def _separable(m: Motif) -> None:
    x = m.input()
    y = m.add("Depthwise", x, kernel=3, stride=_p("stride"), padding=1, bias=False, name="depthwise")
    y = m.add("ReLU", m.add("BatchNorm2d", y))
    y = m.add("Pointwise", y, out_channels=_p("out"), bias=False, name="pointwise")
    m.add("Output", m.add("ReLU", m.add("BatchNorm2d", y)))


def _inverted(m: Motif) -> None:
    x = m.input()
    y = m.add("ReLU6", m.add("BatchNorm2d", m.add("Pointwise", x, out_channels=_p("expand"), bias=False,
                                                    name="expand")))
    y = m.add("ReLU6", m.add("BatchNorm2d", m.add("Depthwise", y, kernel=3, padding=1, bias=False, name="depthwise")))
    y = m.add("BatchNorm2d", m.add("Pointwise", y, out_channels=_p("width"), bias=False, name="project"))
    m.add("Output", m.add("Add", y, x, name="residual"))


def _gate(m: Motif) -> None:
    x = m.input()
    g = m.add("AdaptiveAvgPool2d", x, name="squeeze")
    g = m.add("ReLU", m.add("Pointwise", g, out_channels=_p("reduced"), name="excite_down"))
    g = m.add("Sigmoid", m.add("Pointwise", g, out_channels=_p("channels"), name="excite_up"))
    m.add("Output", m.add("Multiply", x, g, name="gate"))


LIBRARY: tuple[LibraryMotif, ...] = (
    LibraryMotif("residual_unit", "Residual unit (two 3×3)",
                 "3×3 → 3×3 with an identity shortcut; width must equal the incoming channels", {"width": 64}, _basic),
    LibraryMotif("bottleneck", "Bottleneck residual unit",
                 "1×1 reduce → 3×3 → 1×1 expand with an identity shortcut; out must equal the incoming channels",
                 {"width": 64, "out": 256}, lambda m: _bottleneck(m, False)),
    LibraryMotif("bottleneck_projection", "Bottleneck residual unit with projection",
                 "1×1 reduce → 3×3 (stride) → 1×1 expand, shortcut projected by a strided 1×1 when channels or "
                 "size change", {"width": 64, "out": 256, "stride": 1}, lambda m: _bottleneck(m, True)),
    LibraryMotif("multi_branch", "Multi-branch unit (1×1 / 3×3 / 5×5 / pool)",
                 "parallel 1×1, 3×3 and 5×5 branches and a pooling branch, each heavy branch after a 1×1 "
                 "reduction, joined by concatenation",
                 {"b1": 64, "b3_reduce": 96, "b3": 128, "b5_reduce": 16, "b5": 32, "pool_proj": 32}, _branches),
    LibraryMotif("separable", "Depthwise-separable unit",
                 "3×3 depthwise (stride) → 1×1 pointwise, each with batch norm and ReLU", {"out": 128, "stride": 1},
                 _separable),
    LibraryMotif("inverted_residual", "Inverted residual unit",
                 "1×1 expand → 3×3 depthwise → 1×1 project with an identity shortcut; width must equal the "
                 "incoming channels", {"expand": 96, "width": 16}, _inverted),
    LibraryMotif("se_gate", "Squeeze-and-excite gate",
                 "global average pool → 1×1 reduce → 1×1 restore → sigmoid, multiplied into the input; channels "
                 "must equal the incoming channels", {"channels": 64, "reduced": 16}, _gate),
)
BY_KEY = {m.key: m for m in LIBRARY}


def define(design: Design, key: str, name: str | None = None) -> Motif:
    """Define library motif ``key`` in ``design`` directly (for scripts); returns the motif."""
    entry = BY_KEY[key]
    motif = design.motif(name or entry.key, **entry.params)
    entry.build(motif)
    return motif


def library_edit(design: Design, key: str) -> tuple[Edit, str]:
    """An edit defining library motif ``key`` in ``design`` under a free name; and that name."""
    entry = BY_KEY[key]
    name, n = entry.key, 1
    while name in design.motifs:
        n += 1
        name = f"{entry.key}_{n}"
    scratch = Design()
    motif = define(scratch, key, name)
    positions = tidy_positions(motif)
    ops = [AddMotif(name, dict(motif.params))]
    ops += [AddBlock(name, b.id, b.kind, b.name, b.settings, positions[b.id]) for b in motif.blocks.values()]
    ops += [AddWire(name, w) for w in motif.wires]
    return Edit(f"Add motif {name}", tuple(ops)), name
