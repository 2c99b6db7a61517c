"""File ▸ Import… (a PyTorch module or an ONNX file as a new design) and File ▸ Export ▸ ONNX file….

torch and onnx are imported only when one of these runs (never at start-up); an import runs in a
worker thread, so the editor stays live while a large module is traced. The import dialog
lists the ``nn.Module`` classes and functions a Python file defines by reading its text (nothing
runs until Import is pressed) and says in one line that importing runs the file's code.
"""
from __future__ import annotations

import ast
import json
from dataclasses import dataclass
from pathlib import Path

from PySide6.QtCore import QObject, Qt, QThread, Signal, Slot
from PySide6.QtWidgets import (QApplication, QComboBox, QDialog, QDialogButtonBox, QFileDialog, QFormLayout,
                               QHBoxLayout, QLabel, QLineEdit, QPushButton, QVBoxLayout)
from shiboken6 import isValid

SOURCE_FILTER = "PyTorch source or ONNX file (*.py *.onnx)"


@dataclass(frozen=True)
class ImportRequest:
    """What the dialog asks for: ``source`` as the command line takes it (``FILE.py:NAME`` or ``FILE.onnx``)."""

    source: str
    input: str
    args: str


def module_names(path: str) -> list[str]:
    """Classes (those deriving from something named ``…Module``) first, then top-level functions, that
    the Python file ``path`` defines, read from its text without running it."""
    try:
        tree = ast.parse(Path(path).read_text(encoding="utf-8"))
    except (OSError, SyntaxError, ValueError):
        return []
    classes = [n.name for n in tree.body if isinstance(n, ast.ClassDef)
               and any((getattr(b, "attr", None) or getattr(b, "id", "")).endswith("Module") for b in n.bases)]
    functions = [n.name for n in tree.body if isinstance(n, ast.FunctionDef) and not n.name.startswith("_")]
    return classes + functions


