"""Finding repeated structure in imported blocks: submodules that become uses of one motif.

A *unit* is the run of planned blocks one submodule produced (consecutive in execution order,
two blocks or more). Units of the same class (when the source names classes) whose blocks have
the same kinds, the same wiring and the same settings except whole numbers are *alike*: they
become uses of one motif, and each whole-number setting that differs between them becomes a
motif parameter (settings that always differ together share one parameter). Units are chosen
outermost first, so a stage made of alike bottlenecks gives one use per bottleneck; consecutive
uses with the same values that keep the shape are stacked as one use with repeat × N.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field


@dataclass
class Unit:
    """One submodule's blocks: ``start``..``stop`` (exclusive) in the planned order."""

    path: str
    cls: str | None
    start: int
    stop: int
    ins: list[tuple[int, int]] = field(default_factory=list)  # outside sources, in first-use order
    outs: list[tuple[int, int]] = field(default_factory=list)  # inside (block, port) read outside
    values: dict = field(default_factory=dict)  # (local block, key) → whole-number setting
    copies: list["Unit"] = field(default_factory=list)  # alike units stacked after this one (repeat × N)

    @property
    def repeat(self) -> int:
        return 1 + len(self.copies)

    @property
    def last(self) -> "Unit":
        return self.copies[-1] if self.copies else self


@dataclass
class MotifPlan:
    """One motif: its name, its units (uses), its parameters as (local block, key) lists."""

    name: str
    units: list[Unit]
    params: dict[str, list[tuple[int, str]]]


def find_motifs(blocks) -> list[MotifPlan]:
    """Groups of alike units in ``blocks`` (planned blocks), each group one motif."""
    spans: dict[str, list] = {}
    for i, b in enumerate(blocks):
        for path, cls in b.scope:
            spans.setdefault(path, [cls, []])[1].append(i)
    readers: dict[int, list[tuple[int, int, int]]] = {}
    for i, b in enumerate(blocks):
        for src, port in b.inputs:
            readers.setdefault(src, []).append((i, port, src))
    candidates, seen = [], set()
    for path, (cls, idx) in spans.items():
        span = (idx[0], idx[-1] + 1)
        if len(idx) < 2 or idx[-1] - idx[0] + 1 != len(idx) or span in seen or _container(blocks, idx, path, cls):
            continue
        if any(blocks[i].kind in ("Input", "Output") for i in idx):
            continue
        seen.add(span)
        unit = Unit(path, cls, *span)
        candidates.append((path.count(".") if path else 0, unit.start, unit, _signature(blocks, unit, readers)))
    candidates.sort(key=lambda c: (c[0], c[1]))
    by_signature: dict = {}
    for _, _, unit, sig in candidates:
        by_signature.setdefault(sig, []).append(unit)
    taken: set[int] = set()
    motifs: list[MotifPlan] = []
    names: set[str] = set()
    for _, _, unit, sig in candidates:
        if unit.start in taken:
            continue
        alike = [u for u in by_signature[sig] if not taken.intersection(range(u.start, u.stop))]
        chosen = []
        for u in sorted(alike, key=lambda u: u.start):
            if not chosen or u.start >= chosen[-1].stop:
                chosen.append(u)
        if len(chosen) < 2:
            continue
        for u in chosen:
            taken.update(range(u.start, u.stop))
        motifs.append(MotifPlan(_motif_name(chosen[0].cls, names), _stacked(blocks, chosen, readers),
                                _parameters(blocks, chosen)))
    return motifs


CONTAINERS = ("Sequential", "ModuleList", "ModuleDict")


def _container(blocks, idx, path: str, cls: str | None) -> bool:
    """True for a stage holding units (such as an ``nn.Sequential`` of bottlenecks), whose children,
    not it, are the repeated structure: a container class, or, when classes are unknown (ONNX),
    a unit whose blocks all lie in two or more submodules."""
    if cls is not None:
        return cls in CONTAINERS
    children = set()
    for i in idx:
        paths = [p for p, _ in blocks[i].scope]
        k = paths.index(path)
        if k + 1 == len(paths):
            return False
        children.add(paths[k + 1])
    return len(children) > 1


def _signature(blocks, unit: Unit, readers) -> tuple:
    """What must agree for two units to be uses of one motif; fills ``unit.ins``/``outs``/``values``."""
    items = []
    for k, i in enumerate(range(unit.start, unit.stop)):
        b = blocks[i]
        wiring = []
        for src, port in b.inputs:
            if unit.start <= src < unit.stop:
                wiring.append(("in", src - unit.start, port))
            else:
                if (src, port) not in unit.ins:
                    unit.ins.append((src, port))
                wiring.append(("port", unit.ins.index((src, port))))
        fixed = []
        for key, value in sorted(b.settings.items()):
            if type(value) is int:
                unit.values[(k, key)] = value
                fixed.append((key, "#"))
            else:
                fixed.append((key, repr(value)))
        items.append((b.kind, tuple(fixed), tuple(wiring)))
        for dst, port, _ in readers.get(i, []):
            if not unit.start <= dst < unit.stop and (i, port) not in unit.outs:
                unit.outs.append((i, port))
    unit.outs.sort()
    outs = tuple((i - unit.start, port) for i, port in unit.outs)
    return unit.cls, tuple(items), len(unit.ins), outs


def _parameters(blocks, units: list[Unit]) -> dict[str, list[tuple[int, str]]]:
    """Whole-number settings that differ between units, one parameter per distinct value pattern."""
    patterns: dict[tuple, list[tuple[int, str]]] = {}
    for where in units[0].values:
        pattern = tuple(u.values[where] for u in units)
        if len(set(pattern)) > 1:
            patterns.setdefault(pattern, []).append(where)
    params, taken = {}, set()
    for places in patterns.values():
        k, key = places[0]
        inner = local_name(blocks[units[0].start + k].name, units[0].path)
        name = _identifier(f"{inner}_{key}", taken)
        params[name] = places
    return params


def _stacked(blocks, units: list[Unit], readers) -> list[Unit]:
    """Consecutive alike units fed one into the next, with equal values and a kept shape, as one
    unit with repeat × N."""
    out: list[Unit] = []
    for u in units:
        last = out[-1] if out else None
        if (last is not None and len(u.ins) == len(last.outs) == len(u.outs) == 1 and u.values == last.values
                and u.ins[0] == last.last.outs[0] and blocks[last.outs[0][0]].shape == blocks[last.ins[0][0]].shape
                and all(u.start <= dst < u.stop for dst, _, _ in readers.get(last.last.outs[0][0], []))):
            last.copies.append(u)
            continue
        out.append(u)
    return out


def local_name(name: str, path: str) -> str:
    """A block's name inside its unit: ``layer1_0_conv1`` in unit ``layer1.0`` → ``conv1``."""
    prefix = path.replace(".", "_") + "_"
    return name[len(prefix):] if path and name.startswith(prefix) and len(name) > len(prefix) else name


def _motif_name(cls: str | None, taken: set[str]) -> str:
    stem = re.sub(r"(?<=[a-z0-9])(?=[A-Z])", "_", cls).lower() if cls else "unit"
    return _identifier(stem, taken)


def _identifier(text: str, taken: set[str]) -> str:
    stem = re.sub(r"\W+", "_", text).strip("_") or "p"
    return unique(stem if not stem[0].isdigit() else "p_" + stem, taken)


def unique(name: str, taken: set[str]) -> str:
    """``name``, or ``name_2``, ``name_3``, … the first not in ``taken``; added to ``taken``."""
    out, n = name, 1
    while out in taken:
        n += 1
        out = f"{name}_{n}"
    taken.add(out)
    return out
