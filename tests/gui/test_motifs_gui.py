"""Motifs in the editor, driven as a user would (pytest-qt, real widgets, offscreen): make a motif from
a selection, open it, change a block inside and see every use follow, go back, expand, undo each
step; expose a setting as a parameter; drop a library motif; open a finding inside a motif; save
and reopen. Screenshots go to tests/screenshots/.
"""
from __future__ import annotations

from PySide6.QtCore import QPointF, Qt
from PySide6.QtGui import QDragEnterEvent, QDropEvent
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QApplication

from layerloom import Design
from layerloom.core import fileformat, units
from layerloom.core.fileformat import dumps
from layerloom.core.graph import Wire
from layerloom.gui.canvas.block_item import H, W, BlockItem
from test_canvas import SHOTS, at, drag
from test_flows import shoot
from test_window_files import SAMPLES, open_window, press
from test_window_panels import type_into

# MACs of a convolution: out channels · out height · out width · in channels · kernel area (common practice;
# torch.utils.flop_counter.FlopCounterMode counts twice this, as FLOPs)
WIDEN_MACS = 32 * 32 * 32 * 16 * 9  # 3×3, 16 → 32 channels on 32×32
NARROW_MACS = 16 * 32 * 32 * 32  # 1×1, 32 → 16 channels on 32×32


def widen_design() -> Design:
    """A 16-channel residual unit in a row: widen (3×3 to 32), norm, ReLU, narrow (1×1 back to 16), join."""
    d = Design("drill-bit-wear-sorter")
    x = d.input(16, 32, 32, name="frame")
    a = d.add("Conv2d", x, out_channels=32, kernel=3, padding=1, name="widen", position=(230, 0))
    b = d.add("BatchNorm2d", a, name="norm", position=(460, 0))
    c = d.add("ReLU", b, name="act", position=(690, 0))
    e = d.add("Pointwise", c, out_channels=16, name="narrow", position=(920, 0))
    s = d.add("Add", e, x, name="join", position=(1150, 0))
    d.add("Output", s, name="out", position=(1380, 0))
    return d


def window_with(qtbot, tmp_path, design, names=()):
    path = tmp_path / f"{design.name}.loom"
    fileformat.save(design, path)
    window, prompts = open_window(qtbot, tmp_path, [path])
    prompts.names = list(names)
    qtbot.wait(50)  # the docks take their first-run sizes once the window is laid out
    window.canvas.fit_all()
    return window, prompts


def inside_new_motif(qtbot, tmp_path, names):
    """A window on the widen design whose middle four blocks were made a motif (named from
    ``names``), opened with its widening convolution selected; returns (window, prompts, ids, unit)."""
    window, prompts = window_with(qtbot, tmp_path, widen_design(), names=names)
    doc = window.document
    ids = {b.name: b.id for b in doc.design.blocks.values()}
    doc.select([ids["widen"], ids["norm"], ids["act"], ids["narrow"]])
    unit = window.canvas.make_motif()
    window.canvas.open_motif(unit)
    doc.select([ids["widen"]])
    return window, prompts, ids, unit


def card_point(window, block_id, x=W / 2, y=H - 8):  # below the chips of a folded card
    item = window.canvas.canvas_scene.blocks[block_id]
    if not isinstance(item, BlockItem):  # a chip of a folded card: its middle
        return at(window.canvas, item.mapToScene(item.shape().boundingRect().center()))
    return at(window.canvas, item.mapToScene(QPointF(x, y)))


def click_card(window, block_id, modifier=Qt.KeyboardModifier.NoModifier):
    QTest.mouseClick(window.canvas.viewport(), Qt.MouseButton.LeftButton, modifier, card_point(window, block_id))


def drop_payload(window, tile, scene_point: QPointF) -> None:
    """Drop a shelf tile's own MIME data on the canvas at ``scene_point`` (enter, then drop)."""
    canvas, data = window.canvas, tile.mime_data()
    point = canvas.mapFromScene(scene_point)
    copy, left, plain = Qt.DropAction.CopyAction, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier
    enter = QDragEnterEvent(point, copy, data, left, plain)
    assert QApplication.sendEvent(canvas.viewport(), enter) and enter.isAccepted()
    QApplication.sendEvent(canvas.viewport(), QDropEvent(QPointF(point), copy, data, left, plain))


