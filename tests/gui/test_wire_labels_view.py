"""Wire labels stand where the design puts them, whatever was viewed first: a view scrolled over
the whole canvas in two different orders shows every label at the same spot."""
from __future__ import annotations

from PySide6.QtWidgets import QApplication

from layerloom import Design
from layerloom.core import edits
from layerloom.core.layout import tidy_positions
from layerloom.gui.canvas import CanvasView
from layerloom.gui.document import Document


def crowded(units: int = 24) -> Design:
    """Residual units with squeezes and shortcuts, tidied: many wires, many labels near each other."""
    d = Design("crowded")
    x = d.add("Conv2d", d.input(3, 64, 64), out_channels=32, kernel=3, padding=1)
    for i in range(units):
        y = d.add("Pointwise", x, out_channels=8)
        y = d.add("ReLU", y)
        y = d.add("Conv2d", y, out_channels=8, kernel=3, padding=1, stride=2 if i % 8 == 7 else 1)
        y = d.add("Pointwise", y, out_channels=32)
        short = d.add("Pointwise", x, out_channels=32, stride=2) if i % 8 == 7 else x
        x = d.add("Add", y, short)
    d.add("Output", d.add("Flatten", x))
    d.apply(edits.move(d, tidy_positions(d)))
    return d


def labels_after_scrolling(qtbot, design: Design, backwards: bool | None) -> dict:
    """Every wire's label box after scrolling a small view over the whole canvas, row by row from
    the top left (or from the bottom right when ``backwards``; None: every label placed at once,
    as for a picture of the whole)."""
    view = CanvasView(Document(design))
    qtbot.addWidget(view)
    view.resize(420, 300)
    view.show()
    qtbot.waitExposed(view)
    view.canvas_scene.set_fold(False)
    view.resetTransform()
    QApplication.processEvents()
    h, v = view.horizontalScrollBar(), view.verticalScrollBar()
    xs = list(range(h.minimum(), h.maximum() + h.pageStep(), h.pageStep() // 2))
    ys = list(range(v.minimum(), v.maximum() + v.pageStep(), v.pageStep() // 2))
    spots = [(x, y) for y in ys for x in xs]
    if backwards is None:
        view.canvas_scene.set_label_region(None)
        spots = []
    for x, y in reversed(spots) if backwards else spots:
        h.setValue(x)
        v.setValue(y)
        QApplication.processEvents()
    scene = view.canvas_scene
    found = {w: item.label_box for w, item in scene.wires.items() if item.label}
    view.close()
    return found


def test_labels_stand_where_the_design_puts_them_whatever_was_viewed_first(qtbot):
    design = crowded()
    forwards = labels_after_scrolling(qtbot, design, backwards=False)
    backwards = labels_after_scrolling(qtbot, design, backwards=True)
    assert len(forwards) > 60 and sum(box is not None for box in forwards.values()) > 40
    moved = {w: (forwards[w], backwards[w]) for w in forwards if forwards[w] != backwards[w]}
    assert not moved, f"{len(moved)} of {len(forwards)} labels stand elsewhere: {list(moved.items())[:3]}"
    assert labels_after_scrolling(qtbot, design, backwards=None) == forwards
    boxes = [box for box in forwards.values() if box is not None]
    for i, a in enumerate(boxes):  # and no two overlap
        assert not any(a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3] for b in boxes[i + 1:]), a


def test_after_edits_and_their_undo_the_labels_stand_where_they_stood(qtbot):
    """A change places again, from the start, the labels of the tiles it touches: after moving
    a card across others and changing a width, undo both and every label is back at its spot."""
    design = crowded()
    view = CanvasView(Document(design))
    qtbot.addWidget(view)
    view.resize(900, 600)
    view.show()
    qtbot.waitExposed(view)
    scene, doc = view.canvas_scene, view.document
    scene.set_fold(False)
    scene.set_label_region(None)
    before = {w: item.label_box for w, item in scene.wires.items()}
    d = doc.design
    conv = next(b for b in d.analysis().order if d.blocks[b].kind == "Conv2d" and b != d.analysis().order[1])
    x, y = d.blocks[conv].position
    doc.apply(edits.move(d, {conv: (x + 260.0, y + 90.0)}))
    doc.apply(edits.set_settings(d, conv, {"out_channels": 1024}))  # wider shape labels after it
    changed = {w: item.label_box for w, item in scene.wires.items()}
    assert changed != before
    doc.undo_stack.undo()
    doc.undo_stack.undo()
    assert {w: item.label_box for w, item in scene.wires.items()} == before
    view.close()
