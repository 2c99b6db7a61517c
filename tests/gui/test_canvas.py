"""Canvas tests: real mouse drags, drops and keys on a CanvasView, checked against the document.

Outside references are named beside each check; screenshots go to tests/screenshots/.
"""
from __future__ import annotations

import json
from pathlib import Path

import pytest
from PySide6.QtCore import QMimeData, QPoint, QPointF, Qt, QTimer
from PySide6.QtGui import QWheelEvent, QContextMenuEvent, QDragEnterEvent, QDragMoveEvent, QDropEvent, QMouseEvent
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QApplication

from layerloom.core import edits, units
from layerloom.core.design import Design
from layerloom.core.fileformat import dumps, load
from layerloom.core.graph import Wire
from layerloom.core.layout import tidy_positions
from layerloom.gui.canvas import KIND_MIME, CanvasView
from layerloom.gui.canvas.block_item import H, W, port_y
from layerloom.gui.canvas.wire_item import WireItem
from layerloom.gui.document import Document

SHOTS = Path(__file__).resolve().parent.parent / "screenshots"
SAMPLES = Path(__file__).resolve().parents[2] / "samples"


def open_view(qtbot, design=None, size=(1000, 560)) -> CanvasView:
    doc = Document(design)
    view = CanvasView(doc)
    qtbot.addWidget(view)
    view.resize(*size)
    view.show()
    qtbot.waitExposed(view)
    view.resetTransform()
    return view


def at(view: CanvasView, scene_point) -> QPoint:
    """Viewport point showing ``scene_point``."""
    p = scene_point if isinstance(scene_point, QPointF) else QPointF(*scene_point)
    return view.mapFromScene(p)


def drag(view: CanvasView, start: QPoint, end: QPoint, steps: int = 6) -> None:
    """Press the left button at ``start``, move in steps with the button held, release at ``end``."""
    vp = view.viewport()
    QTest.mouseMove(vp, start)
    QTest.mousePress(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, start)
    for i in range(1, steps + 1):
        p = start + (end - start) * (i / steps)
        event = QMouseEvent(QMouseEvent.Type.MouseMove, QPointF(p), QPointF(vp.mapToGlobal(p)),
                            Qt.MouseButton.NoButton, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier)
        QApplication.sendEvent(vp, event)
    QTest.mouseRelease(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, end)


def drop_kind(view: CanvasView, kind: str, point: QPoint) -> None:
    """Drag a kind from Parts onto the viewport at ``point`` (enter, move, drop), as Qt delivers it."""
    mime = QMimeData()
    mime.setData(KIND_MIME, kind.encode("utf-8"))
    vp = view.viewport()
    pf = QPointF(point)
    copy = Qt.DropAction.CopyAction
    # enter and move take a whole-pixel QPoint (the only form PySide6 6.11 accepts), the drop a QPointF
    for event in (QDragEnterEvent(point, copy, mime, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier),
                  QDragMoveEvent(point, copy, mime, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier),
                  QDropEvent(pf, copy, mime, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier)):
        QApplication.sendEvent(vp, event)


def shot(view: CanvasView, name: str) -> Path:
    SHOTS.mkdir(parents=True, exist_ok=True)
    path = SHOTS / f"{name}.png"
    view.grab().save(str(path))
    return path


# ----- building designs -----------------------------------------------------------------------

def residual_clash():
    """A residual join of a 64-channel path with a 128-channel one: Add sees 128 ≠ 64."""
    d = Design("residual-clash")
    x = d.input(3, 32, 32, name="frame")
    a = d.add("Conv2d", x, out_channels=64, kernel=3, padding=1, name="trunk", position=(230, 0))
    b = d.add("Pointwise", x, out_channels=128, name="side", position=(230, 140))
    j = d.add("Add", a, b, name="join", position=(520, 40))
    d.add("Output", j, name="out", position=(760, 40))
    return d, j