def detail(window, block_id) -> str:
    return window.canvas.canvas_scene.blocks[block_id].state.detail


def cost(window, block_id) -> str:
    return window.canvas.canvas_scene.blocks[block_id].state.cost


def test_make_open_edit_back_expand_and_undo_each_step(qtbot, tmp_path):
    d = widen_design()
    window, prompts = window_with(qtbot, tmp_path, d, names=["widen_unit"])
    doc, canvas = window.document, window.canvas
    d = doc.design
    ids = {b.name: b.id for b in d.blocks.values()}
    before, totals = dumps(d), d.ledger().totals
    # a rubber band from empty canvas above-left of widen to below-right of narrow
    drag(canvas, at(canvas, (200, -40)), at(canvas, (920 + W + 20, H + 40)))
    assert set(doc.selection) == {ids[n] for n in ("widen", "norm", "act", "narrow")}
    press(qtbot, window, "make_motif")
    assert prompts.asked[-1][0] == "Make motif"
    (unit,) = [b.id for b in d.of_kind("Motif")]
    assert doc.selection == [unit] and doc.undo_stack.count() == 1
    assert set(d.blocks) == {ids["frame"], ids["join"], ids["out"], unit}
    assert {Wire(ids["frame"], 0, unit, 0), Wire(unit, 0, ids["join"], 0)} <= set(d.wires)  # crossings became ports
    ins, outs = d.motifs["widen_unit"].ports()
    assert (len(ins), len(outs)) == (1, 1)
    assert d.ledger().totals.macs == totals.macs == WIDEN_MACS + NARROW_MACS
    assert detail(window, unit) == "widen_unit × 1"
    assert cost(window, unit) == f"{units.count(WIDEN_MACS + NARROW_MACS)} MACs"
    assert canvas.canvas_scene.blocks[unit].state.shape == "16×32×32"

    # a second use: the design's own motif tile dropped with the instance selected is wired from it
    tile = window.shelf.parts.motif_tiles["design:widen_unit"]
    drop_payload(window, tile, QPointF(800, 300))
    (second,) = [b.id for b in d.of_kind("Motif") if b.id != unit]
    assert Wire(unit, 0, second, 0) in d.wires and doc.undo_stack.count() == 2
    canvas.resetTransform()
    canvas.scale(1.5, 1.5)
    canvas.centerOn(canvas.canvas_scene.blocks[unit].sceneBoundingRect().center() + QPointF(0, 120))
    shoot(window, "motif_instance_cards")

    # open the first use by double-click: the trail says where we are and whose shapes show
    QTest.mouseDClick(canvas.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                      card_point(window, unit))
    assert doc.graph_key == "widen_unit" and window.trail.isVisible()
    assert [c.text() for c in window.trail.crumbs] == [d.name] and window.trail.here.text() == "widen_unit"
    assert window.trail.note.text() == f"shapes as in {d.blocks[unit].name}"
    scene = canvas.canvas_scene
    assert set(scene.blocks) == set(d.motifs["widen_unit"].blocks)
    assert scene.blocks[ids["widen"]].state.shape == "32×32×32"  # padding 1 keeps 32×32 (Conv2d formula)
    assert doc.undo_stack.count() == 2  # looking inside is not an edit

    # change the 3×3's filters inside: both uses follow
    click_card(window, ids["widen"])
    assert doc.selection == [ids["widen"]]
    type_into(qtbot, window.block_settings.fields["out_channels"].widget, "48")
    assert d.motifs["widen_unit"].blocks[ids["widen"]].settings["out_channels"] == 48
    assert scene.blocks[ids["widen"]].state.shape == "48×32×32"
    assert Wire(ids["act"], 0, ids["narrow"], 0) in scene.wires and scene.wires[
        Wire(ids["act"], 0, ids["narrow"], 0)].label == "48×32×32"  # norm and act are chips of widen
    wider = 48 * 32 * 32 * 16 * 9 + 16 * 32 * 32 * 48
    assert d.ledger().totals.macs == 2 * wider
    assert "one use" in window.block_settings.facts.text()
    shoot(window, "motif_inside_with_trail")

    # back by the trail's button: the design again, the opened instance selected, both cards updated
    qtbot.mouseClick(window.trail.back_button, Qt.MouseButton.LeftButton)
    assert doc.graph_key == "" and not window.trail.isVisible() and doc.selection == [unit]
    assert set(canvas.canvas_scene.blocks) == set(d.blocks)
    for instance in (unit, second):
        assert cost(window, instance) == f"{units.count(wider)} MACs"

    # expand the second use into plain blocks
    doc.select([second])
    press(qtbot, window, "expand_motif")
    assert second not in d.blocks and len(d.of_kind("Motif")) == 1
    assert sorted(b.kind for b in d.blocks.values() if b.id in doc.selection) == [
        "BatchNorm2d", "Conv2d", "Pointwise", "ReLU"]
    assert d.ledger().totals.macs == 2 * wider
    assert doc.undo_stack.count() == 4

    # undo each step: expand, the setting, the drop, making the motif
    doc.undo_stack.undo()
    assert second in canvas.canvas_scene.blocks
    doc.undo_stack.undo()
    assert cost(window, unit) == f"{units.count(WIDEN_MACS + NARROW_MACS)} MACs"
    doc.undo_stack.undo()
    assert second not in d.blocks
    doc.undo_stack.undo()
    assert dumps(d) == before and set(canvas.canvas_scene.blocks) == set(d.blocks)


