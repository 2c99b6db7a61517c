"""Graph-editing basics on the canvas, driven with the mouse and keys: insert on a wire (drop and
Quick add), delete with and without bridging, replace a wire, every context-menu action, hover
texts, and Quick add's words, size and place. Each checks the design (widget → model) and the items
after an undo (model → widget).

Shapes: batch norm and ReLU keep their input's shape; a 1×1 convolution sets the channels to its
filters (common practice).
"""
from __future__ import annotations

from PySide6.QtCore import QPoint, QPointF, Qt, QTimer
from PySide6.QtGui import QContextMenuEvent, QHelpEvent
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QApplication, QToolTip

from layerloom.core import edits
from layerloom.core.design import Design
from layerloom.core.fileformat import dumps
from layerloom.core.graph import Wire
from layerloom.gui.canvas.block_item import W, port_y
from test_canvas import at, card, drag, drop_kind, open_view, residual_clash, shot, wire_item


def chain():
    """frame 8×32×32 → conv (16) → relu → out."""
    d = Design("bench-chain")
    x = d.input(8, 32, 32, name="frame")
    c = d.add("Conv2d", x, out_channels=16, name="conv", position=(230, 0))
    r = d.add("ReLU", c, name="relu", position=(460, 0))
    o = d.add("Output", r, name="out", position=(690, 0))
    return d, x, c, r, o


def open_unfolded(qtbot, design, **kw):
    """A canvas with Fold off, so the ReLU after the convolution is a card with wires of its own."""
    view = open_view(qtbot, design, **kw)
    view.canvas_scene.set_fold(False)
    return view


def wire_point(view, wire, t=0.5) -> QPoint:
    return at(view, wire_item(view, wire)._path.pointAtPercent(t))


def click(view, point: QPoint, modifier=Qt.KeyboardModifier.NoModifier) -> None:
    QTest.mouseClick(view.viewport(), Qt.MouseButton.LeftButton, modifier, point)


def right_click_pick(qtbot, view, point: QPoint, action_name: str) -> list[str]:
    """Right-click at ``point`` and click the menu action named ``menu_<action_name>``; returns the
    texts of the menu's actions."""
    seen = []

    def pick():
        menu = QApplication.activePopupWidget()
        seen.extend(a.text() for a in menu.actions() if a.text())
        action = next(a for a in menu.actions() if a.objectName() in (f"menu_{action_name}", action_name))
        assert action.isEnabled(), action.text()
        QTest.mouseClick(menu, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                         menu.actionGeometry(action).center())

    QTimer.singleShot(150, pick)
    QApplication.sendEvent(view.viewport(), QContextMenuEvent(QContextMenuEvent.Reason.Mouse, point,
                                                              view.viewport().mapToGlobal(point)))
    qtbot.waitUntil(lambda: bool(seen), timeout=3000)
    QApplication.processEvents()
    return seen


def quick_type(view, text: str) -> None:
    QTest.keyClicks(view._quick.edit, text)
    QTest.keyClick(view._quick.edit, Qt.Key.Key_Return)


# ----- insert on a wire ------------------------------------------------------------------------

def test_a_part_dropped_on_a_wire_is_wired_both_sides_and_undo_takes_it_out(qtbot):
    d, x, c, r, o = chain()
    view = open_unfolded(qtbot, d)
    with qtbot.waitActive(view):
        view.activateWindow()
    doc = view.document
    before = dumps(d)
    drop_kind(view, "BatchNorm2d", wire_point(view, Wire(c, 0, r, 0)))
    (bn,) = [b.id for b in d.of_kind("BatchNorm2d")]
    assert {Wire(c, 0, bn, 0), Wire(bn, 0, r, 0)} <= set(d.wires) and Wire(c, 0, r, 0) not in d.wires
    assert doc.undo_stack.count() == 1 and doc.selection == [bn]
    assert card(view, bn).state.shape == "16×32×32" and not d.findings()
    assert view.hasFocus()
    shot(view, "canvas_dropped_on_wire")
    doc.undo_stack.undo()
    assert dumps(d) == before and Wire(c, 0, r, 0) in view.canvas_scene.wires


