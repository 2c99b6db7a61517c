"""Stage rows, folded cards and readable zoom in the editor, driven as a user would."""
from __future__ import annotations

from pathlib import Path

import pytest
from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtTest import QTest

from layerloom import Design
from layerloom.core import edits, fileformat
from layerloom.core.wire_route import polyline_crosses
from layerloom.gui.canvas import stage_summary
from layerloom.gui.canvas.badge_item import BadgeItem
from layerloom.gui.canvas.block_item import BlockItem, H, W, far_zoom, pixel_size
from layerloom.gui.canvas.chips import ChipItem
from reference_nets import resnet50
from test_window_files import SAMPLES, open_window, press

SHOTS = Path(__file__).resolve().parents[1] / "screenshots"
READABLE = 9.0  # the target: on-screen text at least 9 pixels (em)


def window_on(qtbot, tmp_path, design_or_sample, size=(1280, 800)):
    if isinstance(design_or_sample, str):
        files = [SAMPLES / f"{design_or_sample}.loom"]
    else:
        path = tmp_path / "design.loom"
        fileformat.save(design_or_sample, path)
        files = [path]
    window, _ = open_window(qtbot, tmp_path, files)
    window.resize(*size)
    qtbot.wait(50)
    window.canvas.tidy()
    return window


def card_text_pixels(item: BlockItem, zoom: float) -> tuple[float, str]:
    """On-screen em size of a card's name and the name as drawn, from the item and the view's zoom."""
    if zoom >= far_zoom():
        return pixel_size("title") * zoom, item._title
    lines = item.far_lines(zoom)
    return (lines[0].pixels * zoom, lines[0].shown) if lines else (0.0, "")


def cards(scene):
    return [item for _, item in scene.cards()]


def path_points(wire) -> list:
    path = wire.path()
    return [(p.x(), p.y()) for p in (path.pointAtPercent(i / 60) for i in range(61))]


@pytest.mark.parametrize("sample", sorted(p.stem for p in SAMPLES.glob("*.loom")))
def test_at_fit_every_card_name_of_a_sample_is_readable_and_no_wire_passes_behind_a_card(qtbot, tmp_path, sample):
    window = window_on(qtbot, tmp_path, sample)
    canvas, scene = window.canvas, window.canvas.canvas_scene
    zoom = canvas.zoom_level()
    visible = canvas.mapToScene(canvas.viewport().rect()).boundingRect()
    for item in cards(scene):
        px, shown = card_text_pixels(item, zoom)
        assert px >= READABLE and shown == item.state.title, (item.state.title, px, shown)
        assert visible.contains(item.sceneBoundingRect().adjusted(4, 4, -4, -4))
    rects = {b: (i.pos().x() + 1, i.pos().y() + 1, i.pos().x() + W - 1, i.pos().y() + H - 1) for b, i in scene.cards()}
    for w, wire in scene.wires.items():
        ends = {scene.card_of(w.src), scene.card_of(w.dst)}
        points = [(ln.x1(), ln.y1()) for ln in wire.lines] + [(wire.lines[-1].x2(), wire.lines[-1].y2())]
        if len(wire.lines) == 1:  # a curve: sample it
            points = path_points(wire)
        assert not [b for b, r in rects.items() if b not in ends and polyline_crosses(points, r)], w
    assert window.zoom_label.text() == f"{zoom * 100:.0f} %"
    for size in ((1280, 800), (1920, 1080)):
        window.resize(*size)
        qtbot.wait(30)
        canvas.fit_all()
        window.grab().save(str(SHOTS / f"stage_rows_{sample}_{size[0]}.png"))
    window.close()


def test_a_flat_resnet50_at_fit_labels_every_stage_readably(qtbot, tmp_path):
    d = resnet50()  # torchvision's ResNet-50 (torchvision documentation), flat: a stem of 4 layers, 16
    # bottlenecks of 10 (3 convolutions, 3 norms, 2 ReLUs, the Add and its ReLU), 4 projections of 2,
    # pool, flatten and the Linear: 175 layers, with the Input and the Output 177 blocks
    assert len(d.blocks) == 177
    window = window_on(qtbot, tmp_path, d)
    canvas = window.canvas
    assert canvas.shows_stage_summaries()
    labels = stage_summary.labels(canvas)
    names = [label.text.split(" · ")[0] for label in labels]
    assert names == ["input", "stage 1", "stage 2", "stage 3", "stage 4", "stage 5", "head"]
    shapes = [label.text.split(" · ")[1] for label in labels]
    # each stage's output, from torchvision's ResNet-50 (torchvision documentation): 64×112×112 after
    # the stem convolution, 256/512/1024/2048 channels at 56/28/14/7, 1000 classes
    assert shapes == ["3×224×224", "64×112×112", "256×56×56", "512×28×28", "1024×14×14", "2048×7×7", "1000"]
    view_rect = QRectF(canvas.viewport().rect())
    for i, label in enumerate(labels):
        assert label.pixels * 1.0 >= READABLE  # drawn in viewport pixels, whatever the zoom
        assert view_rect.contains(label.rect)
        assert not any(label.rect.intersects(other.rect) for other in labels[i + 1:])
    window.grab().save(str(SHOTS / "stage_rows_resnet50_fit.png"))
    press(qtbot, window, "actual_size")
    assert canvas.zoom_level() == 1.0 and window.zoom_label.text() == "100 %"
    assert not canvas.shows_stage_summaries()
    window.grab().save(str(SHOTS / "stage_rows_resnet50_100.png"))
    window.close()