def test_undoing_the_motif_while_inside_it_returns_to_the_design(qtbot, tmp_path):
    d = widen_design()
    window, _ = window_with(qtbot, tmp_path, d, names=["pair"])
    doc = window.document
    d = doc.design
    ids = {b.name: b.id for b in d.blocks.values()}
    click_card(window, ids["norm"])
    click_card(window, ids["act"], Qt.KeyboardModifier.ControlModifier)
    assert set(doc.selection) == {ids["norm"], ids["act"]}
    menu = window.canvas.motif_menu()
    assert [(a.text(), a.isEnabled()) for a in menu.actions()] == [
        ("Make motif…", True), ("Open motif", False), ("Expand motif", False), ("Back", False)]
    unit = window.canvas.make_motif()
    assert d.blocks[unit].settings["motif"] == "pair"
    menu = window.canvas.motif_menu()
    assert [a.isEnabled() for a in menu.actions()] == [True, True, True, False]
    press(qtbot, window, "open_motif")
    assert doc.graph_key == "pair"
    doc.undo_stack.undo()
    assert doc.graph_key == "" and "pair" not in d.motifs
    assert set(window.canvas.canvas_scene.blocks) == set(d.blocks)


def test_expose_a_setting_as_a_motif_parameter_and_set_it_per_instance(qtbot, tmp_path):
    window, prompts, ids, unit = inside_new_motif(qtbot, tmp_path, ["gate", "width"])
    doc, panel, d = window.document, window.block_settings, window.document.design
    field = panel.fields["out_channels"]
    assert field.expose_button is not None and field.expose_button.isEnabled()
    assert "kernel" in panel.fields and panel.fields["kernel"].expose_button.isEnabled()
    assert panel.fields["bias"].expose_button is None  # on/off is no whole number
    qtbot.mouseClick(field.expose_button, Qt.MouseButton.LeftButton)
    motif = d.motifs["gate"]
    assert motif.params == {"width": 32}
    assert motif.blocks[ids["widen"]].settings["out_channels"] == {"param": "width"}
    assert field.widget.text() == "width" and "italic" in field.widget.styleSheet()
    assert window.canvas.canvas_scene.blocks[ids["widen"]].state.detail == "3×3 · width"  # the card names it too
    assert not field.expose_button.isEnabled()
    shoot(window, "motif_exposed_parameter")
    # the instance's Block settings show the parameter; a value there changes only that instance
    window.trail.crumbs[0].click()
    assert doc.graph_key == "" and doc.selection == [unit]
    assert panel.fields["width"].widget.text() == "32"
    type_into(qtbot, panel.fields["width"].widget, "64")
    assert d.blocks[unit].settings["width"] == 64
    assert d.ledger().totals.macs == 64 * 32 * 32 * 16 * 9 + 16 * 32 * 32 * 64
    type_into(qtbot, panel.fields["repeat"].widget, "3")
    assert d.blocks[unit].settings["repeat"] == 3
    assert detail(window, unit) == "gate × 3"
    # three stacked copies cost three times one (64 filters of 3×3 over 16 channels, then 1×1 back to 16)
    assert cost(window, unit) == f"{units.count(3 * (64 * 32 * 32 * 16 * 9 + 16 * 32 * 32 * 64))} MACs"
    # inside again: typing a number in the exposed field fixes it; typing the name exposes it again
    window.canvas.open_motif(unit)
    doc.select([ids["widen"]])
    type_into(qtbot, panel.fields["out_channels"].widget, "40")
    assert motif.blocks[ids["widen"]].settings["out_channels"] == 40
    type_into(qtbot, panel.fields["out_channels"].widget, "width")
    assert motif.blocks[ids["widen"]].settings["out_channels"] == {"param": "width"}
    steps = doc.undo_stack.count()
    for _ in range(steps):
        doc.undo_stack.undo()
    assert doc.graph_key == "" and not d.motifs


