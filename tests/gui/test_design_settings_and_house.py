"""The design's own settings in Block settings (set by typing, one undo step each, saved and read
back), keys handed back to the canvas from Block settings, and a steady house: the right column
keeps its width, the Parts shelf shows every part at 1280×800 without scrolling and folds families, a refusal moves no
field, dock sizes and the ledger's metric are remembered.
"""
from __future__ import annotations

from PySide6.QtCore import QSettings, Qt
from PySide6.QtGui import QAction
from PySide6.QtWidgets import QApplication

from layerloom.core import fileformat
from layerloom.core.ledger import Ledger
from layerloom.export import module_source
from layerloom.gui.canvas.block_item import BlockItem
from layerloom.gui.main_window import MainWindow
from test_flows import shoot
from test_window_files import SAMPLES, ScriptedPrompts, open_window
from test_window_panels import type_into


def active(qtbot, window):
    with qtbot.waitActive(window):
        window.activateWindow()


def test_design_settings_round_trip_set_save_reopen(qtbot, tmp_path):
    window, prompts = open_window(qtbot, tmp_path)
    window.resize(1280, 800)
    doc, panel = window.document, window.block_settings
    doc.select([])
    ds = panel.design_settings
    assert ds.isVisible() and panel.heading.text() == "Design"
    assert ds.name_edit.text() == "untitled" and ds.batch_edit.text() == "1"
    # 3·224·224 elements × 4 bytes (fp32) = 588 KiB for batch 1
    assert ds.inputs.text() == "input: 3×224×224 (588 KiB for batch 1 at fp32)"
    type_into(qtbot, ds.name_edit, "orchard-drone")
    type_into(qtbot, ds.batch_edit, "8")
    ds.dtype_box.setFocus()
    ds.dtype_box.setCurrentIndex(ds.dtype_box.findData("int8"))
    ds.dtype_box.activated.emit(ds.dtype_box.currentIndex())  # as a pick from its list emits
    qtbot.mouseClick(ds.notes_edit, Qt.MouseButton.LeftButton)
    qtbot.keyClicks(ds.notes_edit, "night flights")
    qtbot.keyClick(ds.notes_edit, Qt.Key.Key_Return, Qt.KeyboardModifier.ControlModifier)
    d = doc.design
    assert (d.name, d.batch, d.dtype, d.notes) == ("orchard-drone", 8, "int8", "night flights")
    assert doc.undo_stack.count() == 4  # one step each
    assert "orchard-drone" in window.windowTitle()
    # int8 is one byte per element: the input's 3·224·224 elements × batch 8 (common practice)
    assert Ledger(d.analysis()).out_memory[0] == 3 * 224 * 224 * 8
    assert "class OrchardDrone" in module_source(d)
    assert ds.inputs.text() == "input: 3×224×224 (1.15 MiB for batch 8 at int8)"  # 150,528 × 8 × 1 byte
    shoot(window, "design_settings_1280")
    type_into(qtbot, ds.batch_edit, "0")
    assert d.batch == 8 and "batch size must be a whole number from 1 to 65,536" in panel.message.text()
    assert ds.batch_edit.text() == "8"
    doc.undo_stack.undo()  # the notes
    assert ds.notes_edit.toPlainText() == ""
    doc.undo_stack.redo()
    prompts.save_choice = tmp_path / "orchard.loom"
    assert window.files.save_as()
    again = fileformat.load(tmp_path / "orchard.loom")
    assert (again.name, again.batch, again.dtype, again.notes) == ("orchard-drone", 8, "int8", "night flights")
    window.files.open_path(tmp_path / "orchard.loom", ask=False)
    doc.select([])
    assert (ds.name_edit.text(), ds.batch_edit.text(), ds.dtype_box.currentData(), ds.notes_edit.toPlainText()) == (
        "orchard-drone", "8", "int8", "night flights")


def test_enter_and_escape_in_block_settings_give_the_keys_back_to_the_canvas(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path)
    active(qtbot, window)
    doc, canvas = window.document, window.canvas
    canvas.setFocus()
    qtbot.keyClicks(canvas, "conv")
    qtbot.keyClick(QApplication.focusWidget(), Qt.Key.Key_Return)
    (conv,) = doc.selection
    qtbot.keyClick(canvas, Qt.Key.Key_Return)  # Enter on the selected block: its first setting
    field = window.block_settings.fields["out_channels"].widget
    assert QApplication.focusWidget() is field and field.selectedText() == "64"
    qtbot.keyClicks(field, "48")
    qtbot.keyClick(field, Qt.Key.Key_Return)
    assert doc.design.blocks[conv].settings["out_channels"] == 48
    qtbot.waitUntil(lambda: QApplication.focusWidget() is canvas, timeout=1000)
    qtbot.keyClick(canvas, Qt.Key.Key_Return)
    qtbot.keyClicks(field, "7")
    qtbot.keyClick(field, Qt.Key.Key_Escape)  # Escape: nothing changes, keys back
    qtbot.waitUntil(lambda: QApplication.focusWidget() is canvas, timeout=1000)
    assert doc.design.blocks[conv].settings["out_channels"] == 48 and field.text() == "48"


