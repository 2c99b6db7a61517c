"""The open document: a design, its file, its undo stack, the graph shown and the selection, as Qt signals.

Widgets never change the design directly: they build a core :class:`~layerloom.core.edits.Edit`
and call :meth:`Document.apply`, which performs it once (so a refused edit raises before anything
is recorded) and records it on the undo stack as one step.

The canvas and Block settings show one graph: the design (key ``""``) or a motif opened from it
(its name). :attr:`Document.trail` is the way in, the design first; ``graph_changed`` fires when it
changes. Inside a motif, shapes and findings are those of one use of it (:meth:`Document.motif_view`).
"""
from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QObject, Signal
from PySide6.QtGui import QUndoCommand, QUndoStack

from layerloom.core.design import Change, Design
from layerloom.core.edits import Edit
from layerloom.core.findings import Finding, sort_findings
from layerloom.core.graph import Graph
from layerloom.core.motif_view import MotifView, inner_inference


class EditCommand(QUndoCommand):
    """One core edit on the undo stack; the first redo is skipped because the edit was applied."""

    def __init__(self, design: Design, edit: Edit, inverse: Edit):
        super().__init__(edit.label)
        self._design, self._edit, self._inverse = design, edit, inverse
        self._fresh = True

    def redo(self) -> None:
        if self._fresh:
            self._fresh = False
            return
        self._inverse = self._design.apply(self._edit)

    def undo(self) -> None:
        self._edit = self._design.apply(self._inverse)

    def join(self, edit: Edit, inverse: Edit) -> None:
        """Make an edit just applied after this one part of this step (undone with it)."""
        self._edit = Edit(self._edit.label, self._edit.ops + edit.ops)
        self._inverse = Edit(self._inverse.label, inverse.ops + self._inverse.ops)