def test_dropping_a_library_motif_defines_it_and_adds_an_instance_in_one_step(qtbot, tmp_path):
    d = Design("pallet-crack-finder")
    d.input(256, 56, 56, name="features")
    window, _ = window_with(qtbot, tmp_path, d)
    doc = window.document
    d = doc.design
    before = dumps(d)
    (source,) = d.blocks
    doc.select([source])
    parts = window.shelf.parts
    tile = parts.motif_tiles["library:bottleneck"]
    assert tile.label.text() == "Bottleneck residual unit" and tile.isVisible()
    assert "design:bottleneck" not in parts.motif_tiles
    drop_payload(window, tile, QPointF(420, 20))
    (unit,) = d.of_kind("Motif")
    assert "bottleneck" in d.motifs and unit.settings["motif"] == "bottleneck"
    assert doc.undo_stack.count() == 1 and doc.selection == [unit.id]
    assert Wire(source, 0, unit.id, 0) in d.wires
    result = d.analysis().result(unit.id)
    # He et al. 2016 §4.1 (Fig. 5): 256 → 1×1, 64 → 3×3, 64 → 1×1, 256 has 69,632 weights without bias or norm;
    # each BatchNorm2d adds 2·C weights (PyTorch: sum(p.numel()) of nn.BatchNorm2d(C) is 2C)
    assert result.cost.weights == 69_632 + 2 * (64 + 64 + 256)
    assert str(result.outs[0]) == "256×56×56"
    assert "design:bottleneck" in parts.motif_tiles
    qtbot.keyClicks(parts.filter, "bottle")
    assert {p for p, t in parts.motif_tiles.items() if t.isVisible()} == {
        "library:bottleneck", "library:bottleneck_projection", "design:bottleneck"}
    parts.filter.clear()
    parts.scroll.ensureWidgetVisible(parts.motif_group.heading)
    QApplication.processEvents()
    parts.grab().save(str(SHOTS / "parts_motifs_group.png"))
    doc.undo_stack.undo()
    assert dumps(d) == before and "design:bottleneck" not in parts.motif_tiles


