"""Far out, the canvas draws every card and wire in a few calls instead of item by item."""
from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QPointF
from PySide6.QtWidgets import QGraphicsItem

from layerloom import Design
from layerloom.core import edits
from layerloom.gui import theme
from layerloom.gui.canvas import CanvasView
from layerloom.gui.document import Document

SHOTS = Path(__file__).resolve().parents[2] / "tests" / "screenshots"
NO_CONTENTS = QGraphicsItem.GraphicsItemFlag.ItemHasNoContents


def long_chain(n: int = 60) -> tuple[Design, list[str]]:
    d = Design()
    ids = [d.input(8, 32, 32)]
    for i in range(n):
        ids.append(d.add("Conv2d", ids[-1], out_channels=8, kernel=3, padding=1, position=(230.0 * (i + 1), 0.0)))
    d.add("Output", ids[-1], position=(230.0 * (n + 1), 0.0))
    return d, ids


def chain_view(qtbot):
    """The long chain in a shown 900×500 canvas: (design, block ids, document, view)."""
    d, ids = long_chain()
    doc = Document(d)
    view = CanvasView(doc)
    qtbot.addWidget(view)
    view.resize(900, 500)
    view.show()
    return d, ids, doc, view


def colours(view) -> dict:
    _, groups = view.canvas_scene.overview_shapes()
    return {c.name(): rects for c, rects in groups}


def test_far_out_items_stop_painting_and_the_view_draws_them(qtbot):
    d, ids, doc, view = chain_view(qtbot)
    scene = view.canvas_scene
    view.resetTransform()
    assert not scene.overview
    view.scale(0.05, 0.05)  # a card is 8 pixels wide: below the speck zoom
    assert scene.overview and all(item.flags() & NO_CONTENTS for item in scene.items())
    lines, _ = scene.overview_shapes()
    assert len(lines) == len(d.wires) and sum(len(r) for r in colours(view).values()) == len(d.blocks)

    doc.apply(edits.set_settings(d, ids[30], {"groups": 3}))  # 8 channels do not split in 3: an error
    assert [r.x() for r in colours(view)[theme.ERROR.name()]] == [d.blocks[ids[30]].position[0]]
    doc.select([ids[10]])
    assert [r.x() for r in colours(view)[theme.ACCENT.name()]] == [d.blocks[ids[10]].position[0]]

    item = scene.blocks[ids[10]]
    item.setPos(item.pos() + QPointF(0, 400))  # dragging keeps the drawing in step
    scene.follow_moved_cards([item])  # what a drag step does after Qt moved the items
    scene.flush_wires()
    assert colours(view)[theme.ACCENT.name()][0].y() == 400
    assert any(y > 390 for points in scene.overview_shapes()[0] for _, y in points)

    SHOTS.mkdir(exist_ok=True)
    view.grab().save(str(SHOTS / "canvas_overview.png"))
    view.scale(10, 10)
    assert not scene.overview and not any(item.flags() & NO_CONTENTS for item in scene.items())
    # qtbot keeps only a weak reference: close the view before this test's last reference to it goes,
    # so no paint is pending when the garbage collector frees it
    view.close()


def test_far_out_a_dragged_card_is_drawn_live_over_the_still_picture(qtbot):
    d, ids, doc, view = chain_view(qtbot)
    view.fit_all()
    scene = view.canvas_scene
    assert scene.overview
    view.viewport().repaint()
    still = scene.overview_revision
    item = scene.blocks[ids[20]]
    item.setPos(item.pos() + QPointF(0, 300))
    scene.follow_moved_cards([item])
    scene.flush_wires()
    assert scene.moving == {ids[20]} and scene.overview_revision == still + 1  # the still part drops it once
    for step in range(3):  # further drag steps leave the still picture alone
        item.setPos(item.pos() + QPointF(10, 0))
        scene.follow_moved_cards([item])
        scene.flush_wires()
    assert scene.overview_revision == still + 1
    live_lines, live_rects = scene.overview_shapes(moving=True)
    attached = [w for w in scene.wires if ids[20] in (w.src, w.dst)]
    assert len(attached) == 2 and sorted(live_lines) == sorted(scene.wires[w].points for w in attached)
    assert [len(r) for _, r in live_rects if r] == [1]  # itself and its two wires
    still_lines, _ = scene.overview_shapes(moving=False)
    assert len(still_lines) + len(live_lines) == len(scene.overview_shapes()[0])
    doc.apply(edits.move(d, {ids[20]: (item.pos().x(), item.pos().y())}))  # the drop, as one edit
    assert not scene.moving
    # an edit that moves cards (an undo, Tidy) leaves none of them drawn live
    doc.apply(edits.move(d, {b: (x + 5, y) for b, (x, y) in ((b, d.blocks[b].position) for b in ids)}))
    assert not scene.moving
    view.close()


def test_far_out_a_change_of_cards_alone_keeps_the_wires_picture_and_shows_the_change(qtbot):
    """Far out the still wires are a picture of their own: a finding on a card redraws the cards
    over the same wires picture; taking a wire away redraws the wires; undo gives back the picture."""
    import numpy as np
    from PySide6.QtGui import QImage

    def picture():
        view.viewport().repaint()
        image = view.viewport().grab().toImage().convertToFormat(QImage.Format.Format_RGB32)
        return np.array(image.constBits(), dtype=np.uint8).reshape(image.height(), image.bytesPerLine() // 4, 4).copy()

    d, ids, doc, view = chain_view(qtbot)
    view.fit_all()
    scene = view.canvas_scene
    assert scene.overview
    before = picture()
    wires_picture = view._ov_wires[2]
    doc.apply(edits.set_settings(d, ids[30], {"groups": 3}))  # an error: a red outline, the same wires
    red = picture()
    assert view._ov_wires[2] is wires_picture
    x, y, right, bottom = scene.obstacles.rects[ids[30]]
    corner = view.mapFromScene(x, y)
    near = red[max(corner.y() - 1, 0):corner.y() + 3, max(corner.x() - 1, 0):corner.x() + 3, :3].reshape(-1, 3)
    error = theme.ERROR
    assert any(abs(int(b) - error.blue()) + abs(int(g) - error.green()) + abs(int(r) - error.red()) < 60
               for b, g, r in near), "the card's outline turns red"
    doc.undo_stack.undo()
    assert (picture() == before).all()
    (wire,) = [w for w in scene.wires if w.src == ids[40]]
    a, b = scene.wires[wire].points[0], scene.wires[wire].points[-1]
    doc.apply(edits.disconnect(d, wire))
    cut = picture()
    assert view._ov_wires[2] is not wires_picture
    middle = view.mapFromScene((a[0] + b[0]) / 2, (a[1] + b[1]) / 2)
    around = (slice(middle.y() - 2, middle.y() + 3), slice(middle.x() - 2, middle.x() + 3))
    assert (cut[around] != before[around]).any(), "the wire is gone from the picture"
    view.close()