def squeeze_chain():
    """256 channels squeezed to 64 by a 1×1 convolution, a 3×3 at 64, expanded back to 256."""
    d = Design("squeeze")
    x = d.input(256, 28, 28, name="wide")
    s = d.add("Pointwise", x, out_channels=64, name="squeeze", position=(230, 0))
    c = d.add("Conv2d", s, out_channels=64, kernel=3, padding=1, name="mix", position=(460, 0))
    e = d.add("Pointwise", c, out_channels=256, name="expand", position=(690, 0))
    d.add("Output", e, name="out", position=(920, 0))
    return d


def card(view, block_id):
    return view.canvas_scene.blocks[block_id]


def wire_item(view, wire):
    return view.canvas_scene.wires[wire]


# ----- adding and wiring ----------------------------------------------------------------------

def test_drop_a_pointwise_and_wire_it_notch_to_notch(qtbot):
    view = open_view(qtbot)
    doc = view.document
    (inp,) = doc.design.blocks
    assert doc.selection == [inp]  # a new design starts with its Input selected …
    doc.select([])  # … here cleared, so the drop lands unwired
    drop_kind(view, "Pointwise", at(view, (420, 27)))
    assert [b.kind for b in doc.design.blocks.values()] == ["Input", "Pointwise"]
    pw = next(b.id for b in doc.design.blocks.values() if b.kind == "Pointwise")
    assert doc.design.blocks[pw].position == (420 - W / 2, 27 - H / 2)  # centred on the drop point
    assert not doc.design.wires  # nothing was selected, so nothing is wired yet
    out_notch = card(view, inp).mapToScene(QPointF(W - 2, port_y(0, 1)))
    in_notch = card(view, pw).mapToScene(QPointF(2, port_y(0, 1)))
    drag(view, at(view, out_notch), at(view, in_notch))
    assert list(doc.design.wires) == [Wire(inp, 0, pw, 0)]
    item = wire_item(view, Wire(inp, 0, pw, 0))
    assert item.label == "3×224×224"
    # a 1×1 convolution keeps height and width and sets the channel count to its filters (common practice)
    assert card(view, pw).state.shape == "64×224×224"
    assert doc.undo_stack.count() == 2  # the drop and the wire, one step each
    shot(view, "canvas_dropped_and_wired")
    doc.undo_stack.undo()
    assert not doc.design.wires and not view.canvas_scene.wires


def test_a_squeeze_narrows_the_flow_and_the_expansion_widens_it(qtbot):
    d = squeeze_chain()
    view = open_view(qtbot, d)
    view.fit_all()
    ids = {b.name: b.id for b in d.blocks.values()}
    into = wire_item(view, Wire(ids["wide"], 0, ids["squeeze"], 0))
    squeezed = wire_item(view, Wire(ids["squeeze"], 0, ids["mix"], 0))
    expanded = wire_item(view, Wire(ids["expand"], 0, ids["out"], 0))
    assert (into.label, squeezed.label, expanded.label) == ("256×28×28", "64×28×28", "256×28×28")
    assert squeezed.width < into.width == expanded.width
    # the MAC bars: the 3×3 at 64 channels costs 64·64·9 per position, each 1×1 costs 256·64 (He et al. 2016 §4.1)
    shares = {n: card(view, ids[n]).state.cost_share for n in ("squeeze", "mix", "expand")}
    assert shares["mix"] > shares["squeeze"] == shares["expand"] > 0
    shot(view, "canvas_squeeze_chain")