def folded_design():
    d = Design("folds")
    x = d.input(3, 32, 32)
    c = d.add("Conv2d", x, out_channels=16, kernel=3, stride=2, padding=1)
    bn = d.add("BatchNorm2d", c)
    act = d.add("ReLU6", bn)
    f = d.add("Linear", d.add("Flatten", act), out_features=10)
    bad = d.add("BatchNorm2d", f)  # a batch norm fed a flat vector: an error on a chip
    d.add("Output", bad)
    return d, c, bn, act, f, bad


def folded_window(qtbot, tmp_path):
    """A 1280×800 window on :func:`folded_design`, tidied: (window, canvas, document, its design,
    the ids of conv, bn, act, fc and the faulty bn)."""
    d, *ids = folded_design()
    window = window_on(qtbot, tmp_path, d)
    return window, window.canvas, window.document, window.document.design, ids


def test_chips_sit_inside_their_card_select_their_block_and_carry_their_findings(qtbot, tmp_path):
    window, canvas, doc, d, (c, bn, act, f, bad) = folded_window(qtbot, tmp_path)
    scene = canvas.canvas_scene
    assert isinstance(scene.blocks[bn], ChipItem) and isinstance(scene.blocks[act], ChipItem)
    card = scene.blocks[c]
    assert card.state.chips == ("BN", "ReLU6") and [i.block_id for i in card.chip_items] == [bn, act]
    for chip in card.chip_items:  # inside the card
        assert card.sceneBoundingRect().contains(chip.sceneBoundingRect())
    assert card.state.shape == "16×16×16"  # the card's output is its last chip's (Conv2d size formula)
    before = {b: d.blocks[b].position for b in (c, bn, act)}
    doc.select([c])
    card.setPos(card.pos() + QPointF(0, 500))  # dragged: its chips go with it, in the design too
    canvas._commit_moves()
    assert all(d.blocks[b].position == (x, y + 500) for b, (x, y) in before.items())
    doc.undo_stack.undo()
    press(qtbot, window, "actual_size")
    canvas.centerOn(card)
    chip = scene.blocks[act]
    QTest.mouseClick(canvas.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                     canvas.mapFromScene(chip.mapToScene(chip.shape().boundingRect().center())))
    assert doc.selection == [act] and window.block_settings.isVisible()
    assert scene.blocks[bad].state.status == "error"
    badges = scene.badges[bad]
    assert badges and isinstance(badges[0], BadgeItem) and badges[0].parentItem() is scene.blocks[bad]
    assert {w.dst for w in scene.wires} >= {f} and all(scene.card_of(w.dst) != scene.card_of(w.src) for w in scene.wires)
    canvas.centerOn(card)
    window.grab().save(str(SHOTS / "chips_folded_100.png"))
    # file and ledger are the same folded or not
    assert len(d.blocks) == 8 and d.blocks[bn].kind == "BatchNorm2d"

    fold = window.findChild(type(window.menuBar().actions()[0]), "fold")
    fold.trigger()  # Unfold: every block its own card, tidied again in one undoable step
    assert not scene.fold and all(isinstance(scene.blocks[b], BlockItem) for b in d.blocks)
    assert doc.undo_stack.undoText() == "Tidy"
    xs = {d.blocks[b].position for b in d.blocks}
    assert len(xs) == len(d.blocks)  # no two cards share a place
    window.grab().save(str(SHOTS / "chips_unfolded.png"))
    window.close()


def test_zoom_to_selection_and_the_zoom_readout(qtbot, tmp_path):
    window = window_on(qtbot, tmp_path, "fastener_sorter")
    canvas, doc = window.canvas, window.document
    target = next(b.id for b in doc.design.blocks.values() if b.name == "spatial_2")
    doc.select([target])
    press(qtbot, window, "zoom_to_selection")
    assert canvas.zoom_level() == pytest.approx(1.25)
    centre = canvas.mapToScene(canvas.viewport().rect().center())
    assert canvas.canvas_scene.blocks[target].sceneBoundingRect().adjusted(-60, -60, 60, 60).contains(centre)
    assert window.zoom_label.text() == "125 %"
    canvas.zoom_out()
    assert window.zoom_label.text() == "100 %"
    window.close()


