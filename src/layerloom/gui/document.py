"""The open document: a design, its file, its undo stack and the selection, as Qt signals.

Widgets never change the design directly: they build a core :class:`~layerloom.core.edits.Edit`
and call :meth:`Document.apply`, which performs it once (so a refused edit raises before anything
is recorded) and records it on the undo stack as one step.
"""
from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QObject, Signal
from PySide6.QtGui import QUndoCommand, QUndoStack

from layerloom.core.design import Change, Design
from layerloom.core.edits import Edit


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


class Document(QObject):
    """A design being edited. ``changed`` carries each core :class:`Change`; ``replaced`` fires
    when a different design is loaded into the document."""

    changed = Signal(object)
    replaced = Signal()
    selection_changed = Signal(list)
    path_changed = Signal()

    def __init__(self, design: Design | None = None, path: str | Path | None = None, parent=None):
        super().__init__(parent)
        self.undo_stack = QUndoStack(self)
        self.design: Design = Design()
        self.path: Path | None = None
        self.selection: list[str] = []
        self._unsubscribe = None
        self.set_design(design if design is not None else self.new_design(), path)

    @staticmethod
    def new_design() -> Design:
        """A new design with one Input block, as the editor starts."""
        d = Design("untitled")
        d.input(3, 224, 224, name="input")
        return d

    def set_design(self, design: Design, path: str | Path | None = None) -> None:
        """Show another design (new or loaded); clears undo history and selection."""
        if self._unsubscribe is not None:
            self._unsubscribe()
        self.design = design
        self.path = Path(path) if path is not None else None
        design.analysis()  # subscribes the analysis before us, so `changed` listeners read fresh results
        self._unsubscribe = design.subscribe(self.changed.emit)
        self.undo_stack.clear()
        self.undo_stack.setClean()
        self.selection = []
        self.replaced.emit()
        self.selection_changed.emit([])
        self.path_changed.emit()

    def apply(self, edit: Edit) -> None:
        """Perform ``edit`` and record it as one undo step (raises, recording nothing, if refused)."""
        inverse = self.design.apply(edit)
        self.undo_stack.push(EditCommand(self.design, edit, inverse))

    def select(self, block_ids: list[str]) -> None:
        ids = [b for b in dict.fromkeys(block_ids) if b in self.design.blocks]
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
