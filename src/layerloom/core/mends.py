"""Mends: suggested automatic fixes for findings, as edits the caller applies (and can undo).

``mends_for(design, finding)`` returns the mends that apply, best first; each is a label in plain
words and an :class:`~layerloom.core.edits.Edit`. Mends are pure: they read the design and build
an edit, they never change anything themselves. Applying a mend clears the finding it was offered
for (the test suite checks each one). Findings inside a motif are mended inside that motif, so the
fix applies to every use of it.
"""
from __future__ import annotations

from math import gcd
from typing import Callable, NamedTuple

from layerloom.core import edits
from layerloom.core.findings import ERROR, Finding, Stop
from layerloom.core.graph import Wire
from layerloom.core.inference import GraphInference
from layerloom.core.motif_view import feed
from layerloom.core.settings import SettingError

_BUILDERS: dict[str, Callable] = {}

CHANNEL_KEEPING = {"BatchNorm2d", "ReLU", "ReLU6", "LeakyReLU", "GELU", "SiLU", "Sigmoid", "Tanh", "Hardswish",
                   "Identity", "Dropout", "MaxPool2d", "AvgPool2d", "AdaptiveAvgPool2d", "Upsample"}
"""Kinds that hand on their input's channel count (followed upstream to find a convolution)."""


class Mend(NamedTuple):
    label: str
    edit: edits.Edit


class Place(NamedTuple):
    """Where a finding lives: the design design, the graph holding the block, and its inference."""

    design: object
    graph: object
    block: str
    inference: GraphInference

    def source_shape(self, wire: Wire):
        r = self.inference.results.get(wire.src)
        return r.outs[wire.src_port] if r is not None and wire.src_port < len(r.outs) else None

    def in_wire(self, port: int) -> Wire | None:
        ws = [w for w in self.graph.in_wires[self.block] if w.dst_port == port]
        return ws[0] if len(ws) == 1 else None

    def name(self, block_id: str) -> str:
        return self.graph.blocks[block_id].name

    def settings(self, block_id: str) -> dict:
        """The block's settings with motif parameters replaced by the values of this use."""
        blk = self.graph.blocks[block_id]
        try:
            return self.inference.resolved_settings(blk) if self.inference.params is not None else blk.settings
        except Stop:
            return blk.settings


def mend(*codes: str):
    """Register a mend builder for findings with these codes (one builder per code)."""
    def deco(fn):
        for code in codes:
            if code in _BUILDERS:
                raise ValueError(f"mends for {code!r} are declared twice")
            _BUILDERS[code] = fn
        return fn
    return deco


def mends_for(design, finding: Finding) -> list[Mend]:
    """The mends that apply to ``finding`` in ``design`` as it is now (possibly none).

    Inside a motif used in more than one place, each mend is offered for this use only (setting the
    instance's parameter, exposing the setting as a parameter first, or giving this use its own
    copy of the motif), and for every use only when that makes no error elsewhere; its text says so.
    """
    builder = _BUILDERS.get(finding.code)
    if builder is None:
        return []
    place = _locate(design, finding)
    if place is None:
        return []
    found = [m for m in builder(place, finding) if m is not None]
    if not finding.path or not found:
        return found
    from layerloom.core import mends_in_use

    return mends_in_use.for_this_use(design, finding, found)


def _locate(design, finding: Finding) -> Place | None:
    """Follow ``finding.path`` through motif instances to the graph holding the block."""
    graph, inference, block = design, design.analysis().refresh().top, finding.block
    for inner in finding.path:
        inference = feed(design, graph, inference, block)
        if inference is None or inner not in inference.graph.blocks:
            return None
        graph, block = inference.graph, inner
    if block and block not in graph.blocks:
        return None
    return Place(design, graph, block, inference)


def _insert(place: Place, wire: Wire, steps: list[tuple[str, dict]], label: str) -> Mend | None:
    """The mend inserting ``steps`` on ``wire``; None when a kind refuses the settings it would need
    (a stride beyond its maximum, say): such a mend is not offered."""
    try:
        return Mend(label, edits.insert_on_wire(place.design, wire, steps, graph=place.graph.key))
    except (SettingError, edits.EditError):
        return None


