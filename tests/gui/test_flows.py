"""End-to-end flows across the canvas and the window, as a user does them: drag a part from the
shelf, wire it with the mouse, read the shape; make a residual clash, mend it, undo. Screenshots of
the states go to tests/screenshots/ (git-ignored) for a person to look at.
"""
from pathlib import Path

from PySide6.QtCore import QPointF, Qt
from PySide6.QtGui import QDragEnterEvent, QDropEvent, QKeySequence
from PySide6.QtWidgets import QApplication

from test_window_files import SAMPLES, open_window, sample_copy
from test_window_panels import type_into

SHOTS = Path(__file__).resolve().parents[1] / "screenshots"


def shoot(window, name: str) -> None:
    SHOTS.mkdir(exist_ok=True)
    QApplication.processEvents()
    window.grab().save(str(SHOTS / f"{name}.png"))


def drop_part(qtbot, window, kind: str, scene_point: QPointF) -> str:
    """Drop the Parts tile of ``kind`` (its own MIME data) on the canvas at ``scene_point``."""
    canvas = window.canvas
    tile = window.shelf.parts.tiles[kind]
    before = set(window.document.design.blocks)
    at, data = canvas.mapFromScene(scene_point), tile.mime_data()
    copy, left, plain = Qt.DropAction.CopyAction, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier
    # a widget takes a drop only after it accepted the drag entering it
    enter = QDragEnterEvent(at, copy, data, left, plain)
    assert QApplication.sendEvent(canvas.viewport(), enter) and enter.isAccepted()
    QApplication.sendEvent(canvas.viewport(), QDropEvent(QPointF(at), copy, data, left, plain))
    (added,) = set(window.document.design.blocks) - before
    return added


def wire_by_mouse(qtbot, window, src: str, dst: str, port: int = 0) -> None:
    """Press on ``src``'s output notch, move, release on input ``port`` of ``dst``."""
    canvas = window.canvas
    items = canvas.canvas_scene.blocks
    start = canvas.mapFromScene(items[src].output_pos(0) - QPointF(3, 0))
    end = canvas.mapFromScene(items[dst].input_pos(port) + QPointF(3, 0))
    viewport = canvas.viewport()
    qtbot.mousePress(viewport, Qt.MouseButton.LeftButton, pos=start)
    qtbot.mouseMove(viewport, pos=(start + end) / 2)
    qtbot.mouseMove(viewport, pos=end)
    qtbot.mouseRelease(viewport, Qt.MouseButton.LeftButton, pos=end)


def test_drag_a_pointwise_part_wire_it_and_see_the_shape(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path)
    doc = window.document
    (source,) = doc.design.blocks
    doc.select([])
    pw = drop_part(qtbot, window, "Pointwise", QPointF(320, 200))
    assert doc.design.blocks[pw].kind == "Pointwise" and doc.selection == [pw]
    assert doc.design.in_wires[pw] == []
    wire_by_mouse(qtbot, window, source, pw)
    assert [(w.src, w.dst) for w in doc.design.in_wires[pw]] == [(source, pw)]
    # a 1×1 convolution keeps height and width and sets channels to its filter count (common practice)
    assert str(doc.design.analysis().shape(pw)) == "64×224×224"
    assert window.canvas.canvas_scene.blocks[pw].state.shape.replace(" ", "").endswith("64×224×224")
    assert "64×224×224" in window.block_settings.facts.text()
    assert doc.undo_stack.count() == 2  # the drop and the wire, one step each
    shoot(window, "flow_pointwise_wired")
    doc.undo_stack.undo()
    assert doc.design.in_wires[pw] == [] and "64×224×224" not in window.block_settings.facts.text()


