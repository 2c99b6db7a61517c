"""Blocks and wires: the graph shared by a design and by each of its motifs.

A :class:`Wire` goes from output port ``src_port`` of block ``src`` to input port ``dst_port`` of
block ``dst``. Graphs are changed only through :mod:`layerloom.core.edits` (so every change can be
undone and observers hear of it); the builder methods here make those edits for scripts.
"""
from __future__ import annotations

from typing import Any, NamedTuple

from layerloom.core.kinds import KINDS


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
    """Blocks (in insertion order) and wires, with wire indexes by block."""

    key = ""  # "" for the design, the motif's name for a motif

    def __init__(self) -> None:
        self.blocks: dict[str, Block] = {}
        self.wires: dict[Wire, None] = {}
        self.in_wires: dict[str, list[Wire]] = {}
        self.out_wires: dict[str, list[Wire]] = {}
        self._serial = 0

    # ----- queries
    def block(self, ref: str) -> Block:
        """The block with id ``ref`` or, failing that, with name ``ref``; KeyError naming it otherwise."""
        b = self.blocks.get(ref)
        if b is None:
            for candidate in self.blocks.values():
                if candidate.name == ref:
                    return candidate
            raise KeyError(f"no block with id or name {ref!r}")
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
        """``stem_n`` with the smallest n not used by a block (nor in ``taken``)."""
        taken = taken if taken is not None else {b.name for b in self.blocks.values()}
        n = 1
        while f"{stem}_{n}" in taken:
            n += 1
        return f"{stem}_{n}"

    # ----- primitive changes (called by edits only)
    def _insert_block(self, block: Block, index: int | None = None) -> None:
        if block.id in self.blocks:
            raise ValueError(f"block id {block.id!r} is already used")
        if index is None or index >= len(self.blocks):
            self.blocks[block.id] = block
        else:
            items = list(self.blocks.items())
            items.insert(index, (block.id, block))
            self.blocks = dict(items)
        self.in_wires[block.id] = []
        self.out_wires[block.id] = []

    def _delete_block(self, block_id: str) -> Block:
        if self.in_wires[block_id] or self.out_wires[block_id]:
            raise ValueError(f"block {block_id!r} still has wires")
        del self.in_wires[block_id], self.out_wires[block_id]
        return self.blocks.pop(block_id)

    def _insert_wire(self, wire: Wire) -> None:
        if wire.src not in self.blocks or wire.dst not in self.blocks:
            missing = wire.src if wire.src not in self.blocks else wire.dst
            raise ValueError(f"wire names block {missing!r}, which does not exist")
        if wire in self.wires:
            raise ValueError(f"that wire already exists: {wire}")
        self.wires[wire] = None
        self.out_wires[wire.src].append(wire)
        self.in_wires[wire.dst].append(wire)

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
        x = max(b.position[0] for b in self.blocks.values())
        return (x + 220.0, 0.0)


def _port(p: Port) -> tuple[str, int]:
    return (p, 0) if isinstance(p, str) else (p[0], int(p[1]))


def kind_stem(kind: str) -> str:
    """Default name stem for blocks of ``kind``: ``conv``, ``pw``, ``bn``, …"""
    return KINDS[kind].stem if kind in KINDS else kind.lower()
