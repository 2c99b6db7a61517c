"""The design's own settings, shown in Block settings while nothing is selected: its name, batch
size, element type (fp32, fp16, bf16, int8: bytes per element for every memory figure), notes, and
a summary of its inputs.

Each accepted change is one undoable edit (:meth:`Design.field_edit` through
:meth:`Document.apply`) and is saved in the file; a refused one is said on the panel's message line
and the field shows the design's value again. Fields are set from the model with signals blocked.
"""
from __future__ import annotations

from math import prod

from PySide6.QtCore import QEvent, Qt, Signal
from PySide6.QtWidgets import QComboBox, QFormLayout, QLineEdit, QPlainTextEdit, QWidget

from layerloom.core import edits, units
from layerloom.core.design import DTYPES
from layerloom.gui.document import Document
from layerloom.gui.text_fit import WrappedLabel

DTYPE_LABELS = {"fp32": "fp32 · 4 bytes", "fp16": "fp16 · 2 bytes", "bf16": "bf16 · 2 bytes", "int8": "int8 · 1 byte"}


class DesignSettings(QWidget):
    """Name, batch, element type and notes of ``document``'s design. ``said`` carries a refusal (or
    "" when a change was taken); ``finished`` fires on Enter or Escape in a field."""

    said = Signal(str)
    finished = Signal()

    def __init__(self, document: Document, parent=None):
        super().__init__(parent)
        self.document = document
        self.name_edit = QLineEdit()
        self.name_edit.setObjectName("design_name")
        self.name_edit.setToolTip("The design's name: the file's title and the exported module's class name")
        self.batch_edit = QLineEdit()
        self.batch_edit.setObjectName("design_batch")
        self.batch_edit.setToolTip("Samples per forward pass: MACs and activation memory are counted for the batch")
        self.dtype_box = QComboBox()
        self.dtype_box.setObjectName("design_dtype")
        for key in DTYPES:
            self.dtype_box.addItem(DTYPE_LABELS.get(key, key), key)
        self.dtype_box.setToolTip("Element type of activations and weights in memory figures")
        self.notes_edit = QPlainTextEdit()
        self.notes_edit.setObjectName("design_notes")
        self.notes_edit.setPlaceholderText("What this design is for, what was tried…")
        self.notes_edit.setFixedHeight(72)
        self.notes_edit.setTabChangesFocus(True)
        self.inputs = WrappedLabel()
        self.inputs.setObjectName("design_inputs")
        self.inputs.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)

        form = QFormLayout(self)
        form.setContentsMargins(0, 0, 0, 0)
        form.setFieldGrowthPolicy(QFormLayout.FieldGrowthPolicy.AllNonFixedFieldsGrow)
        form.addRow("Name", self.name_edit)
        form.addRow("Batch", self.batch_edit)
        form.addRow("Element type", self.dtype_box)
        form.addRow("Notes", self.notes_edit)
        form.addRow("Inputs", self.inputs)

        self.name_edit.editingFinished.connect(lambda: self._commit("name", self.name_edit.text().strip()))
        self.batch_edit.editingFinished.connect(lambda: self._commit("batch", _whole(self.batch_edit.text())))
        self.dtype_box.activated.connect(lambda i: self._commit("dtype", self.dtype_box.itemData(i)))
        for w in (self.name_edit, self.batch_edit, self.notes_edit, self.dtype_box):
            w.installEventFilter(self)
        document.changed.connect(lambda change: self.isVisible() and self.refresh())

    def refresh(self) -> None:
        """Show the design's fields as the model has them now."""
        d = self.document.design
        for w, set_value in ((self.name_edit, lambda: self.name_edit.setText(d.name)),
                             (self.batch_edit, lambda: self.batch_edit.setText(str(d.batch))),
                             (self.dtype_box, lambda: self.dtype_box.setCurrentIndex(self.dtype_box.findData(d.dtype))),
                             (self.notes_edit, lambda: self._show_notes(d.notes))):
            w.blockSignals(True)
            set_value()
            w.blockSignals(False)
        self.inputs.setText(self._inputs_text())

    def _show_notes(self, notes: str) -> None:
        if self.notes_edit.toPlainText() != notes:
            self.notes_edit.setPlainText(notes)

    def _inputs_text(self) -> str:
        d = self.document.design
        ins = d.of_kind("Input")
        if not ins:
            return "none: add an Input block"
        analysis, lines = d.analysis(), []
        for b in ins:
            shape = analysis.shape(b.id)
            if shape is None:
                lines.append(f"{b.name}: shape unknown")
                continue
            memory = units.size(prod(shape) * d.batch * DTYPES[d.dtype])
            lines.append(f"{b.name}: {shape} ({memory} for batch {d.batch} at {d.dtype})")
        return "\n".join(lines)

    def _commit(self, name: str, value) -> None:
        d = self.document.design
        if getattr(d, name) == value:
            self.refresh()
            return
        try:
            self.document.apply(d.field_edit(name, value))
        except edits.EditError as e:
            self.said.emit(f"{e} — kept {getattr(d, name)}")
            self.refresh()
            return
        self.said.emit("")

    def eventFilter(self, obj, event) -> bool:
        """Enter commits and Escape restores; both hand the keys back (``finished``). In the notes,
        Enter is a new line and Ctrl+Enter or leaving the field commits."""
        if event.type() == QEvent.Type.KeyPress:
            key = event.key()
            if key == Qt.Key.Key_Escape:
                self.refresh()
                self.finished.emit()
                return True
            if key in (Qt.Key.Key_Return, Qt.Key.Key_Enter):
                if obj is self.notes_edit and not event.modifiers() & Qt.KeyboardModifier.ControlModifier:
                    return False
                if obj is self.notes_edit:
                    self._commit("notes", self.notes_edit.toPlainText())
                elif obj is self.name_edit or obj is self.batch_edit:
                    obj.editingFinished.emit()
                self.finished.emit()
                return True
        elif event.type() == QEvent.Type.FocusOut and obj is self.notes_edit:
            self._commit("notes", self.notes_edit.toPlainText())
        return super().eventFilter(obj, event)


def _whole(text: str):
    """``"8"`` → 8; anything else stays text, so the check names it."""
    try:
        return int(text.strip())
    except ValueError:
        return text.strip()