def test_a_finding_inside_a_motif_opens_the_motif_at_its_block(qtbot, tmp_path):
    d = Design("glove-seam-inspector")
    d.input(32, 28, 28, name="crops")
    window, _ = window_with(qtbot, tmp_path, d)
    doc = window.document
    d = doc.design
    doc.select([d.block("crops").id])
    drop_payload(window, window.shelf.parts.motif_tiles["library:residual_unit"], QPointF(420, 20))
    (unit,) = d.of_kind("Motif")
    window.canvas.add_kind("Output", QPointF(700, 20))
    motif = d.motifs["residual_unit"]
    residual = motif.block("residual").id
    # the unit's default width 64 meets 32 incoming channels at its identity shortcut
    window.show_findings()
    tree = window.shelf.findings.tree
    rows = [tree.topLevelItem(i) for i in range(tree.topLevelItemCount())]
    (row,) = [r for r in rows if r.text(1) == "join.channels"]
    assert row.text(2) == f"{unit.name} › residual"
    assert row.text(3).startswith(f"{unit.name} › ")
    qtbot.mouseClick(tree.viewport(), Qt.MouseButton.LeftButton, pos=tree.visualItemRect(row).center())
    assert doc.graph_key == "residual_unit" and doc.selection == [residual]
    canvas = window.canvas
    item = canvas.canvas_scene.blocks[residual]
    assert item.isSelected() and item.state.status == "error"
    centre = canvas.mapToScene(canvas.viewport().rect().center())
    assert item.sceneBoundingRect().adjusted(-40, -40, 40, 40).contains(centre)  # centred on it
    (badge,) = canvas.canvas_scene.badges[residual]
    assert badge.text == "32 ≠ 64"
    mends = canvas.canvas_scene.mends(badge.findings[0])
    assert mends[0].label == "Insert a 1×1 projection to 64 channels after input_1"
    shoot(window, "motif_finding_opened")
    canvas.canvas_scene.apply_mend(mends[0])  # mended inside the motif: the finding goes for every use
    assert not [f for f in d.findings() if f.code == "join.channels"]
    assert canvas.canvas_scene.blocks[residual].state.status == ""


def test_a_motif_without_use_shows_unknown_shapes(qtbot, tmp_path):
    d = Design("hinge-play-meter")
    d.input(8, 16, 16)
    window, _ = window_with(qtbot, tmp_path, d)
    doc = window.document
    drop_payload(window, window.shelf.parts.motif_tiles["library:se_gate"], QPointF(420, 20))
    (unit,) = doc.design.of_kind("Motif")
    window.canvas.delete_selection()
    assert not doc.design.of_kind("Motif") and "se_gate" in doc.design.motifs
    doc.open_motif("se_gate")
    assert window.trail.note.text() == "not used in the design yet: shapes unknown"
    assert all(i.state.shape == "" for i in window.canvas.canvas_scene.blocks.values())
    assert all(not w.known for w in window.canvas.canvas_scene.wires.values())


def test_save_and_reopen_keep_motifs_parameters_and_repeats(qtbot, tmp_path):
    window, prompts, ids, unit = inside_new_motif(qtbot, tmp_path, ["stage", "width"])
    doc, d = window.document, window.document.design
    qtbot.mouseClick(window.block_settings.fields["out_channels"].expose_button, Qt.MouseButton.LeftButton)
    doc.back()
    type_into(qtbot, window.block_settings.fields["width"].widget, "24")
    type_into(qtbot, window.block_settings.fields["repeat"].widget, "2")
    prompts.save_choice = tmp_path / "stage_saved"
    press(qtbot, window, "save_as")
    again, _ = open_window(qtbot, tmp_path, [tmp_path / "stage_saved.loom"])
    e = again.document.design
    assert dumps(e) == dumps(d)
    assert e.motifs["stage"].params == {"width": 32} and e.blocks[unit].settings == {
        "motif": "stage", "repeat": 2, "width": 24}
    assert e.ledger().totals == d.ledger().totals


def test_leaf_blight_sample_instance_cards(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path, [SAMPLES / "leaf_blight_grader.loom"])
    d = window.document.design
    scene = window.canvas.canvas_scene
    for b in d.of_kind("Motif"):
        r = d.analysis().result(b.id)
        assert scene.blocks[b.id].state.shape == str(r.outs[0])
        assert "Double-click to open" in scene.blocks[b.id].toolTip()
    first = d.of_kind("Motif")[0]
    window.canvas.resetTransform()
    window.canvas.scale(1.3, 1.3)
    window.canvas.center_on(first.id)
    shoot(window, "motif_sample_cards")
