"""The editor window: the canvas in the middle (with the trail above it while a motif is open), the
shelf (Parts, Findings) along its bottom edge, Block settings and the Depth ledger in the right
column, menus, and a status bar with the design's totals.

``launch(files)`` is what ``layerloom [FILE]`` runs.
"""
from __future__ import annotations

import sys
from pathlib import Path

from PySide6.QtCore import QSettings, Qt, QTimer
from PySide6.QtGui import QAction, QIcon, QKeySequence
from PySide6.QtWidgets import (QApplication, QDockWidget, QLabel, QMainWindow, QPushButton, QToolTip, QVBoxLayout,
                               QWidget)

from layerloom.core import units
from layerloom.core.ledger import Ledger
from layerloom.core.values import one_line
from layerloom.gui import theme
from layerloom.gui.block_settings import BlockSettings
from layerloom.gui.canvas import CanvasView
from layerloom.gui.document import Document
from layerloom.gui.files import FileKeeper, Prompts
from layerloom.gui import interchange
from layerloom.gui.graph_trail import GraphTrail
from layerloom.gui.measure_actions import open_fit, open_measure
from layerloom.gui.shelf import Shelf
from layerloom.resource_paths import resource

ORGANISATION, APPLICATION = "Layerloom Workshop", "Layerloom"
APP_ICON = "icons/layerloom.svg"
STYLE_SHEET = "style.qss"
SETTINGS_WIDTH, SHELF_HEIGHT = 380, 215  # first-run sizes of the right column and the shelf, in pixels
SETTINGS_SHARE = 0.48  # first-run share of the right column's height for Block settings (the Depth ledger below)
FOLD_SETTING = "view/fold"
Key = QKeySequence.StandardKey


def house_settings() -> QSettings:
    """Where the editor keeps its window layout and recent files between runs."""
    return QSettings(ORGANISATION, APPLICATION)


