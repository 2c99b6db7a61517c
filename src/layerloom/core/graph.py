"""Blocks and wires: the graph shared by a design and by each of its motifs.

A :class:`Wire` goes from output port ``src_port`` of block ``src`` to input port ``dst_port`` of
block ``dst``. Graphs are changed only through :mod:`layerloom.core.edits` (so every change can be
undone and observers hear of it); the builder methods here make those edits for scripts.
"""
from __future__ import annotations

from collections import Counter
from typing import Any, NamedTuple

from layerloom.core.kinds import KINDS
from layerloom.core.values import quote


class Wire(NamedTuple):
    src: str
    src_port: int
    dst: str
    dst_port: int


class Block:
    """One block: a stable id, its kind's name, a display name, settings and a canvas position."""

    __slots__ = ("id", "kind", "name", "settings", "position")

    def __init__(self, id: str, kind: str, name: str, settings: dict, position: tuple[float, float]):
        self.id, self.kind, self.name, self.settings, self.position = id, kind, name, settings, position

    def __repr__(self) -> str:
        return f"Block({self.id!r}, {self.kind!r}, {self.name!r})"


Port = "str | tuple[str, int]"


class Graph:
    """Blocks (in insertion order) and wires, with wire indexes by block.

    Indexes kept as blocks come and go, so that adding a block costs the same at any size: how
    many blocks bear each name (:meth:`fresh_name`), where to look for the next free ``stem_n``, and
    the rightmost block's x (:meth:`layout_position`).
    """

    key = ""  # "" for the design, the motif's name for a motif

    def __init__(self) -> None:
        self.blocks: dict[str, Block] = {}
        self.wires: dict[Wire, None] = {}
        self.in_wires: dict[str, list[Wire]] = {}
        self.out_wires: dict[str, list[Wire]] = {}
        self._serial = 0
        self._names: dict[str, int] = {}  # name → number of blocks bearing it
        self._next: dict[str, int] = {}  # stem → no stem_n below this n is free
        self._right: float | None = None  # rightmost x, None when it must be looked for again

    # ----- queries
    def block(self, ref: str) -> Block:
        """The block with id ``ref`` or, failing that, with name ``ref``; KeyError naming it otherwise."""
        b = self.blocks.get(ref)
        if b is None:
            for candidate in self.blocks.values():
                if candidate.name == ref:
                    return candidate
            raise KeyError(f"no block with id or name {quote(ref)}")
        return b

    def of_kind(self, kind: str) -> list[Block]:
        return [b for b in self.blocks.values() if b.kind == kind]

    def fresh_id(self) -> str:
        while True:
            self._serial += 1
            candidate = f"b{self._serial}"
            if candidate not in self.blocks:
                return candidate

    def fresh_name(self, stem: str, taken: set[str] | None = None) -> str:
        """``stem_n`` with the smallest n not used by a block, or not in ``taken`` when given."""
        if taken is not None:
            n = 1
            while f"{stem}_{n}" in taken:
                n += 1
            return f"{stem}_{n}"
        n = self._next.get(stem, 1)
        while f"{stem}_{n}" in self._names:
            n += 1
        self._next[stem] = n
        return f"{stem}_{n}"

    # ----- primitive changes (called by edits only)
    def _insert_block(self, block: Block, index: int | None = None) -> None:
        if block.id in self.blocks:
            raise ValueError(f"block id {quote(block.id)} is already used")
        if index is None or index >= len(self.blocks):
            self.blocks[block.id] = block
        else:
            items = list(self.blocks.items())
            items.insert(index, (block.id, block))
            self.blocks = dict(items)
        self.in_wires[block.id] = []
        self.out_wires[block.id] = []
        self._name_added(block.name)
        if self._right is not None:
            self._right = max(self._right, block.position[0])

    def _delete_block(self, block_id: str) -> Block:
        if self.in_wires[block_id] or self.out_wires[block_id]:
            raise ValueError(f"block {quote(block_id)} still has wires")
        del self.in_wires[block_id], self.out_wires[block_id]
        block = self.blocks.pop(block_id)
        self._name_removed(block.name)
        self._moved_from(block.position)
        return block

    def _set_block(self, block_id: str, attribute: str, value: Any) -> Any:
        """Replace a block's ``settings``, ``name`` or ``position``; returns the old value."""
        b = self.blocks[block_id]
        old = getattr(b, attribute)
        setattr(b, attribute, value)
        if attribute == "name":
            self._name_removed(old)
            self._name_added(value)
        elif attribute == "position":
            self._moved_from(old)
            if self._right is not None:
                self._right = max(self._right, value[0])
        return old

    def _name_added(self, name: str) -> None:
        self._names[name] = self._names.get(name, 0) + 1

    def _name_removed(self, name: str) -> None:
        left = self._names[name] - 1
        if left:
            self._names[name] = left
            return
        del self._names[name]
        stem, _, n = name.rpartition("_")
        if n.isascii() and n.isdigit() and self._next.get(stem, 1) > int(n) >= 1:  # not "²"
            self._next[stem] = int(n)  # a lower stem_n is free again

    def _moved_from(self, position) -> None:
        if self._right is not None and position[0] >= self._right:
            self._right = None  # the rightmost block left: look again when asked

    def _insert_wire(self, wire: Wire) -> None:
        if wire.src not in self.blocks or wire.dst not in self.blocks:
            missing = wire.src if wire.src not in self.blocks else wire.dst
            raise ValueError(f"wire names block {quote(missing)}, which does not exist")
        if wire in self.wires:
            raise ValueError(f"that wire already exists: {wire}")
        self.wires[wire] = None
        self.out_wires[wire.src].append(wire)
        self.in_wires[wire.dst].append(wire)

    def _adopt(self, blocks: dict[str, Block], wires: dict[Wire, None]) -> None:
        """Take ``blocks`` (by id) and ``wires`` between them into this empty graph at once (reading a
        file: checked already, so a load costs one pass over each)."""
        if self.blocks:
            raise ValueError("blocks are adopted only by an empty graph")
        self.blocks, self.wires = blocks, wires
        self.in_wires = {bid: [] for bid in blocks}
        self.out_wires = {bid: [] for bid in blocks}
        for w in wires:
            self.out_wires[w.src].append(w)
            self.in_wires[w.dst].append(w)
        self._names = dict(Counter(b.name for b in blocks.values()))

    def _delete_wire(self, wire: Wire) -> None:
        del self.wires[wire]
        self.out_wires[wire.src].remove(wire)
        self.in_wires[wire.dst].remove(wire)

    # ----- builder API for scripts (each call is one undoable edit)
    def _design(self):
        raise NotImplementedError

    def add(self, kind: str, *inputs: Port, name: str | None = None,
            position: tuple[float, float] | None = None, **settings: Any) -> str:
        """Add a block of ``kind`` wired from ``inputs`` (block ids, or ``(id, port)``) to its
        input ports in order; returns the new block's id. Settings not given take their defaults."""
        from layerloom.core import edits

        design = self._design()
        edit, block_id = edits.add_block(design, kind, settings, name=name, position=position, graph=self.key,
                                         inputs=[(self.block(b).id, port) for b, port in map(_port, inputs)])
        design.apply(edit)
        return block_id

    def connect(self, src: Port, dst: str, dst_port: int = 0) -> None:
        """Wire output ``src`` (an id, or ``(id, port)``) to input ``dst_port`` of ``dst``."""
        from layerloom.core import edits

        s, sp = _port(src)
        self._design().apply(edits.connect(self, Wire(self.block(s).id, sp, self.block(dst).id, dst_port)))

    def set(self, block: str, **settings: Any) -> None:
        """Change settings of ``block`` (id or name); refuses an invalid value with SettingError."""
        from layerloom.core import edits

        design = self._design()
        design.apply(edits.set_settings(design, self.block(block).id, settings, graph=self.key))

    def remove(self, *blocks: str) -> None:
        """Remove blocks (ids or names) with their wires."""
        from layerloom.core import edits

        self._design().apply(edits.remove_blocks(self, [self.block(b).id for b in blocks]))

    def layout_position(self) -> tuple[float, float]:
        """A free spot to the right of the rightmost block (scripts rarely care; Tidy rearranges)."""
        if not self.blocks:
            return (0.0, 0.0)
        if self._right is None:
            self._right = max(b.position[0] for b in self.blocks.values())
        return (self._right + 220.0, 0.0)


def _port(p: Port) -> tuple[str, int]:
    return (p, 0) if isinstance(p, str) else (p[0], int(p[1]))


def kind_stem(kind: str) -> str:
    """Default name stem for blocks of ``kind``: ``conv``, ``pw``, ``bn``, …"""
    return KINDS[kind].stem if kind in KINDS else kind.lower()