def test_quick_add_by_typing_wires_from_the_selected_block(qtbot):
    view = open_view(qtbot)
    doc = view.document
    (inp,) = doc.design.blocks
    doc.select([inp])
    view.setFocus()
    QTest.keyClicks(view, "poin")
    popup = view._quick
    assert popup.isVisible() and popup.edit.text() == "poin"
    assert popup.list.currentItem().data(Qt.ItemDataRole.UserRole).kind == "Pointwise"
    shot(view, "canvas_quick_add")
    QTest.keyClick(popup.edit, Qt.Key.Key_Return)
    assert not popup.isVisible()
    (pw,) = [b.id for b in doc.design.of_kind("Pointwise")]
    assert Wire(inp, 0, pw, 0) in doc.design.wires
    assert doc.selection == [pw]
    assert doc.design.blocks[pw].position[0] > doc.design.blocks[inp].position[0] + W  # to its right
    QTest.keyClicks(view, "relu")
    QTest.keyClick(view._quick.edit, Qt.Key.Key_Return)
    (relu,) = [b.id for b in doc.design.of_kind("ReLU")]
    assert Wire(pw, 0, relu, 0) in doc.design.wires  # typing on chains blocks left to right


def test_dropping_a_wire_on_empty_canvas_adds_a_block_already_wired(qtbot):
    view = open_view(qtbot)
    doc = view.document
    (inp,) = doc.design.blocks
    start = card(view, inp).mapToScene(QPointF(W - 2, port_y(0, 1)))
    drag(view, at(view, start), at(view, (500, 200)))
    assert view._quick.isVisible()
    QTest.keyClicks(view._quick.edit, "max")
    QTest.keyClick(view._quick.edit, Qt.Key.Key_Return)
    (pool,) = doc.design.of_kind("MaxPool2d")
    assert Wire(inp, 0, pool.id, 0) in doc.design.wires
    assert pool.position == (500 - W / 2, 200 - H / 2)
    assert card(view, pool.id).state.shape == "3×112×112"  # 2×2 /2 halves each side (common practice)


# ----- status and mends -----------------------------------------------------------------------

def test_clash_shows_red_outline_and_badge_and_its_mend_clears_it(qtbot):
    d, join = residual_clash()
    view = open_view(qtbot, d)
    view.fit_all()
    doc = view.document
    before = dumps(d)
    assert card(view, join).state.status == "error"
    (badge,) = view.canvas_scene.badges[join]
    assert badge.text == "128 ≠ 64" and badge.port == 1
    assert "join adds 128 channels to 64 channels" in badge.toolTip()
    shot(view, "canvas_clash")
    # right-click the badge and take the first mend from its context menu
    picked = []

    def take_first_mend():
        menu = QApplication.activePopupWidget()
        picked.append(menu.actions()[0].text())
        menu.actions()[0].trigger()
        menu.close()

    QTimer.singleShot(200, take_first_mend)
    vp_point = at(view, badge.anchor())
    QApplication.sendEvent(view.viewport(), QContextMenuEvent(QContextMenuEvent.Reason.Mouse, vp_point,
                                                              view.viewport().mapToGlobal(vp_point)))
    qtbot.waitUntil(lambda: bool(picked), timeout=3000)
    assert picked[0] == "Mend: Insert a 1×1 projection to 128 channels after trunk"
    assert not view.canvas_scene.badges[join]
    assert card(view, join).state.status == ""
    shot(view, "canvas_clash_mended")
    doc.undo_stack.undo()
    assert dumps(d) == before
    (badge,) = view.canvas_scene.badges[join]
    assert badge.text == "128 ≠ 64"
    assert card(view, join).state.status == "error"


# ----- moving, deleting, copying, Tidy, renaming ----------------------------------------------