def _set(place: Place, block: str, label: str, **settings) -> Mend | None:
    """The mend setting ``settings`` on ``block``; None when its kind refuses them."""
    try:
        return Mend(label, edits.set_settings(place.design, block, settings, graph=place.graph.key))
    except (SettingError, edits.EditError):
        return None


def _join_branches(place: Place, finding: Finding):
    """(narrow wire, narrow shape, wide wire, wide shape) of a two-branch clash, or None."""
    a_wire, b_wire = place.in_wire(0), place.in_wire(finding.port or 0)
    if a_wire is None or b_wire is None:
        return None
    a, b = place.source_shape(a_wire), place.source_shape(b_wire)
    if a is None or b is None or len(a) != 3 or len(b) != 3:
        return None
    if a[0] < b[0] or (a[0] == b[0] and a[1] > b[1]):
        return a_wire, a, b_wire, b
    return b_wire, b, a_wire, a


def _ratio(big: int, small: int) -> int | None:
    return big // small if small and big % small == 0 else None


@mend("join.channels")
def _mend_channels(place: Place, finding: Finding):
    branches = _join_branches(place, finding)
    if branches is None:
        return
    narrow_wire, narrow, wide_wire, wide = branches
    gate = narrow[1:] == (1, 1)  # a C×1×1 gate broadcasts over the map: no stride needed
    sh, sw = (1, 1) if gate else (_ratio(narrow[1], wide[1]), _ratio(narrow[2], wide[2]))
    if sh and sw:
        stride = sh if sh == sw else [sh, sw]
        extra = f" and stride {sh}" if stride != 1 and sh == sw else (f" and stride {sh}×{sw}" if stride != 1 else "")
        yield _insert(place, narrow_wire, [("Pointwise", {"out_channels": wide[0], "stride": stride, "bias": False})],
                      f"Insert a 1×1 projection to {wide[0]} channels{extra} after {place.name(narrow_wire.src)}")
    if gate or narrow[1:] == wide[1:]:
        conv = _upstream_conv(place, narrow_wire.src)
        if conv is not None:
            groups = place.settings(conv).get("groups", 1)
            if wide[0] % groups == 0:
                yield _set(place, conv, f"Set {place.name(conv)}'s out channels to {wide[0]}", out_channels=wide[0])


def _upstream_conv(place: Place, block: str) -> str | None:
    """The nearest convolution upstream that sets the channel count reaching ``block``."""
    g = place.graph
    while True:
        b = g.blocks[block]
        if b.kind in ("Conv2d", "Pointwise", "ConvTranspose2d"):
            return None if isinstance(b.settings["out_channels"], dict) else block
        if b.kind not in CHANNEL_KEEPING or len(g.in_wires[block]) != 1:
            return None
        block = g.in_wires[block][0].src


@mend("join.size")
def _mend_size(place: Place, finding: Finding):
    a_wire, b_wire = place.in_wire(0), place.in_wire(finding.port or 0)
    if a_wire is None or b_wire is None:
        return
    a, b = place.source_shape(a_wire), place.source_shape(b_wire)
    if a is None or b is None:
        return
    big_wire, big, small = (a_wire, a, b) if a[1] * a[2] > b[1] * b[2] else (b_wire, b, a)
    rh, rw = _ratio(big[1], small[1]), _ratio(big[2], small[2])
    src = place.name(big_wire.src)
    if rh and rw:
        k = rh if rh == rw else [rh, rw]
        yield _insert(place, big_wire, [("AvgPool2d", {"kernel": k, "stride": k})],
                      f"Insert {rh}×{rw} average pooling after {src} ({big[1]}×{big[2]} → {small[1]}×{small[2]})")
    else:
        out = small[1] if small[1] == small[2] else [small[1], small[2]]
        yield _insert(place, big_wire, [("AdaptiveAvgPool2d", {"output": out})],
                      f"Insert adaptive average pooling to {small[1]}×{small[2]} after {src}")


@mend("linear.rank")
def _mend_linear_rank(place: Place, finding: Finding):
    wire = place.in_wire(0)
    if wire is None:
        return
    name = place.name(place.block)
    shape = place.source_shape(wire)
    if shape is not None and shape[1:] != (1, 1):
        yield _insert(place, wire, [("AdaptiveAvgPool2d", {}), ("Flatten", {})],
                      f"Insert a global average pool and a Flatten before {name}")
    yield _insert(place, wire, [("Flatten", {})], f"Insert a Flatten before {name}")


