"""The design: a network as blocks and wires, its motifs, batch size, element type and notes.

Scripts build a design in a few lines::

    >>> from layerloom import Design
    >>> d = Design("doorbell-person-detector")
    >>> x = d.input(3, 96, 96)
    >>> x = d.add("Conv2d", x, out_channels=16, kernel=3, stride=2, padding=1)
    >>> x = d.add("Pointwise", x, out_channels=32)
    >>> _ = d.add("Output", x)
    >>> d.ledger().totals.macs
    2174976

Every change is an :class:`~layerloom.core.edits.Edit` applied by :meth:`Design.apply`, which
returns its inverse and tells subscribers what changed (once per :meth:`Design.bulk`).
"""
from __future__ import annotations

from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any, Callable

from layerloom.core import edits
from layerloom.core.graph import Graph
from layerloom.core.values import quote

DTYPES = {"fp32": 4, "fp16": 2, "bf16": 2, "int8": 1}
MAX_BATCH = 65_536  # the largest batch a file holds (resources/loom.schema.json)
"""Element types for memory figures, with bytes per element."""


@dataclass
class Change:
    """What one applied edit (or one batch of them) changed."""

    dirty: dict[str, set[str]] = field(default_factory=dict)  # graph key → blocks whose settings or inputs changed
    topology: set[str] = field(default_factory=set)  # graph keys whose blocks or wires changed
    moved: dict[str, set[str]] = field(default_factory=dict)
    renamed: dict[str, set[str]] = field(default_factory=dict)
    fields: set[str] = field(default_factory=set)  # design-wide fields
    motifs: set[str] = field(default_factory=set)  # motifs defined or removed

    def note(self, op) -> None:
        if isinstance(op, (edits.AddBlock, edits.RemoveBlock)):
            self.topology.add(op.graph)
            self.dirty.setdefault(op.graph, set()).add(op.id)
        elif isinstance(op, (edits.AddWire, edits.RemoveWire)):
            self.topology.add(op.graph)
            self.dirty.setdefault(op.graph, set()).add(op.wire.dst)
        elif isinstance(op, edits.SetBlock):
            target = {"settings": self.dirty, "name": self.renamed, "position": self.moved}[op.attribute]
            target.setdefault(op.graph, set()).add(op.id)
        elif isinstance(op, edits.SetField):
            self.fields.add(op.name)
        else:
            self.motifs.add(op.name)

    def merge(self, other: "Change") -> None:
        for mine, theirs in ((self.dirty, other.dirty), (self.moved, other.moved), (self.renamed, other.renamed)):
            for key, ids in theirs.items():
                mine.setdefault(key, set()).update(ids)
        self.topology |= other.topology
        self.fields |= other.fields
        self.motifs |= other.motifs

    @property
    def reinfers(self) -> bool:
        """True when shapes, findings or costs may differ (a budget or target edit changes the budget
        findings and the latency). A move never re-infers; a rename refreshes only the findings that
        name the block."""
        return bool(self.dirty or self.topology or self.motifs or self.renamed
                    or self.fields & {"batch", "dtype", "budget", "target"})


class Motif(Graph):
    """A named sub-network defined once in a design and used by ``Motif`` blocks.

    Its Input blocks are its input ports and its Output blocks its output ports, in the order they
    were added. ``params`` maps parameter names to default values; an inner block setting written
    ``{"param": "width"}`` takes the value each instance gives (or the default).
    """

    def __init__(self, name: str, params: dict[str, int], design: "Design"):
        super().__init__()
        self.key = self.name = name
        self.params = params
        self._owner = design

    def _design(self) -> "Design":
        return self._owner

    def input(self, name: str | None = None) -> str:
        """Add an input port (an Input block whose shape comes from the instance's wire)."""
        return self.add("Input", name=name)

    def ports(self) -> tuple[list[str], list[str]]:
        """Ids of the Input blocks (input ports) and Output blocks (output ports), in order."""
        ins = [b.id for b in self.blocks.values() if b.kind == "Input"]
        outs = [b.id for b in self.blocks.values() if b.kind == "Output"]
        return ins, outs