def test_while_a_card_is_dragged_its_wires_follow_it_before_the_drop(qtbot):
    d = squeeze_chain()
    view = open_view(qtbot, d)
    mix = next(b.id for b in d.blocks.values() if b.name == "mix")
    wire = next(iter(d.in_wires[mix]))
    vp = view.viewport()
    start = at(view, card(view, mix).mapToScene(QPointF(W / 2, H - 12)))
    QTest.mouseMove(vp, start)
    QTest.mousePress(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, start)
    for i in range(1, 4):  # the button held: Qt moves the card's item, the scene follows it
        p = start + QPoint(30 * i, 40 * i)
        QApplication.sendEvent(vp, QMouseEvent(QMouseEvent.Type.MouseMove, QPointF(p), QPointF(vp.mapToGlobal(p)),
                                               Qt.MouseButton.NoButton, Qt.MouseButton.LeftButton,
                                               Qt.KeyboardModifier.NoModifier))
        QApplication.processEvents()
        end = card(view, mix).input_pos(0)
        assert wire_item(view, wire).path().pointAtPercent(1.0) == QPointF(end.x(), end.y()), i
        assert view.canvas_scene.obstacles.rects[mix][:2] == (card(view, mix).pos().x(), card(view, mix).pos().y())
    assert d.blocks[mix].position != (card(view, mix).pos().x(), card(view, mix).pos().y())  # not dropped yet
    QTest.mouseRelease(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, start + QPoint(90, 120))
    assert d.blocks[mix].position == (card(view, mix).pos().x(), card(view, mix).pos().y())


def test_moving_a_block_by_mouse_is_one_step_and_undo_restores_it_exactly(qtbot):
    d = squeeze_chain()
    view = open_view(qtbot, d)
    doc = view.document
    mix = next(b.id for b in d.blocks.values() if b.name == "mix")
    start_pos = d.blocks[mix].position
    revision = d.analysis().revision
    grip = card(view, mix).mapToScene(QPointF(W / 2, H - 12))
    drag(view, at(view, grip), at(view, grip) + QPoint(90, 60))
    assert d.blocks[mix].position == (start_pos[0] + 90, start_pos[1] + 60)  # scale 1: one pixel per unit
    assert doc.undo_stack.count() == 1 and doc.undo_stack.undoText() == "Move"
    assert d.analysis().revision == revision  # moving never re-runs inference
    assert wire_item(view, next(iter(d.in_wires[mix]))).boundingRect().contains(card(view, mix).input_pos(0))
    doc.undo_stack.undo()
    assert d.blocks[mix].position == start_pos
    assert (card(view, mix).pos().x(), card(view, mix).pos().y()) == start_pos


def test_select_a_wire_and_delete_it_then_delete_a_block(qtbot):
    d = squeeze_chain()
    view = open_view(qtbot, d)
    doc = view.document
    ids = {b.name: b.id for b in d.blocks.values()}
    w = Wire(ids["mix"], 0, ids["expand"], 0)
    item = wire_item(view, w)
    QTest.mouseClick(view.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                     at(view, item.path().pointAtPercent(0.3)))
    assert item.isSelected()
    QTest.keyClick(view, Qt.Key.Key_Delete)
    assert w not in d.wires and w not in view.canvas_scene.wires
    doc.select([ids["mix"]])
    QTest.keyClick(view, Qt.Key.Key_Backspace)
    assert ids["mix"] not in d.blocks and ids["mix"] not in view.canvas_scene.blocks
    doc.undo_stack.undo()
    doc.undo_stack.undo()
    assert w in d.wires and isinstance(view.canvas_scene.wires[w], WireItem)
    assert card(view, ids["expand"]).state.shape == "256×28×28"


def test_copy_paste_keeps_the_wires_among_the_copied_blocks(qtbot):
    d = squeeze_chain()
    view = open_view(qtbot, d)
    doc = view.document
    ids = {b.name: b.id for b in d.blocks.values()}
    doc.select([ids["squeeze"], ids["mix"]])
    view.setFocus()
    QTest.keyClick(view, Qt.Key.Key_C, Qt.KeyboardModifier.ControlModifier)
    assert json.loads(QApplication.clipboard().text())["format"] == "layerloom-blocks"
    QTest.keyClick(view, Qt.Key.Key_V, Qt.KeyboardModifier.ControlModifier)
    new = doc.selection
    assert len(new) == 2 and not set(new) & set(ids.values())
    names = [d.blocks[b].name for b in new]
    assert names == ["squeeze_1", "mix_1"]  # taken names get a fresh number
    assert Wire(new[0], 0, new[1], 0) in d.wires
    assert not [w for w in d.wires if (w.src in new) != (w.dst in new)]  # no wire to the originals
    assert d.blocks[new[0]].position == (d.blocks[ids["squeeze"]].position[0] + 40,
                                         d.blocks[ids["squeeze"]].position[1] + 40)
    QTest.keyClick(view, Qt.Key.Key_D, Qt.KeyboardModifier.ControlModifier)
    assert len(d.blocks) == 9 and len(d.wires) == 6
    doc.undo_stack.undo()
    doc.undo_stack.undo()
    assert len(d.blocks) == 5 and len(view.canvas_scene.blocks) == 5 and len(view.canvas_scene.wires) == 4