def test_a_selected_chip_is_renamed_deleted_and_chained_from_like_a_block(qtbot, tmp_path):
    window, canvas, doc, d, (c, bn, act, f, bad) = folded_window(qtbot, tmp_path)
    doc.select([act])
    canvas.rename_selected()  # F2 on a chip edits its name over the chip
    assert canvas._names.isVisible()
    canvas._names.hide()
    canvas.setFocus()
    QTest.keyClicks(canvas, "dropout")  # Quick add from a chip: wired from it, placed right of its card
    QTest.keyClick(canvas._quick.edit, Qt.Key.Key_Return)
    (drop,) = [b.id for b in d.blocks.values() if b.kind == "Dropout"]
    assert any(w.src == act and w.dst == drop for w in d.wires)
    assert d.blocks[drop].position[0] > d.blocks[c].position[0] + W
    doc.select([bn])
    canvas.setFocus()
    steps = doc.undo_stack.count()
    QTest.keyClick(canvas, Qt.Key.Key_Delete)
    assert bn not in d.blocks and doc.undo_stack.count() == steps + 1
    window.close()


def test_unfolding_blocks_that_share_their_cards_place_gives_them_places(qtbot, tmp_path):
    window, canvas, doc, d, (c, bn, act, f, bad) = folded_window(qtbot, tmp_path)
    x, y = d.blocks[c].position
    moved = (x + 37, y + 11)  # the user moved the card (no longer Tidy's layout); its chips share its place
    doc.apply(edits.move(d, {c: moved, bn: moved, act: moved}))
    canvas.set_fold(False)
    places = [tuple(b.position) for b in d.blocks.values()]
    assert len(set(places)) == len(places) and doc.undo_stack.undoText() == "Tidy"
    window.close()


def _drawn_stroke(wire):
    from PySide6.QtGui import QPainterPathStroker

    stroker = QPainterPathStroker()
    stroker.setWidth(wire.width)
    return stroker.createStroke(wire.path())


def assert_labels_touch_nothing(scene):
    """Each shown label keeps clear of every card and every wire as drawn (Qt's own stroke of the
    drawn path, not our sampled pieces) and of every other label."""
    labels = {w: item.label_rect for w, item in scene.wires.items() if item.label_box is not None}
    cards = [item.sceneBoundingRect().adjusted(*(2 * [BOUNDS_PAD] + 2 * [-BOUNDS_PAD]))
             for _, item in scene.cards()]
    strokes = {w: _drawn_stroke(item) for w, item in scene.wires.items()}
    for w, rect in labels.items():
        assert not any(rect.intersects(c) for c in cards), (w, rect)
        assert not [x for x, s in strokes.items() if s.intersects(rect)], (w, rect)
        assert not any(rect.intersects(r) for x, r in labels.items() if x != w), (w, rect)
    return labels


BOUNDS_PAD = 7.0  # a card item's bounds reach this far past the card (outline and selection room)


@pytest.mark.parametrize("sample", sorted(p.stem for p in SAMPLES.glob("*.loom")))
def test_wire_labels_touch_no_wire_card_or_label_also_after_a_mend(qtbot, tmp_path, sample):
    window = window_on(qtbot, tmp_path, sample)
    scene = window.canvas.canvas_scene
    window.canvas.actual_size()  # close up: labels are placed (far out they are not drawn)
    assert assert_labels_touch_nothing(scene)  # the labels in view are placed at once
    scene.set_label_region(None)  # every label, as a picture of the whole canvas places them
    labels = assert_labels_touch_nothing(scene)
    assert len(labels) >= len(scene.wires) // 2  # most wires still say their shape
    d = window.document.design
    errors = [f for f in d.findings() if f.severity == "error"]
    if errors:  # the clash sample: its mend adds a projection on the shortcut, wires split and kink
        from layerloom.core.mends import mends_for

        scene.apply_mend(mends_for(d, errors[0])[0])
        scene.set_label_region(None)
        assert_labels_touch_nothing(scene)
        window.canvas.tidy()
        window.canvas.actual_size()
        scene.set_label_region(None)
        assert_labels_touch_nothing(scene)
    shoot_canvas = window.canvas.grab()
    SHOTS.mkdir(exist_ok=True)
    shoot_canvas.save(str(SHOTS / f"labels_{sample}.png"))
    window.close()


def test_a_mend_on_a_tidy_design_keeps_it_tidy_in_the_same_undo_step(qtbot, tmp_path):
    from layerloom.core.fileformat import dumps
    from layerloom.core.mends import mends_for

    window = window_on(qtbot, tmp_path, "shelf_gap_counter_clash")
    canvas, doc = window.canvas, window.document
    d = doc.design
    assert canvas.is_tidy()
    before, steps = dumps(d), doc.undo_stack.count()
    (error,) = [f for f in d.findings() if f.severity == "error"]
    window.shelf.findings.mend_applier(mends_for(d, error)[0])  # as the Findings tab's Mend button does
    added = [b for b in d.blocks.values() if b.name not in before]
    assert added and not [f for f in d.findings() if f.severity == "error"]
    assert canvas.is_tidy() and doc.undo_stack.count() == steps + 1  # laid out again, one step
    card = canvas.canvas_scene.blocks[added[0].id].sceneBoundingRect()
    assert not any(card.intersects(i.sceneBoundingRect()) for b, i in canvas.canvas_scene.cards() if b != added[0].id)
    doc.undo_stack.undo()
    assert dumps(d) == before  # the mend and its Tidy undone together, every position as it was
    doc.undo_stack.redo()
    assert canvas.is_tidy() and {b.id for b in added} <= set(d.blocks)
    window.close()