class Design(Graph):
    """A whole network design; see the module docstring for a scripting example."""

    def __init__(self, name: str = "untitled", batch: int = 1, dtype: str = "fp32", notes: str = ""):
        super().__init__()
        if dtype not in DTYPES:
            raise ValueError(f"element type {quote(dtype)} is not one of {', '.join(DTYPES)}")
        self.name, self.batch, self.dtype, self.notes = name, batch, dtype, notes
        self.motifs: dict[str, Motif] = {}
        self.budget: dict = {}  # limits, see layerloom.core.budget
        self.target = None  # a layerloom.core.targets.Target for latency estimates, or None
        self.baseline: dict | None = None  # a pinned ledger, see layerloom.core.baseline
        self.measurement = None  # the last layerloom.core.measurement.Measurement, or None
        self._listeners: list[Callable[[Change], None]] = []
        self._pending: Change | None = None
        self._analysis = None

    # ----- graphs
    def _design(self) -> "Design":
        return self

    def graph(self, key: str = "") -> Graph:
        """The design itself for ``""``, else the motif named ``key``."""
        if not key:
            return self
        try:
            return self.motifs[key]
        except KeyError:
            raise KeyError(f"no motif named {quote(key)}") from None

    def _insert_motif(self, name: str, params: dict) -> None:
        if not name or name in self.motifs:
            raise ValueError(f"motif name {quote(name)} is empty or already used")
        self.motifs[name] = Motif(name, params, self)

    def _delete_motif(self, name: str) -> Motif:
        if self.motifs[name].blocks:
            raise ValueError(f"motif {quote(name)} still has blocks")
        return self.motifs.pop(name)

    # ----- builder API
    def input(self, channels: int = 3, height: int = 224, width: int = 224, name: str | None = None) -> str:
        """Add an Input block carrying the input shape C×H×W; returns its id."""
        return self.add("Input", name=name, channels=channels, height=height, width=width)

    def motif(self, name: str, **params: int) -> Motif:
        """Define an empty motif with parameters (name → default) and return it to build in."""
        self.apply(edits.Edit(f"New motif {name}", (edits.AddMotif(name, dict(params)),)))
        return self.motifs[name]

    def use(self, motif: str, *inputs, repeat: int = 1, name: str | None = None, **params: int) -> str:
        """Add an instance of ``motif`` wired from ``inputs``, stacked ``repeat`` times."""
        return self.add("Motif", *inputs, name=name or self.fresh_name(motif), motif=motif, repeat=repeat, **params)

    def set_field(self, name: str, value: Any) -> None:
        """Change a design-wide field (``batch``, ``dtype``, ``name``, ``notes``, ``budget``,
        ``target``, ``baseline``, ``measurement``) as one edit."""
        self.apply(self.field_edit(name, value))

    def field_edit(self, name: str, value: Any) -> edits.Edit:
        """The edit that sets a design-wide field, checked first (:class:`EditError` naming the value)."""
        if name == "budget":
            from layerloom.core.budget import check_budget

            try:
                value = check_budget(value)
            except ValueError as e:
                raise edits.EditError(str(e)) from None
        if name not in ("name", "batch", "dtype", "notes", "budget", "target", "baseline", "measurement"):
            raise edits.EditError(f"a design has no field {quote(name)}")
        if name == "dtype" and value not in DTYPES:
            raise edits.EditError(f"element type {quote(value)} is not one of {', '.join(DTYPES)}")
        if name == "batch" and (not isinstance(value, int) or isinstance(value, bool) or not 1 <= value <= MAX_BATCH):
            raise edits.EditError(f"batch size must be a whole number from 1 to {MAX_BATCH:,}, not {quote(value)}")
        if name == "name" and (not isinstance(value, str) or not value.strip()):
            raise edits.EditError("a design needs a name")
        return edits.Edit(f"Set {name}", (edits.SetField(name, value),))

    # ----- changes
    def apply(self, edit: edits.Edit) -> edits.Edit:
        """Perform ``edit``; return the edit that undoes it. On failure nothing changes."""
        done = []
        try:
            for op in edit.ops:
                done.append(op.apply(self))
        except (ValueError, KeyError) as e:
            for inverse in reversed(done):
                inverse.apply(self)
            raise edits.EditError(f"{edit.label}: {e}") from None
        change = Change()
        for op in edit.ops:
            change.note(op)
        self._emit(change)
        return edits.Edit(edit.label, tuple(reversed(done)))

    def fill(self, graph: str, blocks: dict, wires: dict) -> None:
        """Put checked blocks (by id) and the wires between them into the empty graph ``graph`` at
        once, as reading a file does: no inverse is kept (a load is not undone), and subscribers
        hear of one change."""
        self.graph(graph)._adopt(blocks, wires)
        self._emit(Change(dirty={graph: set(blocks)}, topology={graph}))

    def subscribe(self, listener: Callable[[Change], None]) -> Callable[[], None]:
        """Call ``listener(change)`` after each edit or batch; returns a function that unsubscribes."""
        self._listeners.append(listener)
        return lambda: self._listeners.remove(listener)

    @contextmanager
    def bulk(self):
        """Group many edits (a load, a paste) so subscribers hear of them once, at the end."""
        outer = self._pending is not None
        if not outer:
            self._pending = Change()
        try:
            yield
        finally:
            if not outer:
                change, self._pending = self._pending, None
                self._emit(change)

    def _emit(self, change: Change) -> None:
        if self._pending is not None and change is not self._pending:
            self._pending.merge(change)
            return
        for listener in list(self._listeners):
            listener(change)

    # ----- results
    def analysis(self):
        """The live :class:`~layerloom.core.inference.Analysis` of this design (kept up to date
        incrementally as the design changes)."""
        if self._analysis is None:
            from layerloom.core.inference import Analysis

            self._analysis = Analysis(self)
        return self._analysis

    def findings(self):
        """All findings, errors first."""
        return self.analysis().all_findings()

    def ledger(self):
        """The cost :class:`~layerloom.core.ledger.Ledger` of the design as it is now."""
        from layerloom.core.ledger import Ledger

        return Ledger(self.analysis())