def test_quick_add_on_a_selected_wire_inserts_there(qtbot):
    d, x, c, r, o = chain()
    view = open_unfolded(qtbot, d)
    click(view, wire_point(view, Wire(x, 0, c, 0), 0.3))
    assert wire_item(view, Wire(x, 0, c, 0)).isSelected()
    view.setFocus()
    QTest.keyClicks(view, "pw")
    assert view._quick.labels()[0] == "1×1 convolution · Pointwise"
    QTest.keyClick(view._quick.edit, Qt.Key.Key_Return)
    (pw,) = [b.id for b in d.of_kind("Pointwise")]
    assert {Wire(x, 0, pw, 0), Wire(pw, 0, c, 0)} <= set(d.wires)
    assert card(view, pw).state.shape == "64×32×32"  # 64 filters by default


def test_a_join_dropped_on_a_wire_is_refused_with_a_message(qtbot):
    d, x, c, r, o = chain()
    view = open_unfolded(qtbot, d)
    said = []
    view.message.connect(said.append)
    drop_kind(view, "Add", wire_point(view, Wire(c, 0, r, 0)))
    assert not d.of_kind("Add") and "one input and one output" in said[-1]


# ----- delete ------------------------------------------------------------------------------------

def test_delete_bridges_shift_delete_does_not_each_one_undo_step(qtbot):
    d, x, c, r, o = chain()
    view = open_unfolded(qtbot, d)
    doc = view.document
    before = dumps(d)
    click(view, at(view, card(view, r).sceneBoundingRect().center()))
    assert doc.selection == [r]
    QTest.keyClick(view, Qt.Key.Key_Delete)
    assert r not in d.blocks and Wire(c, 0, o, 0) in d.wires and not d.findings()
    assert Wire(c, 0, o, 0) in view.canvas_scene.wires
    assert doc.undo_stack.count() == 1
    doc.undo_stack.undo()
    assert dumps(d) == before and r in view.canvas_scene.blocks
    doc.select([r])
    QTest.keyClick(view, Qt.Key.Key_Delete, Qt.KeyboardModifier.ShiftModifier)
    assert r not in d.blocks and not d.in_wires[o]
    assert any(f.block == o for f in d.findings())  # the gap is left, and shows
    doc.undo_stack.undo()
    assert dumps(d) == before


# ----- replace a wire ----------------------------------------------------------------------------

def test_a_wire_dropped_on_a_taken_input_replaces_the_old_wire(qtbot):
    d, x, c, r, o = chain()
    view = open_unfolded(qtbot, d)
    doc = view.document
    start = card(view, x).mapToScene(QPointF(W - 2, port_y(0, 1)))
    end = card(view, r).mapToScene(QPointF(2, port_y(0, 1)))
    drag(view, at(view, start), at(view, end))
    assert d.in_wires[r] == [Wire(x, 0, r, 0)]  # one wire into relu: the old one went
    assert doc.undo_stack.undoText() == "Rewire relu" and doc.undo_stack.count() == 1
    assert Wire(c, 0, r, 0) not in view.canvas_scene.wires
    assert card(view, r).state.shape == "8×32×32"
    doc.undo_stack.undo()
    assert d.in_wires[r] == [Wire(c, 0, r, 0)] and Wire(c, 0, r, 0) in view.canvas_scene.wires


# ----- context menus -----------------------------------------------------------------------------