def test_tidy_is_one_undo_step(qtbot):
    d, _ = residual_clash()
    with d.bulk():
        for i, b in enumerate(list(d.blocks)):
            d.apply(edits.move(d, {b: (37.0 * i, -90.0 * (i % 2))}))
    scrambled = {b.id: b.position for b in d.blocks.values()}
    view = open_view(qtbot, d)
    view.tidy()
    assert view.document.undo_stack.count() == 1 and view.document.undo_stack.undoText() == "Tidy"
    tidied = {b.id: b.position for b in d.blocks.values()}
    assert tidied != scrambled and tidied == tidy_positions(d)
    view.document.undo_stack.undo()
    assert {b.id: b.position for b in d.blocks.values()} == scrambled
    assert all((i.pos().x(), i.pos().y()) == scrambled[b] for b, i in view.canvas_scene.blocks.items())


def test_rename_in_place_by_double_click_and_by_f2(qtbot):
    d = squeeze_chain()
    view = open_view(qtbot, d)
    doc = view.document
    mix = next(b.id for b in d.blocks.values() if b.name == "mix")
    title = card(view, mix).mapToScene(card(view, mix).title_rect().center())
    QTest.mouseDClick(view.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, at(view, title))
    editor = view._names
    assert editor.isVisible() and editor.text() == "mix" and editor.parentWidget() is view
    shot(view, "canvas_rename")
    editor.selectAll()
    QTest.keyClicks(editor, "mix_3x3")
    QTest.keyClick(editor, Qt.Key.Key_Return)
    assert d.blocks[mix].name == "mix_3x3" and card(view, mix).state.title == "mix_3x3"
    assert not editor.isVisible()
    doc.select([mix])
    QTest.keyClick(view, Qt.Key.Key_F2)
    assert editor.isVisible()
    QTest.keyClick(editor, Qt.Key.Key_Escape)
    assert d.blocks[mix].name == "mix_3x3" and doc.undo_stack.count() == 1
    doc.undo_stack.undo()
    assert card(view, mix).state.title == "mix"


# ----- the scene follows the model --------------------------------------------------------------

def test_scene_follows_settings_edits_and_undo_restores_the_document_exactly(qtbot):
    d = squeeze_chain()
    view = open_view(qtbot, d)
    doc = view.document
    ids = {b.name: b.id for b in d.blocks.values()}
    before = dumps(d)
    doc.apply(edits.set_settings(d, ids["squeeze"], {"out_channels": 32}))
    assert wire_item(view, Wire(ids["squeeze"], 0, ids["mix"], 0)).label == "32×28×28"
    assert card(view, ids["squeeze"]).state.detail == "1×1 · 32"
    doc.undo_stack.undo()
    assert dumps(d) == before
    assert wire_item(view, Wire(ids["squeeze"], 0, ids["mix"], 0)).label == "64×28×28"
    doc.undo_stack.redo()
    assert card(view, ids["squeeze"]).state.shape == "32×28×28"