@mend("linear.features")
def _mend_linear_features(place: Place, finding: Finding):
    yield _set(place, place.block, f"Take {place.name(place.block)}'s in features from the wire ({finding.numbers[0]})",
               in_features=0)


@mend("conv.groups")
def _mend_groups(place: Place, finding: Finding):
    wire = place.in_wire(0)
    shape = place.source_shape(wire) if wire else None
    if shape is None:
        return
    s = place.settings(place.block)
    common = gcd(shape[0], s["out_channels"])
    g = max(d for d in range(1, min(s["groups"], common) + 1) if common % d == 0)
    yield _set(place, place.block, f"Set groups to {g}", groups=g)


@mend("conv.same_stride", "pool.padding")
def _mend_padding(place: Place, finding: Finding):
    k = place.settings(place.block)["kernel"]
    pad = k // 2 if isinstance(k, int) else [k[0] // 2, k[1] // 2]
    yield _set(place, place.block, f"Set padding to {pad if isinstance(pad, int) else f'{pad[0]}×{pad[1]}'}",
               padding=pad)


@mend("conv.output_padding")
def _mend_output_padding(place: Place, finding: Finding):
    yield _set(place, place.block, "Set output padding to 0", output_padding=0)


@mend("port.multiple")
def _mend_multiple(place: Place, finding: Finding):
    wires = sorted((w for w in place.graph.in_wires[place.block] if w.dst_port == finding.port),
                   key=lambda w: place.name(w.src))
    for keep in wires:
        drop = tuple(edits.RemoveWire(place.graph.key, w) for w in wires if w != keep)
        yield Mend(f"Keep only the wire from {place.name(keep.src)}", edits.Edit("Remove wires", drop))


@mend("port.missing")
def _mend_missing(place: Place, finding: Finding):
    wires = [w for w in place.graph.in_wires[place.block] if w.dst_port == finding.port]
    yield Mend(f"Remove the wire to input {finding.port + 1}",
               edits.Edit("Remove wire", tuple(edits.RemoveWire(place.graph.key, w) for w in wires)))


@mend("motif.repeat_shape")
def _mend_repeat(place: Place, finding: Finding):
    yield _set(place, place.block, "Set repeat to 1", repeat=1)


@mend("graph.cycle")
def _mend_cycle(place: Place, finding: Finding):
    """Remove a wire closing the loop: the first that leaves no more errors than now (tried on a
    copy: blocks on and after a loop have no shapes, so their own faults show only once it is broken)."""
    g = place.graph
    reach, todo = set(), [place.block]
    while todo:
        for w in g.out_wires[todo.pop()]:
            if w.dst not in reach:
                reach.add(w.dst)
                todo.append(w.dst)
    for w in g.in_wires[place.block]:
        if w.src in reach:
            edit = edits.disconnect(g, w)
            if _count_errors_after(place.design, edit) <= _count_errors_after(place.design, None):
                yield Mend(f"Remove the wire from {place.name(w.src)} to {place.name(place.block)}", edit)
                return


def _count_errors_after(design, edit) -> int:
    """Error findings of a copy of ``design`` with ``edit`` applied (None: as it is)."""
    from layerloom.core import fileformat

    trial = fileformat.parse(fileformat.dumps(design))
    if edit is not None:
        trial.apply(edit)
    return sum(f.severity == ERROR for f in trial.findings())


@mend("graph.dead_end")
def _mend_dead_end(place: Place, finding: Finding):
    b = place.graph.blocks[place.block]
    motif = place.design.motifs.get(b.settings["motif"]) if b.kind == "Motif" else None
    if motif is not None and not motif.ports()[1]:
        return  # a use of a motif with no output port has nothing to wire an Output to
    spot = edits.clear_spot((o.position for o in place.graph.blocks.values()), (b.position[0] + 220.0, b.position[1]))
    edit, _ = edits.add_block(place.design, "Output", graph=place.graph.key, inputs=[(b.id, 0)], position=spot)
    yield Mend(f"Add an Output after {b.name}", edit)