def test_block_menu_rename_duplicate_insert_and_delete(qtbot):
    d, x, c, r, o = chain()
    view = open_unfolded(qtbot, d)
    doc = view.document
    centre = lambda b: at(view, card(view, b).sceneBoundingRect().center())  # noqa: E731
    texts = right_click_pick(qtbot, view, centre(c), "rename")
    assert texts[:2] == ["Rename conv…", "Duplicate"] and "Delete without bridging" in texts
    assert "Make motif…" in texts
    QTest.keyClicks(view._names, "stem")
    QTest.keyClick(view._names, Qt.Key.Key_Return)
    assert d.blocks[c].name == "stem"
    right_click_pick(qtbot, view, centre(c), "duplicate")
    assert len(d.of_kind("Conv2d")) == 2
    doc.undo_stack.undo()
    right_click_pick(qtbot, view, centre(r), "insert_before")
    quick_type(view, "bn")
    (bn,) = [b.id for b in d.of_kind("BatchNorm2d")]
    assert {Wire(c, 0, bn, 0), Wire(bn, 0, r, 0)} <= set(d.wires)
    right_click_pick(qtbot, view, centre(r), "insert_after")
    quick_type(view, "drop")
    (drop,) = [b.id for b in d.of_kind("Dropout")]
    assert {Wire(r, 0, drop, 0), Wire(drop, 0, o, 0)} <= set(d.wires)
    right_click_pick(qtbot, view, centre(bn), "delete")
    assert Wire(c, 0, r, 0) in d.wires  # bridged
    right_click_pick(qtbot, view, centre(drop), "delete_unbridged")
    assert not d.in_wires[o]
    right_click_pick(qtbot, view, centre(x), "insert_before")  # an Input feeds nothing before it:
    assert view._quick.isVisible()
    view._quick.dismiss()
    right_click_pick(qtbot, view, centre(o), "insert_after")
    view._quick.dismiss()


def test_block_menu_offers_the_mends_of_its_findings_and_make_motif(qtbot):
    d, join = residual_clash()
    view = open_unfolded(qtbot, d)
    view.fit_all()
    texts = right_click_pick(qtbot, view, at(view, card(view, join).sceneBoundingRect().center()), "mend_0")
    assert "Mend: Insert a 1×1 projection to 128 channels after trunk" in texts
    assert not d.findings()
    view.ask_name = lambda title, label, suggested: "pair"
    trunk = next(b.id for b in d.blocks.values() if b.name == "trunk")
    right_click_pick(qtbot, view, at(view, card(view, trunk).sceneBoundingRect().center()), "make_motif")
    assert "pair" in d.motifs


def test_insert_before_a_block_with_nothing_before_it_wires_into_it(qtbot):
    d = Design("lonely")
    c = d.add("Conv2d", name="conv", position=(300, 0))
    view = open_unfolded(qtbot, d)
    right_click_pick(qtbot, view, at(view, card(view, c).sceneBoundingRect().center()), "insert_before")
    quick_type(view, "input")
    (inp,) = d.of_kind("Input")
    assert Wire(inp.id, 0, c, 0) in d.wires and inp.position[0] < d.blocks[c].position[0]


def test_wire_menu_inserts_a_block_and_deletes_the_wire(qtbot):
    d, x, c, r, o = chain()
    view = open_unfolded(qtbot, d)
    texts = right_click_pick(qtbot, view, wire_point(view, Wire(c, 0, r, 0)), "insert_on_wire")
    assert texts == ["Insert block…", "Delete wire"]
    quick_type(view, "bn")
    (bn,) = [b.id for b in d.of_kind("BatchNorm2d")]
    assert {Wire(c, 0, bn, 0), Wire(bn, 0, r, 0)} <= set(d.wires)
    right_click_pick(qtbot, view, wire_point(view, Wire(r, 0, o, 0)), "delete_wire")
    assert not d.in_wires[o] and Wire(r, 0, o, 0) not in view.canvas_scene.wires


def test_canvas_menu_quick_add_paste_tidy_and_fit(qtbot):
    d, x, c, r, o = chain()
    view = open_unfolded(qtbot, d)
    doc = view.document
    empty = at(view, (400, 300))
    texts = right_click_pick(qtbot, view, empty, "quick_add")
    assert texts == ["Quick add…", "Paste", "Tidy", "Fit to view"]
    quick_type(view, "gap")
    (pool,) = d.of_kind("AdaptiveAvgPool2d")
    assert abs(pool.position[0] + W / 2 - 400) <= 1  # landed where the menu was opened
    doc.select([c])
    view.copy()
    right_click_pick(qtbot, view, empty, "paste")
    assert len(d.of_kind("Conv2d")) == 2
    right_click_pick(qtbot, view, empty, "tidy")
    assert doc.undo_stack.undoText() == "Tidy"
    view.scale(3, 3)
    right_click_pick(qtbot, view, QPoint(5, 5), "fit")
    rect = view.mapFromScene(view.canvas_scene.itemsBoundingRect()).boundingRect()
    assert view.viewport().rect().contains(rect)


