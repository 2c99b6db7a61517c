"""Edits: every change to a design is a sequence of small reversible operations.

``design.apply(edit)`` performs an :class:`Edit` and returns its inverse, so the editor's undo
stack (and any script) can take a change back exactly. The builder functions below check their
input first and raise :class:`EditError` (or :class:`~layerloom.core.settings.SettingError`) with
a message naming the block and the value, before anything changes.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, NamedTuple

from layerloom.core.graph import Block, Graph, Wire, kind_stem
from layerloom.core.kinds import KINDS
from layerloom.core.kinds.base import PORTS
from layerloom.core.settings import SettingError
from layerloom.core.stage_rows import CARD_HEIGHT, CARD_WIDTH, STACK
from layerloom.core.stage_rows import COLUMN as COLUMN_STEP
from layerloom.core.values import check_text, quote


class EditError(ValueError):
    """An edit that cannot be made; the message says which block and why."""


class AddBlock(NamedTuple):
    """Add a block (at the end of the block order, or at ``index`` when undoing a removal)."""

    graph: str
    id: str
    kind: str
    name: str
    settings: dict
    position: tuple
    index: int | None = None

    def apply(self, design) -> "RemoveBlock":
        check_text(self.name, "block name")
        block = Block(self.id, self.kind, self.name, dict(self.settings), self.position)
        design.graph(self.graph)._insert_block(block, self.index)
        return RemoveBlock(*self[:6])


class RemoveBlock(NamedTuple):
    graph: str
    id: str
    kind: str
    name: str
    settings: dict
    position: tuple

    def apply(self, design) -> AddBlock:
        g = design.graph(self.graph)
        index = list(g.blocks).index(self.id)
        b = g._delete_block(self.id)
        return AddBlock(self.graph, b.id, b.kind, b.name, b.settings, b.position, index)


class AddWire(NamedTuple):
    graph: str
    wire: Wire

    def apply(self, design) -> "RemoveWire":
        design.graph(self.graph)._insert_wire(self.wire)
        return RemoveWire(self.graph, self.wire)


class RemoveWire(NamedTuple):
    graph: str
    wire: Wire

    def apply(self, design) -> AddWire:
        design.graph(self.graph)._delete_wire(self.wire)
        return AddWire(self.graph, self.wire)


class SetBlock(NamedTuple):
    """Replace one attribute of a block (``settings``, ``name`` or ``position``)."""

    graph: str
    id: str
    attribute: str
    value: Any

    def apply(self, design) -> "SetBlock":
        if self.attribute == "name":
            check_text(self.value, "block name")
        value = dict(self.value) if self.attribute == "settings" else self.value
        old = design.graph(self.graph)._set_block(self.id, self.attribute, value)
        return SetBlock(self.graph, self.id, self.attribute, old)


class SetField(NamedTuple):
    """Replace a design-wide field (``name``, ``batch``, ``dtype``, ``notes``, ``budget``, …)."""

    name: str
    value: Any

    def apply(self, design) -> "SetField":
        if isinstance(self.value, str):
            check_text(self.value, f"design {self.name}")
        old = getattr(design, self.name)
        setattr(design, self.name, self.value)
        return SetField(self.name, old)


class AddMotif(NamedTuple):
    """Define a motif (an empty one; its blocks and wires follow as further operations)."""

    name: str
    params: dict

    def apply(self, design) -> "RemoveMotif":
        for text in (self.name, *self.params):
            check_text(text, "motif name" if text is self.name else "motif parameter")
        design._insert_motif(self.name, dict(self.params))
        return RemoveMotif(self.name, self.params)


class RemoveMotif(NamedTuple):
    """Delete an empty motif definition."""

    name: str
    params: dict

    def apply(self, design) -> AddMotif:
        m = design._delete_motif(self.name)
        return AddMotif(m.name, m.params)


class SetMotifParams(NamedTuple):
    """Replace a motif's parameters (names → default values)."""

    name: str
    params: dict

    def apply(self, design) -> "SetMotifParams":
        motif = design.motifs[self.name]
        old, motif.params = motif.params, dict(self.params)
        return SetMotifParams(self.name, old)


@dataclass(frozen=True)
class Edit:
    """A labelled sequence of operations, applied in order (undone in reverse)."""

    label: str
    ops: tuple = field(default=())

    def __add__(self, other: "Edit") -> "Edit":
        return Edit(self.label, self.ops + other.ops)


# ----- builders: check first, then describe the change -------------------------------------