class Document(QObject):
    """A design being edited. ``changed`` carries each core :class:`Change`; ``replaced`` fires
    when a different design is loaded into the document."""

    changed = Signal(object)
    replaced = Signal()
    selection_changed = Signal(list)
    path_changed = Signal()
    graph_changed = Signal()

    def __init__(self, design: Design | None = None, path: str | Path | None = None, parent=None):
        super().__init__(parent)
        self.undo_stack = QUndoStack(self)
        self.design: Design = Design()
        self.path: Path | None = None
        self.selection: list[str] = []
        self.trail: list[tuple[str, str | None]] = [("", None)]  # (graph key, instance opened to get there)
        self.use: tuple[str, ...] | None = None  # the use whose shapes show inside a motif (None: its first)
        self._view: tuple | None = None  # (key, use, analysis revision, MotifView)
        self._unsubscribe = None
        self.set_design(design if design is not None else self.new_design(), path)

    @staticmethod
    def new_design() -> Design:
        """A new design with one Input block, as the editor starts."""
        d = Design("untitled")
        d.input(3, 224, 224, name="input")
        return d

    def set_design(self, design: Design, path: str | Path | None = None) -> None:
        """Show another design (new or loaded); clears undo history and the selection (a design of
        one block, a new one, starts with it selected, so typing builds on from it)."""
        if self._unsubscribe is not None:
            self._unsubscribe()
        self.design = design
        self.path = Path(path) if path is not None else None
        design.analysis()  # subscribes the analysis before us, so `changed` listeners read fresh results
        self._unsubscribe = design.subscribe(self._on_design_change)
        self.undo_stack.clear()
        self.undo_stack.setClean()
        self.selection = list(design.blocks) if len(design.blocks) == 1 else []
        self.trail, self.use, self._view = [("", None)], None, None
        self.replaced.emit()
        self.selection_changed.emit(list(self.selection))
        self.path_changed.emit()

    def apply(self, edit: Edit) -> None:
        """Perform ``edit`` and record it as one undo step (raises, recording nothing, if refused)."""
        inverse = self.design.apply(edit)
        self.undo_stack.push(EditCommand(self.design, edit, inverse))

    def apply_in_last_step(self, edit: Edit) -> None:
        """Perform ``edit`` as part of the last undo step (a Tidy that follows a mend)."""
        last = self.undo_stack.command(self.undo_stack.index() - 1)
        if not isinstance(last, EditCommand) or self.undo_stack.index() != self.undo_stack.count():
            self.apply(edit)
            return
        last.join(edit, self.design.apply(edit))

    def _on_design_change(self, change: Change) -> None:
        """Leave a motif that an edit (an undo, most often) took away, then pass the change on."""
        keep = next((i for i, (key, _) in enumerate(self.trail) if key and key not in self.design.motifs),
                    len(self.trail))
        if keep < len(self.trail):
            self._go(self.trail[:keep], None, [])
        kept = [b for b in self.selection if b in self.graph.blocks]
        gone = kept != self.selection
        self.selection = kept  # listeners of `changed` never see a selected block that is gone
        self.changed.emit(change)
        if gone:
            self.selection_changed.emit(list(kept))

    # ----- the graph shown
    @property
    def graph_key(self) -> str:
        """``""`` while the design is shown, else the name of the motif shown."""
        return self.trail[-1][0]

    @property
    def graph(self) -> Graph:
        """The graph shown: the design or the open motif."""
        return self.design.graph(self.graph_key)

    def open_motif(self, name: str, instance: str | None = None, use: tuple[str, ...] | None = None) -> None:
        """Show motif ``name`` (entered through block ``instance`` of the graph shown, if any) with
        the shapes of ``use`` (instance ids from the design down; by default its first use)."""
        if name not in self.design.motifs:
            raise KeyError(f"no motif named {name!r}")
        self._go(self.trail + [(name, instance)], use, [])

    def show_path(self, keys: list[str], use: tuple[str, ...] | None = None, select: list[str] = ()) -> None:
        """Show the graph at the end of ``keys`` (motif names from the design down) and select ``select`` there."""
        self._go([("", None)] + [(k, None) for k in keys if k], use, list(select))

    def back(self, steps: int = 1) -> None:
        """Go ``steps`` graphs back along the trail, selecting the instance that was opened."""
        steps = min(steps, len(self.trail) - 1)
        if steps <= 0:
            return
        came_through = self.trail[len(self.trail) - steps][1]
        self._go(self.trail[:-steps], None, [came_through] if came_through else [])

    def _go(self, trail: list, use, select: list[str]) -> None:
        self.trail, self.use, self._view = trail, use if len(trail) > 1 else None, None
        self.selection = [b for b in select if b in self.graph.blocks]
        self.graph_changed.emit()
        self.selection_changed.emit(list(self.selection))

    def motif_view(self) -> MotifView | None:
        """The open motif inferred as in its use (None while the design is shown); remembered until
        the next change that re-infers."""
        key = self.graph_key
        if not key:
            return None
        revision = self.design.analysis().refresh().revision
        if self._view is None or self._view[:3] != (key, self.use, revision):
            self._view = (key, self.use, revision, inner_inference(self.design, key, self.use))
        return self._view[3]

    def results(self) -> dict:
        """Inference results of the graph shown, by block id (None where unknown)."""
        view = self.motif_view()
        return view.inference.results if view is not None else self.design.analysis().refresh().top.results

    def findings_by_block(self) -> dict[str, list[Finding]]:
        """Findings of the graph shown by block id (``""`` for the graph's own), worst first."""
        view = self.motif_view()
        if view is None:
            found = self.design.analysis().all_findings()
        else:
            found = sort_findings([f for fs in view.inference.findings.values() for f in fs]
                                  + view.inference.graph_findings)
        by_block: dict[str, list[Finding]] = {}
        for f in found:
            by_block.setdefault(f.block, []).append(f)
        return by_block

    def select(self, block_ids: list[str]) -> None:
        ids = [b for b in dict.fromkeys(block_ids) if b in self.graph.blocks]
        if ids != self.selection:
            self.selection = ids
            self.selection_changed.emit(ids)

    @property
    def modified(self) -> bool:
        return not self.undo_stack.isClean()

    def mark_saved(self, path: str | Path) -> None:
        self.path = Path(path)
        self.undo_stack.setClean()
        self.path_changed.emit()


__all__ = ["Document", "EditCommand", "Change"]