# ----- hover texts -------------------------------------------------------------------------------

def test_hover_texts_of_a_block_and_a_wire(qtbot):
    d, x, c, r, o = chain()
    d.set_field("dtype", "fp16")
    view = open_unfolded(qtbot, d)
    tip = view.tip_at(at(view, card(view, c).sceneBoundingRect().center()))
    # 16 filters of 3×3×8 plus 16 biases = 1,168 weights; 16·8·9 MACs per position × 32·32 = 1,179,648
    # (PyTorch: sum(p.numel()) of nn.Conv2d(8, 16, 3); FlopCounterMode counts 2 FLOPs per MAC)
    assert tip.splitlines()[0] == "conv — Convolution"
    assert "settings: 3×3 · 16" in tip and "in: 8×32×32" in tip and "out: 16×32×32" in tip
    assert "weights: 1.17 K" in tip and "MACs: 1.18 M (100% of the network)" in tip
    assert "receptive field: 3 px, jump 1" in tip
    wire_tip = view.tip_at(wire_point(view, Wire(c, 0, r, 0)))
    # 16·32·32 = 16,384 elements; at fp16 (2 bytes) that is 32 KiB
    assert wire_tip.splitlines() == ["conv → relu", "16×32×32: 16,384 elements per sample", "32 KiB at fp16, batch 1"]
    point = wire_point(view, Wire(c, 0, r, 0))
    QApplication.sendEvent(view.viewport(), QHelpEvent(QHelpEvent.Type.ToolTip, point,
                                                       view.viewport().mapToGlobal(point)))
    assert QToolTip.text() == wire_tip
    assert view.tip_at(at(view, (400, 400))) == ""
    view.document.apply(edits.disconnect(d, Wire(c, 0, r, 0)))  # relu loses its input: the hover says so
    assert view.tip_at(at(view, card(view, r).sceneBoundingRect().center())).splitlines()[-1].startswith("error: ")


# ----- Quick add ---------------------------------------------------------------------------------

def test_quick_add_sizes_its_list_says_no_match_and_opens_beside_the_selection(qtbot):
    d, x, c, r, o = chain()
    view = open_unfolded(qtbot, d, size=(1000, 560))
    with qtbot.waitActive(view):
        view.activateWindow()
    doc = view.document
    view.centerOn(card(view, o).sceneBoundingRect().center() - QPointF(view.viewport().width() / 2 - 130, 0))
    assert view.viewport().width() - at(view, card(view, o).sceneBoundingRect().topRight()).x() < 60  # near the edge
    doc.select([o])
    view.setFocus()
    QTest.keyClicks(view, "glo")
    popup = view._quick
    assert popup.labels() == ["Global / adaptive average pool · AdaptiveAvgPool2d"]
    assert popup.list.height() <= popup.list.sizeHintForRow(0) + 2 * popup.list.frameWidth()
    QTest.keyClicks(popup.edit, "bal")
    assert popup.list.isVisible() and not popup.empty.isVisible()
    geometry = popup.geometry()
    assert view.rect().contains(geometry)
    card_rect = view.mapFromScene(card(view, o).sceneBoundingRect()).boundingRect()
    assert not geometry.intersects(card_rect)  # beside the selected card, never over it
    widest = max(popup.list.fontMetrics().horizontalAdvance(t) for t in popup.labels())
    assert popup.list.viewport().width() >= widest
    shot(view, "quick_add_beside_right_edge")
    popup.edit.clear()
    QTest.keyClicks(popup.edit, "conv")
    n = popup.list.count()
    assert n >= 4 and popup.list.verticalScrollBar().maximum() == 0  # all rows shown, no scrolling
    assert all(popup.list.fontMetrics().horizontalAdvance(t) <= popup.list.viewport().width() for t in popup.labels())
    QTest.keyClicks(popup.edit, "qqq")
    assert popup.empty.isVisible() and popup.empty.text().startswith("no match") and not popup.list.isVisible()
    shot(view, "quick_add_no_match")
    QTest.keyClick(popup.edit, Qt.Key.Key_Escape)
    assert not popup.isVisible() and view.hasFocus()