class MainWindow(QMainWindow):
    """One window editing one design. ``prompts``, ``settings`` and ``scratch_dir`` (where an unsaved
    design's autosave goes) can be given, as tests do; otherwise the user's own are used."""

    def __init__(self, files: list[str] = (), *, prompts: Prompts | None = None, settings: QSettings | None = None,
                 scratch_dir: str | Path | None = None):
        super().__init__()
        self.setObjectName("main_window")
        self.setWindowIcon(QIcon(str(resource(APP_ICON))))
        self.setStyleSheet(resource(STYLE_SHEET).read_text(encoding="utf-8"))
        QToolTip.setPalette(theme.tooltip_palette())  # hover texts are windows of their own: no style sheet
        self.settings = settings if settings is not None else house_settings()
        self.document = Document(parent=self)
        self.prompts = prompts if prompts is not None else Prompts(self)
        self.files = FileKeeper(self.document, self.prompts, self.settings, scratch_dir, parent=self)

        self.canvas = CanvasView(self.document)
        self.trail = GraphTrail(self.document)
        middle = QWidget()
        column = QVBoxLayout(middle)
        column.setContentsMargins(0, 0, 0, 0)
        column.setSpacing(0)
        column.addWidget(self.trail)
        column.addWidget(self.canvas, 1)
        self.setCentralWidget(middle)
        self.shelf = Shelf(self.document)
        self.block_settings = BlockSettings(self.document)
        self.canvas.ask_name = self.block_settings.ask_name = self.prompts.ask_name
        self.shelf_dock = self._dock("Shelf", "shelf_dock", self.shelf, Qt.DockWidgetArea.BottomDockWidgetArea)
        self.shelf_dock.setTitleBarWidget(QLabel())  # the tabs say what it is
        self.settings_dock = self._dock("Block settings", "block_settings_dock", self.block_settings,
                                        Qt.DockWidgetArea.RightDockWidgetArea)
        from layerloom.gui.depth_ledger import DepthLedger  # pyqtgraph, after QApplication exists

        self.depth_ledger = DepthLedger(self.document)
        self.ledger_dock = self._dock("Depth ledger", "depth_ledger_dock", self.depth_ledger,
                                      Qt.DockWidgetArea.RightDockWidgetArea)
        self.splitDockWidget(self.settings_dock, self.ledger_dock, Qt.Orientation.Vertical)
        self.depth_ledger.block_activated.connect(self._show_design_block)
        self.setCorner(Qt.Corner.BottomRightCorner, Qt.DockWidgetArea.RightDockWidgetArea)
        self.setDockNestingEnabled(True)
        self.resize(1400, 860)  # first run; a saved geometry replaces it below
        self.shelf.findings.block_chosen.connect(self.canvas.center_on)
        self.shelf.findings.mend_applier = self.canvas.apply_mend
        self.canvas.message.connect(self.say)
        self.canvas.settings_wanted.connect(self._settings_wanted)
        self.block_settings.finished.connect(self.canvas.setFocus)
        self.depth_ledger.remember_choices(self.settings)

        self._build_status_bar()
        self._build_menus()
        self.document.changed.connect(self._on_change)
        self.document.replaced.connect(self._refresh_totals)
        self.document.path_changed.connect(self._refresh_title)
        self.document.undo_stack.cleanChanged.connect(self._refresh_title)
        self.files.said.connect(self.say)
        self.files.recent_changed.connect(self._fill_recent)

        self.restoreGeometry(self.settings.value("window/geometry", b""))
        self._first_run = not self.restoreState(self.settings.value("window/state", b""))
        self._shown_once = False
        self.files.start(list(files))
        self._refresh_title()
        self._refresh_totals()
        self.shelf.parts.remember_folds(self.settings)
        self.canvas.setFocus()  # typing starts Quick add at once

    def _dock(self, title: str, name: str, widget, area) -> QDockWidget:
        dock = QDockWidget(title, self)
        dock.setObjectName(name)
        dock.setWidget(widget)
        dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable
                         | QDockWidget.DockWidgetFeature.DockWidgetClosable)
        self.addDockWidget(area, dock)
        return dock

    # ----- menus
    def _action(self, menu, text: str, slot, shortcut=None, name: str | None = None) -> QAction:
        action = QAction(text, self)
        if shortcut is not None:
            action.setShortcut(QKeySequence(shortcut))
        action.triggered.connect(slot)
        action.setObjectName(name or text.lower().replace("…", "").replace(" ", "_"))
        menu.addAction(action)
        return action

    def _build_menus(self) -> None:
        bar, c, f = self.menuBar(), self.canvas, self.files
        file_menu = bar.addMenu("&File")
        self._action(file_menu, "New", f.new, Key.New)
        self._action(file_menu, "Open…", f.open, Key.Open)
        self.recent_menu = file_menu.addMenu("Open recent")
        self._fill_recent()
        file_menu.addSeparator()
        self._action(file_menu, "Save", f.save, Key.Save)
        self._action(file_menu, "Save as…", f.save_as, Key.SaveAs)
        self._action(file_menu, "Import…", lambda: interchange.import_into(self), name="import")
        export = file_menu.addMenu("Export")
        self._action(export, "PyTorch module…", self.export_module, name="export_module")
        self._action(export, "ONNX file…", lambda: interchange.export_onnx_file(self), name="export_onnx")
        self._action(export, "Canvas as PNG…", lambda: self.export_picture("png"), name="export_png")
        self._action(export, "Canvas as SVG…", lambda: self.export_picture("svg"), name="export_svg")
        file_menu.addSeparator()
        self._action(file_menu, "Quit", self.close, Key.Quit)

        edit = bar.addMenu("&Edit")
        stack = self.document.undo_stack
        for action, key in ((stack.createUndoAction(self, "Undo"), Key.Undo),
                            (stack.createRedoAction(self, "Redo"), Key.Redo)):
            action.setShortcut(QKeySequence(key))
            edit.addAction(action)
        edit.addSeparator()
        self._action(edit, "Copy", c.copy, Key.Copy)
        self._action(edit, "Paste", c.paste, Key.Paste)
        self._action(edit, "Duplicate", c.duplicate, "Ctrl+D")
        self._action(edit, "Delete", lambda: c.delete_selection(bridge=True), Key.Delete)
        self._action(edit, "Delete without bridging", lambda: c.delete_selection(bridge=False), "Shift+Del",
                     name="delete_unbridged")
        self._action(edit, "Select all", c.select_all, Key.SelectAll)
        self._action(edit, "Rename block", c.rename_selected, "F2", name="rename")
        edit.addSeparator()
        self._action(edit, "Quick add…", lambda: c.quick_add(), "Ctrl+K", name="quick_add")
        self._action(edit, "Wire into selection from…", c.wire_into_selection, "Ctrl+I", name="wire_into")

        motif = bar.addMenu("&Motif")
        self._action(motif, "Make motif…", lambda: c.make_motif(), "Ctrl+G", name="make_motif")
        self._action(motif, "Open motif", lambda: c.open_motif(), "Ctrl+E", name="open_motif")
        self._action(motif, "Expand motif", c.expand_motif, "Ctrl+Shift+G", name="expand_motif")
        self._action(motif, "Back", lambda: self.document.back(), "Alt+Left", name="motif_back")

        view = bar.addMenu("&View")
        self._action(view, "Zoom in", c.zoom_in, Key.ZoomIn)
        self._action(view, "Zoom out", c.zoom_out, Key.ZoomOut)
        self._action(view, "Fit to view", c.fit_all, "Ctrl+0")
        self._action(view, "Actual size (100 %)", c.actual_size, "Ctrl+1", name="actual_size")
        self._action(view, "Zoom to selection", c.zoom_to_selection, "Ctrl+2", name="zoom_to_selection")
        fold = self._action(view, "Fold norm and activation into cards", c.set_fold, name="fold")
        fold.setCheckable(True)
        self._remember_fold(fold)
        self._action(view, "Tidy", c.tidy, "Ctrl+L")
        view.addSeparator()
        view.addAction(self.shelf_dock.toggleViewAction())
        view.addAction(self.settings_dock.toggleViewAction())
        view.addAction(self.ledger_dock.toggleViewAction())

        design = bar.addMenu("&Design")
        self._action(design, "Budget and target…", self.edit_budget, name="budget")
        self._action(design, "Pin as baseline", self.depth_ledger.pin_baseline, name="pin_baseline")
        self._action(design, "Baseline from another design…", lambda: self.depth_ledger.baseline_from_file(),
                     name="baseline_from_file")
        self._action(design, "Clear baseline", self.depth_ledger.clear_baseline, name="clear_baseline")
        self._action(design, "Export ledger as CSV…", lambda: self.depth_ledger.export_csv(), name="export_csv")
        design.addSeparator()
        self._action(design, "Measure on this machine…", lambda: open_measure(self), name="measure")
        self._action(design, "Fit to budget…", lambda: open_fit(self), name="fit_to_budget")
        self.shelf_dock.toggleViewAction().setText("Shelf (Parts, Findings)")

    def _remember_fold(self, action: QAction) -> None:
        """Start with Fold as last chosen (kept in the settings; on the first run) and keep each change."""
        on = self.settings.value(FOLD_SETTING, True, type=bool)
        self.canvas.set_fold(on)
        action.setChecked(on)
        action.toggled.connect(lambda checked: self.settings.setValue(FOLD_SETTING, checked))

    def _fill_recent(self) -> None:
        self.recent_menu.clear()
        recent = self.files.recent_files()
        for path in recent:
            self.recent_menu.addAction(Path(path).name, lambda p=path: self._open_recent(p)).setToolTip(path)
        self.recent_menu.setEnabled(bool(recent))

    def _open_recent(self, path: str) -> None:
        if not Path(path).exists():
            self.prompts.error("Cannot open design", f"{path} no longer exists; it is taken off the recent list.")
            self.files.forget(path)
            return
        self.files.open_path(path)

    def _show_design_block(self, block_id: str) -> None:
        """Centre a block of the design (the Depth ledger always charts the design), leaving any motif."""
        if self.document.graph_key:
            self.document.show_path([], select=[block_id])
        self.canvas.center_on(block_id)

    def edit_budget(self) -> None:
        from layerloom.gui.budget_dialog import BudgetDialog

        BudgetDialog(self.document, self.settings, self).exec()

    # ----- export
    def export_module(self) -> None:
        """Write the design as a PyTorch module; a design with errors is refused with its findings."""
        from layerloom.export import ExportRefused, module_source

        try:
            source = module_source(self.document.design)
        except ExportRefused as e:
            self.show_findings()
            self.prompts.error("Not exported", f"{e}\n\nThe Findings tab lists them with their mends.")
            return
        except ValueError as e:
            self.prompts.error("Not exported", str(e))
            return
        stem = self.document.path.stem if self.document.path else self.document.design.name
        path = self.prompts.save_path("Export PyTorch module", f"{stem.replace('-', '_')}.py", "Python source (*.py)")
        if path:
            self._write_out(lambda: Path(path).write_text(source, encoding="utf-8"), path)

    def export_picture(self, fmt: str) -> None:
        stem = self.document.path.stem if self.document.path else self.document.design.name
        path = self.prompts.save_path(f"Export canvas as {fmt.upper()}", f"{stem}.{fmt}",
                                      f"{fmt.upper()} picture (*.{fmt})")
        if path:
            save = self.canvas.save_png if fmt == "png" else self.canvas.save_svg
            self._write_out(lambda: save(path), path)

    def _write_out(self, write, path: str) -> None:
        """Run ``write`` (False or OSError means it failed) and say how it went."""
        try:
            written = write() is not False
            why = "the file could not be written"
        except OSError as e:
            written, why = False, e.strerror or str(e)
        if not written:
            self.prompts.error("Not exported", f"{path}: {why}")
            return
        self.say(f"Exported {Path(path).name}")

    # ----- title and status
    def _build_status_bar(self) -> None:
        bar = self.statusBar()
        self.totals_label = QLabel()
        self.totals_label.setObjectName("totals")
        self.findings_button = QPushButton()
        self.findings_button.setObjectName("findings_count")
        self.findings_button.setFlat(True)
        self.findings_button.setCursor(Qt.CursorShape.PointingHandCursor)
        self.findings_button.clicked.connect(self.show_findings)
        self.zoom_label = QLabel()
        self.zoom_label.setObjectName("zoom")
        self.zoom_label.setMinimumWidth(self.zoom_label.fontMetrics().horizontalAdvance("4000 %"))
        self.canvas.zoom_changed.connect(lambda z: self.zoom_label.setText(f"{z * 100:.0f} %"))
        bar.addPermanentWidget(self.zoom_label)
        bar.addPermanentWidget(self.totals_label)
        bar.addPermanentWidget(self.findings_button)

    def _on_change(self, change) -> None:
        if change.reinfers:
            self._refresh_totals()
        if "name" in change.fields:
            self._refresh_title()

    def _settings_wanted(self) -> None:
        """Enter on a selected block: the keys go to its first setting in Block settings."""
        self.settings_dock.show()
        self.block_settings.focus_first()

    def _refresh_totals(self) -> None:
        design = self.document.design
        t = Ledger(design.analysis()).totals
        self.totals_label.setText(f"Weights {units.count(t.weights)}   ·   MACs {units.count(t.macs)}   ·   "
                                  f"Peak activations {units.size(t.peak_memory)}   "
                                  f"(batch {design.batch}, {design.dtype})")
        errors, warnings = self.shelf.findings.counts()
        self.findings_button.setText(f"{errors} error{'s' if errors != 1 else ''}, "
                                     f"{warnings} warning{'s' if warnings != 1 else ''}")
        self.findings_button.setProperty("severity", "error" if errors else ("warning" if warnings else "clear"))
        self.findings_button.style().polish(self.findings_button)

    def show_findings(self) -> None:
        self.shelf_dock.show()
        self.shelf.show_findings()

    def say(self, text: str) -> None:
        """A passing message in the status bar, on one line (a block name may hold a line break)."""
        self.statusBar().showMessage(one_line(text, 500), 6000)

    def _refresh_title(self) -> None:
        self.setWindowTitle(f"{self.files.display_name}[*] — Layerloom")
        self.setWindowModified(self.document.modified)

    def showEvent(self, event) -> None:
        super().showEvent(event)
        if self._first_run:  # docks take their sizes only once the window is laid out
            self._first_run = False
            self.resizeDocks([self.settings_dock], [SETTINGS_WIDTH], Qt.Orientation.Horizontal)
            self.resizeDocks([self.shelf_dock], [SHELF_HEIGHT], Qt.Orientation.Vertical)
            column = self.settings_dock.height() + self.ledger_dock.height()
            self.resizeDocks([self.settings_dock, self.ledger_dock],
                             [int(column * SETTINGS_SHARE), int(column * (1 - SETTINGS_SHARE))], Qt.Orientation.Vertical)
        if not self._shown_once:  # the canvas has its final size only now
            self._shown_once = True
            QTimer.singleShot(0, self.canvas.show_start)

    # ----- closing
    def closeEvent(self, event) -> None:
        if not self.files.close():
            event.ignore()
            return
        self.settings.setValue("window/geometry", self.saveGeometry())
        self.settings.setValue("window/state", self.saveState())
        event.accept()


def launch(files: list[str]) -> int:
    """Run the editor on ``files[0]`` (or a new design) until its window closes; the exit code."""
    app = QApplication.instance() or QApplication(sys.argv[:1])
    app.setOrganizationName(ORGANISATION)
    app.setApplicationName(APPLICATION)
    app.setWindowIcon(QIcon(str(resource(APP_ICON))))
    window = MainWindow(files)
    window.show()
    return app.exec()