def check_settings(design, kind: str, settings: dict, graph: str = "") -> dict:
    """Complete and check settings for a block of ``kind``. In a motif, a value ``{"param": name}``
    refers to a motif parameter; it is checked with the parameter's default."""
    if not isinstance(kind, str) or kind not in KINDS:
        raise EditError(f"unknown block kind {quote(kind)}; known kinds: {', '.join(KINDS)}")
    spec = KINDS[kind]
    if not isinstance(settings, dict):
        raise SettingError(f"settings must be named values such as {{\"stride\": 2}}, not {quote(settings)}")
    params = design.motifs[graph].params if graph else {}
    plain, refs = {}, {}
    for key, value in settings.items():
        if isinstance(value, dict):
            ref = value.get("param")
            if not graph or ref not in params or len(value) != 1:
                where = f"motif {quote(graph)}" if graph else "the design (parameters exist only inside motifs)"
                raise SettingError(f"{quote(key)}: {quote(value)} refers to no parameter of {where}")
            refs[key] = value
            plain[key] = params[ref]
        else:
            plain[key] = value
    checked = spec.check_settings(plain)
    checked.update(refs)
    return checked


def add_block(design, kind: str, settings: dict | None = None, *, name: str | None = None,
              position=None, graph: str = "", inputs=(), block_id: str | None = None) -> tuple[Edit, str]:
    """An edit that adds one block (wired from ``inputs``: ``(block id, port)`` pairs) and its id."""
    g = design.graph(graph)
    checked = check_settings(design, kind, settings or {}, graph)
    bid = block_id or g.fresh_id()
    pos = tuple(position) if position is not None else g.layout_position()
    ops = [AddBlock(graph, bid, kind, name if name is not None else g.fresh_name(kind_stem(kind)), checked, pos)]
    for port, (src, src_port) in enumerate(inputs):
        ops.append(AddWire(graph, Wire(src, src_port, bid, port)))
    return Edit(f"Add {kind}", tuple(ops)), bid


PORT_LIMIT = PORTS - 1  # the highest port index a file holds (resources/loom.schema.json)


def check_ports(wire: Wire, ends: str) -> None:
    """EditError unless both port indexes of ``wire`` are ones a file can hold (0 to 63); ``ends``
    names the blocks wired, for the message."""
    if not all(type(p) is int and 0 <= p <= PORT_LIMIT for p in (wire.src_port, wire.dst_port)):
        raise EditError(f"cannot wire {ends} from output {quote(wire.src_port)} to input {quote(wire.dst_port)}: "
                        f"ports are numbered 0 to {PORT_LIMIT}")


def connect(g: Graph, wire: Wire) -> Edit:
    for bid in (wire.src, wire.dst):
        if bid not in g.blocks:
            raise EditError(f"cannot wire: there is no block {quote(bid)}")
    check_ports(wire, f"{g.blocks[wire.src].name} to {g.blocks[wire.dst].name}")
    if wire in g.wires:
        raise EditError(f"{g.blocks[wire.src].name} is already wired to {g.blocks[wire.dst].name}")
    return Edit("Wire", (AddWire(g.key, wire),))


def disconnect(g: Graph, wire: Wire) -> Edit:
    if wire not in g.wires:
        raise EditError(f"there is no such wire: {wire}")
    return Edit("Remove wire", (RemoveWire(g.key, wire),))


def set_settings(design, block_id: str, changes: dict, graph: str = "") -> Edit:
    """An edit that changes some settings of one block (the rest keep their values)."""
    b = design.graph(graph).blocks[block_id]
    merged = dict(b.settings)
    merged.update(changes)
    try:
        checked = check_settings(design, b.kind, merged, graph)
    except SettingError as e:
        raise SettingError(f"{b.name}: {e}") from None
    return Edit(f"Change {b.name}", (SetBlock(graph, block_id, "settings", checked),))


def rename(g: Graph, block_id: str, name: str) -> Edit:
    """Rename a block; EditError when ``name`` is not valid text (a lone surrogate)."""
    try:
        check_text(name, "block name")
    except ValueError as e:
        raise EditError(f"{g.blocks[block_id].name}: {e}") from None
    return Edit(f"Rename {g.blocks[block_id].name}", (SetBlock(g.key, block_id, "name", name),))


def move(g: Graph, positions: dict[str, tuple[float, float]]) -> Edit:
    return Edit("Move", tuple(SetBlock(g.key, bid, "position", tuple(p)) for bid, p in positions.items()))


def remove_blocks(g: Graph, block_ids) -> Edit:
    """An edit that removes blocks together with every wire touching them."""
    ids = list(dict.fromkeys(block_ids))
    wires = {}
    for bid in ids:
        for w in g.in_wires[bid] + g.out_wires[bid]:
            wires[w] = None
    ops = [RemoveWire(g.key, w) for w in wires]
    for bid in ids:
        b = g.blocks[bid]
        ops.append(RemoveBlock(g.key, b.id, b.kind, b.name, b.settings, b.position))
    return Edit("Delete" if len(ids) != 1 else f"Delete {g.blocks[ids[0]].name}", tuple(ops))