def test_quick_add_adds_a_library_motif_by_its_everyday_word(qtbot):
    d, x, c, r, o = chain()
    view = open_unfolded(qtbot, d)
    view.document.select([r])
    view.setFocus()
    QTest.keyClicks(view, "se")
    assert view._quick.labels()[0] == "Squeeze-and-excite gate · motif"
    QTest.keyClick(view._quick.edit, Qt.Key.Key_Return)
    (unit,) = d.of_kind("Motif")
    assert unit.settings["motif"] in d.motifs and Wire(r, 0, unit.id, 0) in d.wires
    assert view.document.undo_stack.count() == 1


def test_arrow_keys_walk_the_selection_from_card_to_card(qtbot):
    d, x, c, r, o = chain()
    side = d.add("Pointwise", c, out_channels=4, name="side", position=(460, 160))
    view = open_unfolded(qtbot, d)
    doc = view.document
    doc.select([])
    view.setFocus()
    QTest.keyClick(view, Qt.Key.Key_Right)  # nothing selected: the first block
    assert doc.selection == [x]
    for expected in (c, r, o):
        QTest.keyClick(view, Qt.Key.Key_Right)
        assert doc.selection == [expected]
    QTest.keyClick(view, Qt.Key.Key_Left)
    QTest.keyClick(view, Qt.Key.Key_Down)
    assert doc.selection == [side]
    QTest.keyClick(view, Qt.Key.Key_Down)  # nothing further down: stays
    assert doc.selection == [side]
    QTest.keyClick(view, Qt.Key.Key_Up)
    assert doc.selection == [r]


def test_with_fold_on_a_chip_is_a_block_for_menus_hover_and_delete(qtbot):
    d, x, c, r, o = chain()
    bn = d.add("BatchNorm2d", c, name="bn", position=(345, 0))
    d.apply(edits.replace_wire(d, Wire(bn, 0, r, 0)))
    view = open_view(qtbot, d)
    scene = view.canvas_scene
    assert scene.fold and scene.card_of(r) == c and scene.card_of(bn) == c  # conv ▸ BN ▸ ReLU in one card
    chip = scene.blocks[r]
    point = at(view, chip.sceneBoundingRect().center())
    assert view.tip_at(point).splitlines()[0] == "relu — ReLU"
    texts = right_click_pick(qtbot, view, point, "delete")
    assert texts[0] == "Rename relu…" and view.document.selection == []
    assert r not in d.blocks and Wire(bn, 0, o, 0) in d.wires  # bridged past the removed chip
    view.document.select([bn])
    view.setFocus()
    QTest.keyClick(view, Qt.Key.Key_Right)  # from a chip, the next card after its card
    assert view.document.selection == [o]


def test_motif_commands_from_the_block_and_canvas_menus(qtbot):
    from layerloom.core.motif_library import define

    d = Design("gated")
    x = d.input(8, 16, 16, name="frame")
    define(d, "se_gate", "gate")
    unit = d.use("gate", x, channels=8, reduced=2)
    d.add("Output", unit, name="out", position=(600, 0))
    d.apply(edits.move(d, {unit: (300.0, 0.0)}))
    view = open_unfolded(qtbot, d)
    centre = lambda: at(view, card(view, unit).sceneBoundingRect().center())  # noqa: E731
    texts = right_click_pick(qtbot, view, centre(), "open_motif")
    assert "Expand motif" in texts and "Back" not in texts  # only the motif commands that apply
    assert view.document.graph_key == "gate"
    right_click_pick(qtbot, view, QPoint(5, 5), "back")
    assert view.document.graph_key == ""
    right_click_pick(qtbot, view, centre(), "expand_motif")
    assert not d.of_kind("Motif") and len(d.blocks) > 3