def test_a_refusal_moves_no_field(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path)
    panel = window.block_settings
    qtbot.keyClicks(window.canvas, "conv")
    qtbot.keyClick(window.canvas._quick.edit, Qt.Key.Key_Return)
    qtbot.wait(100)  # the new fields laid out
    tops = {k: f.widget.mapTo(panel, f.widget.rect().topLeft()).y() for k, f in panel.fields.items()}
    type_into(qtbot, panel.fields["out_channels"].widget, "0")
    assert "below the minimum 1" in panel.message.text()
    assert panel.fields["out_channels"].widget.property("refused") is True
    assert "below the minimum 1" in panel.fields["out_channels"].widget.toolTip()
    qtbot.wait(100)
    assert {k: f.widget.mapTo(panel, f.widget.rect().topLeft()).y() for k, f in panel.fields.items()} == tops
    shoot(window, "field_message")


def test_the_right_column_keeps_its_width_when_the_legend_grows(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path, [SAMPLES / "fastener_sorter.loom"])
    window.resize(1280, 800)
    QApplication.processEvents()
    canvas_width, column = window.canvas.width(), window.settings_dock.width()
    window.document.design.name = "a design with a very long name, as some teams like to give them"
    window.depth_ledger.pin_baseline()
    window.depth_ledger.metric_box.setCurrentIndex(2)  # activation memory: the legend grows further
    QApplication.processEvents()
    assert "dashed: baseline" in window.depth_ledger.key.text()
    assert (window.canvas.width(), window.settings_dock.width()) == (canvas_width, column)
    shoot(window, "legend_long_1280")


def test_at_1280_every_part_shows_without_scrolling_and_a_family_folds(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path)
    window.resize(1280, 800)
    QApplication.processEvents()
    parts = window.shelf.parts
    strip, viewport = parts.scroll.widget(), parts.scroll.viewport()
    groups = [*parts.groups, parts.motif_group]
    assert parts.scroll.verticalScrollBar().maximum() == 0 and not parts.scroll.verticalScrollBar().isVisible()
    assert strip.height() <= viewport.height() and strip.width() <= viewport.width()
    seen = viewport.rect()
    for g in groups:
        assert g.heading.isVisible() and seen.contains(g.heading.geometry()), g.family
        for tile in g.tiles:  # whole, inside the shelf's view, its name not cut
            assert tile.isVisible() and seen.contains(tile.geometry()), tile.payload
            assert tile.label.width() >= tile.label.sizeHint().width(), tile.label.text()
            assert tile.label.text() in tile.toolTip() and tile.matches(tile.label.text())
    assert parts.tiles["Add"].label.text() == "Add" and "Add (residual)" in parts.tiles["Add"].toolTip()
    assert parts.tiles["Add"].matches("residual")  # the filter still finds the bracketed words
    shoot(window, "shelf_1280")
    window.shelf.setCurrentWidget(window.shelf.findings)
    assert not parts.filter.isVisible()  # the filter in the tab bar belongs to Parts
    window.shelf.setCurrentWidget(parts)
    assert parts.filter.isVisible()
    before = parts.motif_group.tiles[0].y()
    for g in parts.groups:
        g.heading.click()
    assert all(g.folded and not any(t.isVisible() for t in g.tiles) and g.heading.isVisible() for g in parts.groups)
    qtbot.waitUntil(lambda: parts.motif_group.tiles[0].y() < before, timeout=2000)  # Motifs move up
    shoot(window, "shelf_1280_folded")
    parts.groups[0].heading.click()
    assert not parts.groups[0].folded and all(t.isVisible() for t in parts.groups[0].tiles)


def test_dock_sizes_the_ledger_metric_and_folded_families_are_remembered(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path)
    window.resize(1400, 860)
    QApplication.processEvents()
    window.resizeDocks([window.settings_dock], [460], Qt.Orientation.Horizontal)
    window.resizeDocks([window.shelf_dock], [260], Qt.Orientation.Vertical)
    window.depth_ledger.metric_box.setCurrentIndex(1)
    window.depth_ledger.view_box.setCurrentIndex(1)
    window.shelf.parts.groups[1].heading.click()  # fold Convolution
    QApplication.processEvents()
    sizes = (window.settings_dock.width(), window.shelf_dock.height())
    window.close()
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)
    again = MainWindow([], prompts=ScriptedPrompts(), settings=settings, scratch_dir=tmp_path / "scratch")
    qtbot.addWidget(again)
    again.show()
    qtbot.waitExposed(again)
    QApplication.processEvents()
    assert (again.settings_dock.width(), again.shelf_dock.height()) == sizes
    assert again.depth_ledger.metric_key() == "macs" and again.depth_ledger.view_box.currentText() == "Per block"
    assert [g.family for g in again.shelf.parts.groups if g.folded] == ["Convolution"]
    again.close()


def test_fold_is_remembered_between_runs(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path, [SAMPLES / "fastener_sorter.loom"])
    fold = window.findChild(QAction, "fold")
    assert fold.isChecked() and window.canvas.canvas_scene.fold  # on by default (first run)
    path = str(window.document.path)
    fold.trigger()  # off, as a user chooses it from the View menu
    assert not window.canvas.canvas_scene.fold and not window.canvas.canvas_scene.folds
    window.close()
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)
    again = MainWindow([path], prompts=ScriptedPrompts(), settings=settings,
                       scratch_dir=tmp_path / "scratch")
    qtbot.addWidget(again)
    again.show()
    qtbot.waitExposed(again)
    scene = again.canvas.canvas_scene
    assert not again.findChild(QAction, "fold").isChecked() and not scene.fold
    norms = [b.id for b in again.document.design.blocks.values() if b.kind in ("BatchNorm2d", "ReLU", "ReLU6")]
    assert norms and all(isinstance(scene.blocks[b], BlockItem) for b in norms)  # each its own card
    again.findChild(QAction, "fold").trigger()  # on again: remembered too
    again.close()
    assert QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat).value("view/fold", type=bool)