def insert_on_wire(design, wire: Wire, steps: list[tuple[str, dict]], graph: str = "", *,
                   position=None, name: str | None = None) -> Edit:
    """An edit that puts a chain of new one-in, one-out blocks (``(kind, settings)`` each) in the
    middle of ``wire``; a single block may be given its ``position`` and ``name``. Refused with
    :class:`EditError` when a kind does not take exactly one input and give one output."""
    g = design.graph(graph)
    if wire not in g.wires:
        raise EditError(f"there is no such wire: {wire}")
    (ax, ay), (bx, by) = g.blocks[wire.src].position, g.blocks[wire.dst].position
    ops: list = [RemoveWire(graph, wire)]
    src, n = (wire.src, wire.src_port), len(steps)
    names = {b.name for b in g.blocks.values()}
    placed = [b.position for b in g.blocks.values()]
    for i, (kind, settings) in enumerate(steps, 1):
        ins, outs = port_counts(design, Block("", kind, "", check_settings(design, kind, settings, graph), (0, 0)))
        if (ins, outs) != (1, 1):
            raise EditError(f"only a block with one input and one output can go on a wire; "
                            f"{kind} has {ins} inputs and {outs} outputs")
        # below the wire's middle, the chain side by side a column apart, clear of every card
        x = (ax + bx) / 2 + (i - (n + 1) / 2) * COLUMN_STEP
        here = position if n == 1 and position is not None else clear_spot(placed, (x, (ay + by) / 2 + 90.0))
        placed.append(here)
        block_name = name if n == 1 and name is not None else g.fresh_name(kind_stem(kind), names)
        names.add(block_name)
        edit, bid = add_block(design, kind, settings, graph=graph, inputs=[src], name=block_name, position=here)
        ops += edit.ops
        src = (bid, 0)
    ops.append(AddWire(graph, Wire(src[0], 0, wire.dst, wire.dst_port)))
    return Edit("Insert " + " and ".join(k for k, _ in steps), tuple(ops))


def clear_spot(cards, position: tuple[float, float]) -> tuple[float, float]:
    """``position`` (a card's top-left, scene pixels), moved down a stacking step at a time until the
    card it places overlaps none of ``cards`` (their top-left corners): a block added by a mend or
    beside another one never lands on top of one already there."""
    x, y = position
    cards = list(cards)
    while any(abs(cx - x) < CARD_WIDTH and abs(cy - y) < CARD_HEIGHT for cx, cy in cards):
        y += STACK
    return x, y


def added_blocks(edit: Edit) -> list[str]:
    """Ids of the blocks an edit adds, in order."""
    return [op.id for op in edit.ops if isinstance(op, AddBlock)]


def port_counts(design, block: Block) -> tuple[int, int]:
    """Input and output port counts of ``block`` (a motif instance takes its motif's ports)."""
    if block.kind == "Motif":
        motif = design.motifs.get(block.settings.get("motif"))
        if motif is None:
            return 1, 1
        ins, outs = motif.ports()
        return len(ins), len(outs)
    kind = KINDS.get(block.kind)
    if kind is None:
        return 1, 1
    return kind.input_count(block.settings), kind.output_count(block.settings)


def remove_bridging(design, block_ids, graph: str = "") -> Edit:
    """An edit that removes blocks and mends the gap: a consumer of a removed one-in, one-out block
    (or of a run of them) is wired from what fed that run. Where a removed block has other wiring
    (a join, a second output, no input) its consumers are left unwired, as :func:`remove_blocks`."""
    g = design.graph(graph)
    ids = list(dict.fromkeys(block_ids))
    gone = set(ids)

    def feed(bid: str, seen: set) -> tuple[str, int] | None:
        """The outside output reaching ``bid`` through removed pass-through blocks, if any."""
        ins = g.in_wires[bid]
        if bid in seen or port_counts(design, g.blocks[bid]) != (1, 1) or len(ins) != 1:
            return None
        w = ins[0]
        if w.src not in gone:
            return (w.src, w.src_port)
        return feed(w.src, seen | {bid})

    bridges: dict[Wire, None] = {}
    for bid in ids:
        for w in g.out_wires[bid]:
            if w.dst not in gone and (source := feed(bid, set())) is not None:
                bridges[Wire(source[0], source[1], w.dst, w.dst_port)] = None
    edit = remove_blocks(g, ids)
    if not bridges:
        return edit
    return Edit(edit.label + ", bridged", edit.ops + tuple(AddWire(g.key, w) for w in bridges))


def replace_wire(g: Graph, wire: Wire) -> Edit:
    """An edit that wires ``wire`` into its input port, taking away the wire that held the port."""
    add = connect(g, wire)
    old = [w for w in g.in_wires[wire.dst] if w.dst_port == wire.dst_port]
    if not old:
        return add
    return Edit(f"Rewire {g.blocks[wire.dst].name}", tuple(RemoveWire(g.key, w) for w in old) + add.ops)