def test_residual_clash_is_found_mended_and_undo_brings_it_back(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path)
    doc = window.document
    design = doc.design
    (source,) = design.blocks
    doc.select([source])
    stem = drop_part(qtbot, window, "Conv2d", QPointF(300, 0))  # wired from the selected Input
    doc.select([stem])
    wide = drop_part(qtbot, window, "Pointwise", QPointF(560, 140))
    type_into(qtbot, window.block_settings.fields["out_channels"].widget, "128")
    assert design.blocks[wide].settings["out_channels"] == 128
    doc.select([])
    join = drop_part(qtbot, window, "Add", QPointF(820, 40))
    wire_by_mouse(qtbot, window, stem, join, 0)
    wire_by_mouse(qtbot, window, wide, join, 1)
    findings = window.shelf.findings
    codes = [findings.tree.topLevelItem(i).text(1) for i in range(findings.tree.topLevelItemCount())]
    assert codes[0] == "join.channels"  # errors first
    assert window.findings_button.text().startswith("1 error")
    window.shelf.show_findings()
    tree = findings.tree
    qtbot.mouseClick(tree.viewport(), Qt.MouseButton.LeftButton, pos=tree.visualItemRect(tree.topLevelItem(0)).center())
    assert doc.selection == [join]
    shoot(window, "flow_residual_clash")
    qtbot.mouseClick(findings.mend_button, Qt.MouseButton.LeftButton)
    assert "join.channels" not in [f.code for f in design.findings()]
    assert str(design.analysis().shape(join)) == "128×224×224"
    with qtbot.waitActive(window):
        window.activateWindow()
    qtbot.keySequence(window.canvas, QKeySequence(QKeySequence.StandardKey.Undo))
    assert [f.code for f in design.findings()][0] == "join.channels"
    assert tree.topLevelItem(0).text(1) == "join.channels"


def test_screenshots_of_the_sample_designs(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path, [SAMPLES / "leaf_blight_grader.loom"])
    window.resize(1400, 860)
    design = window.document.design
    window.document.select([design.of_kind("Motif")[0].id])
    shoot(window, "leaf_blight_grader_motif_selected")
    conv = next(b for b in design.blocks.values() if b.kind in ("Conv2d", "Pointwise"))
    window.document.select([conv.id])
    shoot(window, "leaf_blight_grader_conv_selected")
    window.files.open_path(sample_copy(tmp_path, "shelf_gap_counter_clash.loom"))
    window.shelf.show_findings()
    tree = window.shelf.findings.tree
    tree.setCurrentItem(tree.topLevelItem(0))
    for _ in range(4):
        window.canvas.zoom_in()
    window.canvas.center_on(window.document.selection[0])
    shoot(window, "shelf_gap_counter_clash_findings")
    window.shelf.setCurrentWidget(window.shelf.parts)
    qtbot.keyClicks(window.shelf.parts.filter, "conv")
    shoot(window, "parts_filtered")


def test_menu_shortcuts_drive_the_canvas_and_the_undo_stack(qtbot, tmp_path):
    from layerloom.gui.canvas.quick_add import QuickAdd

    window, _ = open_window(qtbot, tmp_path, [SAMPLES / "fastener_sorter.loom"])
    doc, canvas = window.document, window.canvas
    with qtbot.waitActive(window):
        window.activateWindow()
    canvas.setFocus()
    n = len(doc.design.blocks)
    conv = next(b.id for b in doc.design.blocks.values() if b.kind == "Conv2d")
    doc.select([conv])
    qtbot.keyClick(canvas, Qt.Key.Key_D, Qt.KeyboardModifier.ControlModifier)  # Duplicate
    assert len(doc.design.blocks) == n + 1
    qtbot.keySequence(canvas, QKeySequence(QKeySequence.StandardKey.Undo))
    assert len(doc.design.blocks) == n
    qtbot.keySequence(canvas, QKeySequence(QKeySequence.StandardKey.Redo))
    assert len(doc.design.blocks) == n + 1
    doc.select([list(doc.design.blocks)[-1]])
    qtbot.keySequence(canvas, QKeySequence(QKeySequence.StandardKey.Delete))
    assert len(doc.design.blocks) == n
    qtbot.keySequence(canvas, QKeySequence(QKeySequence.StandardKey.SelectAll))
    assert len(doc.selection) == n
    qtbot.keyClick(canvas, Qt.Key.Key_K, Qt.KeyboardModifier.ControlModifier)  # Quick add
    assert any(popup.isVisible() for popup in canvas.findChildren(QuickAdd))