def test_selection_is_shared_with_the_document_both_ways(qtbot):
    d = squeeze_chain()
    view = open_view(qtbot, d)
    doc = view.document
    ids = {b.name: b.id for b in d.blocks.values()}
    doc.select([ids["mix"]])
    assert [i.block_id for i in view.canvas_scene.selectedItems()] == [ids["mix"]]
    QTest.mouseClick(view.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                     at(view, card(view, ids["expand"]).mapToScene(QPointF(W / 2, H - 10))))
    assert doc.selection == [ids["expand"]]
    # a rubber band from empty canvas over the first two cards
    drag(view, at(view, (-40, -40)), at(view, (230 + W / 2, H + 20)))
    assert set(doc.selection) == {ids["wide"], ids["squeeze"]}


@pytest.mark.parametrize("sample", sorted(p.stem for p in SAMPLES.glob("*.loom")))
def test_samples_open_with_one_card_per_block(qtbot, sample, tmp_path):
    d = load(SAMPLES / f"{sample}.loom")
    view = open_view(qtbot, d, size=(1400, 700))
    view.fit_all()
    scene = view.canvas_scene
    assert set(scene.blocks) == set(d.blocks)  # folded blocks are chips of a card
    assert set(scene.wires) == {w for w in d.wires if scene.card_of(w.src) != scene.card_of(w.dst)}
    errors = {f.block for f in d.findings() if f.severity == "error"}
    assert {b for b, i in scene.blocks.items() if i.state.status == "error"} == errors
    for b in d.of_kind("Motif"):  # a motif instance shows its motif's name, × N and the MACs of all its repeats
        assert scene.blocks[b.id].state.detail == f"{b.settings['motif']} × {b.settings['repeat']}"
        assert scene.blocks[b.id].state.cost == f"{units.count(d.analysis().result(b.id).cost.macs)} MACs"
    shot(view, f"sample_{sample}")
    view.resetTransform()
    view.center_on(min(errors) if errors else next(iter(d.blocks)))
    shot(view, f"sample_{sample}_close")
    view.save_png(SHOTS / f"sample_{sample}_whole.png")
    assert view.save_svg(tmp_path / "c.svg") and b"<svg" in (tmp_path / "c.svg").read_bytes()[:400]


def test_wheel_zooms_about_the_cursor_and_the_middle_button_pans(qtbot):
    d = squeeze_chain()
    view = open_view(qtbot, d)
    vp = view.viewport()
    cursor = QPoint(300, 200)
    under = view.mapToScene(cursor)
    wheel = QWheelEvent(QPointF(cursor), QPointF(vp.mapToGlobal(cursor)), QPoint(), QPoint(0, 240),
                        Qt.MouseButton.NoButton, Qt.KeyboardModifier.NoModifier, Qt.ScrollPhase.NoScrollPhase, False)
    QApplication.sendEvent(vp, wheel)
    assert view.zoom_level() == pytest.approx(1.0015 ** 240)
    after = view.mapToScene(cursor)
    assert abs(after.x() - under.x()) < 2 and abs(after.y() - under.y()) < 2  # the point stays under the cursor
    before = view.mapToScene(QPoint(0, 0))
    QTest.mousePress(vp, Qt.MouseButton.MiddleButton, Qt.KeyboardModifier.NoModifier, QPoint(400, 300))
    move = QMouseEvent(QMouseEvent.Type.MouseMove, QPointF(340, 260), QPointF(vp.mapToGlobal(QPoint(340, 260))),
                       Qt.MouseButton.NoButton, Qt.MouseButton.MiddleButton, Qt.KeyboardModifier.NoModifier)
    QApplication.sendEvent(vp, move)
    QTest.mouseRelease(vp, Qt.MouseButton.MiddleButton, Qt.KeyboardModifier.NoModifier, QPoint(340, 260))
    panned = view.mapToScene(QPoint(0, 0))
    assert panned.x() > before.x() and panned.y() > before.y()  # dragging left and up shows more to the right
    assert view.document.undo_stack.count() == 0  # looking around is not an edit
