"""Planned blocks → a design: plain blocks, motifs for repeated submodules, then Tidy.

Block names come from the source (``layer2.0.conv1`` → ``layer2_0_conv1``), made unique; inside
a motif they are relative to the submodule (``conv1``), and a motif use is named after the
submodule's path.
"""
from __future__ import annotations

from dataclasses import dataclass

from layerloom.core import edits
from layerloom.core.design import Design
from layerloom.core.layout import tidy_positions
from layerloom.importing.motifs import MotifPlan, find_motifs, local_name, unique

HOME = (0.0, 0.0)  # where blocks are added; Tidy places them all at the end


@dataclass
class Imported:
    """An imported design; ``origins`` maps each top-level block id to the source operation(s) it
    stands for (module paths or node names); ``notes`` are things the user should know."""

    design: Design
    origins: dict[str, str]
    notes: list[str]

    @property
    def unmapped(self) -> list[str]:
        """Names of the unmapped blocks (at the top level and inside motifs)."""
        d = self.design
        return [b.name for g in (d, *d.motifs.values()) for b in g.blocks.values() if b.kind == "Unmapped"]


def build_design(name: str, blocks, motifs: bool = True, notes=()) -> Imported:
    """A design holding ``blocks`` (planned blocks); with ``motifs``, alike submodules become uses
    of one motif. Every graph is laid out with Tidy."""
    design = Design(name)
    plans = find_motifs(blocks) if motifs else []
    unit_at = {u.start: (mp, u) for mp in plans for u in mp.units}
    placed: dict[tuple[int, int], tuple[str, int]] = {}
    origins: dict[str, str] = {}
    names: set[str] = set()
    skip_to = 0
    with design.bulk():
        for i, b in enumerate(blocks):
            if i < skip_to:
                continue
            if i in unit_at:
                mp, unit = unit_at[i]
                if mp.name not in design.motifs:
                    _define(design, blocks, mp)
                values = {p: unit.values[places[0]] for p, places in mp.params.items()}
                uid = design.use(mp.name, *[placed[s] for s in unit.ins], repeat=unit.repeat, position=HOME,
                                 name=unique(unit.path.replace(".", "_") or mp.name, names), **values)
                for j, out in enumerate(unit.last.outs):
                    placed[out] = (uid, j)
                origins[uid] = ", ".join(u.path for u in (unit, *unit.copies))
                skip_to = unit.last.stop
                continue
            bid = design.add(b.kind, *[placed[s] for s in b.inputs], name=unique(b.name, names), position=HOME,
                             **b.settings)
            placed[(i, 0)] = (bid, 0)
            origins[bid] = b.origin
        for g in (design, *design.motifs.values()):
            design.apply(edits.move(g, tidy_positions(g)))
    return Imported(design, origins, list(notes))


def _define(design: Design, blocks, mp: MotifPlan) -> None:
    """Define motif ``mp`` from its first unit, with its parameters in place of the differing settings."""
    first = mp.units[0]
    motif = design.motif(mp.name, **{p: first.values[places[0]] for p, places in mp.params.items()})
    param_of = {place: p for p, places in mp.params.items() for place in places}
    many = len(first.ins) > 1
    ports = [motif.input(name=f"x_{k + 1}" if many else "x") for k in range(len(first.ins))]
    local: dict[int, str] = {}
    names: set[str] = set()
    for k, i in enumerate(range(first.start, first.stop)):
        b = blocks[i]
        ins = [(local[src], port) if first.start <= src < first.stop else (ports[first.ins.index((src, port))], 0)
               for src, port in b.inputs]
        settings = {key: {"param": param_of[(k, key)]} if (k, key) in param_of else v for key, v in b.settings.items()}
        local[i] = motif.add(b.kind, *ins, name=unique(local_name(b.name, first.path), names), position=HOME,
                             **settings)
    for k, (i, port) in enumerate(first.outs):
        motif.add("Output", (local[i], port), name=f"y_{k + 1}" if len(first.outs) > 1 else "y")