class ImportDialog(QDialog):
    """Source file, class or function, input shape and keyword arguments of an import."""

    def __init__(self, parent=None, folder: str = ""):
        super().__init__(parent)
        self.setWindowTitle("Import a network")
        self.setObjectName("import_dialog")
        self.folder = folder
        self.source = QLineEdit(objectName="import_source")
        self.source.setPlaceholderText("model.py or model.onnx")
        choose = QPushButton("Choose…", objectName="import_choose")
        choose.clicked.connect(self._choose)
        row = QHBoxLayout()
        row.addWidget(self.source, 1)
        row.addWidget(choose)
        self.name = QComboBox(objectName="import_name")
        self.name.setEditable(True)
        self.input = QLineEdit(objectName="import_input")
        self.input.setPlaceholderText("3x224x224 (an ONNX file: its own)")
        self.args = QLineEdit(objectName="import_args")
        self.args.setPlaceholderText('{"classes": 10}')
        self.caution = QLabel(objectName="import_caution")
        self.caution.setWordWrap(True)
        form = QFormLayout()
        form.addRow("Source", row)
        form.addRow("Class or function", self.name)
        form.addRow("Input C×H×W", self.input)
        form.addRow("Keyword arguments", self.args)
        self.buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Cancel)
        self.import_button = self.buttons.addButton("Import", QDialogButtonBox.ButtonRole.AcceptRole)
        self.import_button.setObjectName("import_go")
        self.buttons.accepted.connect(self.accept)
        self.buttons.rejected.connect(self.reject)
        column = QVBoxLayout(self)
        column.addLayout(form)
        column.addWidget(self.caution)
        column.addWidget(self.buttons)
        self.source.textChanged.connect(self._source_changed)
        self.name.currentTextChanged.connect(self._refresh)
        self.resize(560, self.sizeHint().height())
        self._source_changed()

    def _choose(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Import a network", self.folder, SOURCE_FILTER)
        if path:
            self.source.setText(path)

    def _source_changed(self) -> None:
        text = self.source.text().strip()
        python = text.endswith(".py")
        self.name.clear()
        if python:
            self.name.addItems(module_names(text))
        self.name.setEnabled(python)
        self.args.setEnabled(python)
        self._refresh()

    def _refresh(self) -> None:
        from layerloom.importing.source import runs_code

        request = self.request()
        caution = runs_code(request.source) if request else None
        self.caution.setText(caution or "")
        self.caution.setVisible(bool(caution))
        self.import_button.setEnabled(request is not None)

    def request(self) -> ImportRequest | None:
        """What to import, or None while the source (or, for a .py file, the name) is missing."""
        text = self.source.text().strip()
        if not text:
            return None
        if text.endswith(".py"):
            name = self.name.currentText().strip()
            if not name:
                return None
            text = f"{text}:{name}"
        return ImportRequest(text, self.input.text().strip(), self.args.text().strip())


def import_into(window) -> ImportDialog:
    """Open the import dialog over ``window``; on Import, the network replaces its design (unsaved)."""
    folder = str(window.document.path.parent) if window.document.path else ""
    dialog = ImportDialog(window, folder)
    dialog.accepted.connect(lambda: run_import(window, dialog.request()))
    dialog.open()
    return dialog


class ImportWorker(QObject):
    """Runs one import in a worker thread (the editor stays live); signals carry the result or why not."""

    finished = Signal(object)  # Imported
    failed = Signal(str)

    def __init__(self, request: ImportRequest, shape, args: dict):
        super().__init__()
        self.request, self.shape, self.args = request, shape, args

    def run(self) -> None:
        from layerloom.importing import ImportFailed, import_source

        try:
            imported = import_source(self.request.source, self.shape, self.args)
        except (ImportFailed, ModuleNotFoundError) as e:
            self.failed.emit(str(e))
        except Exception as e:  # noqa: BLE001 — never leave the editor waiting on a thread that died
            self.failed.emit(f"{self.request.source}: import stopped on {type(e).__name__}: {e}")
        else:
            self.finished.emit(imported)


class ImportOutcome(QObject):
    """Takes an import's end in the editor's thread: a plain function connected to the worker's
    signals would run in the worker's thread and touch the window from there."""

    def __init__(self, window, request: ImportRequest):
        super().__init__(QApplication.instance())  # not the window's child: it may close first
        self.window, self.request = window, request

    @Slot(object)
    def imported(self, imported) -> None:
        if isValid(self.window):
            _imported(self.window, self.request, imported)

    @Slot(str)
    def failed(self, message: str) -> None:
        if isValid(self.window):
            self.window.prompts.error("Not imported", message)

    @Slot()
    def ended(self) -> None:
        self.window.import_job = None  # a Python attribute: fine even when the window is gone
        self.deleteLater()


def run_import(window, request: ImportRequest) -> bool:
    """Start importing ``request`` into ``window``'s document in a worker thread; False when it did not
    start (a bad input shape or arguments, said in a dialog, or unsaved changes kept)."""
    from layerloom.core.shapes import parse_shape

    try:
        shape = parse_shape(request.input) if request.input else None
        args = json.loads(request.args) if request.args else {}
        if not isinstance(args, dict):
            raise ValueError(f"keyword arguments must be a JSON object such as {{\"classes\": 10}}, not {request.args}")
    except ValueError as e:
        window.prompts.error("Not imported", str(e))
        return False
    if not window.files.confirm_discard():
        return False
    app = QApplication.instance()
    thread, worker = QThread(app), ImportWorker(request, shape, args)  # not the window's: it may close first
    worker.moveToThread(thread)
    thread.started.connect(worker.run)
    outcome = ImportOutcome(window, request)
    worker.finished.connect(outcome.imported)
    worker.failed.connect(outcome.failed)
    for signal in (worker.finished, worker.failed):  # directly: the GUI thread may be waiting in aboutToQuit
        signal.connect(thread.quit, Qt.ConnectionType.DirectConnection)
    thread.finished.connect(outcome.ended)
    thread.finished.connect(thread.deleteLater)
    app.aboutToQuit.connect(thread.wait)  # never end the process under a running import
    window.import_job = (thread, worker)  # kept alive until the thread ends
    window.statusBar().showMessage(f"Importing {request.source}…")
    thread.start()
    return True


def _imported(window, request: ImportRequest, imported) -> None:
    window.document.set_design(imported.design)
    window.document.undo_stack.resetClean()  # an imported design is unsaved work
    unmapped = imported.unmapped
    window.say(f"Imported {Path(request.source.rpartition(':')[0] or request.source).name}: "
               f"{len(imported.design.blocks)} blocks, {len(imported.design.motifs)} motifs"
               + (f", {len(unmapped)} unmapped (see Findings)" if unmapped else ""))


def export_onnx_file(window) -> None:
    """Write the design as an ONNX file and check it with onnxruntime; the outcome in the status bar."""
    from layerloom.export import ExportRefused, VerifyRefused
    from layerloom.export.onnx_file import check_onnx, export_onnx

    document = window.document
    stem = document.path.stem if document.path else document.design.name
    path = window.prompts.save_path("Export ONNX file", f"{stem}.onnx", "ONNX file (*.onnx)")
    if not path:
        return
    QApplication.setOverrideCursor(Qt.CursorShape.WaitCursor)
    try:
        model = export_onnx(document.design, path)
        check = check_onnx(document.design, model, path)
    except (ExportRefused, VerifyRefused, ModuleNotFoundError, OSError) as e:
        QApplication.restoreOverrideCursor()
        window.prompts.error("Not exported", str(e))
        return
    QApplication.restoreOverrideCursor()
    if not check.ok:
        window.prompts.error("ONNX file disagrees", check.text())
        return
    window.say(f"Exported {Path(path).name}: onnxruntime agrees with torch (max difference "
               f"{check.max_abs_diff:.2g}), initializers hold the ledger's weights and buffers")
