"""Stage summaries: far out, where cards can no longer show their name and output shape, the view
labels each stage row at a readable size: its name, its output shape and its share of the MACs
("stage 3 · 512×28×28 · 22 % MACs"), just above the top-left card of the stage. Each card wide
enough on screen keeps its name there, at :data:`theme.READABLE_PX` (see :func:`overview_names`).

Labels are drawn in viewport pixels (they keep their size whatever the zoom); :func:`labels` gives
their text and on-screen rectangles, which is what the view paints and what tests measure.
"""
from __future__ import annotations

from functools import lru_cache
from typing import NamedTuple

from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QFont, QFontMetricsF, QStaticText, QTransform

from layerloom.gui import theme
from layerloom.gui.canvas.block_item import H, W, sized_font

NAME_PX = 10  # em size of a card's name drawn far out, viewport pixels (≥ theme.READABLE_PX)
NAME_ROOM = 40.0  # a card narrower than this on screen shows no name (a few letters and … say nothing)
LABEL_PX = 12  # em size of a stage label, viewport pixels
PAD = 4.0  # room around a label's text inside its plate
LIFT = 3.0  # a label's plate ends this far above its stage's top card


class StageLabel(NamedTuple):
    text: str
    rect: QRectF  # viewport pixels
    pixels: int  # em size of the text, viewport pixels


def label_font() -> QFont:
    """The labels' font (shared: do not modify)."""
    return sized_font("title", LABEL_PX)


def stage_texts(scene) -> list[tuple[str, QRectF]]:
    """``(text, scene rectangle of the stage's cards)`` per stage of the graph shown (kept by the
    scene until the graph, its results or a position change)."""
    return scene.stage_cache("texts", lambda: _stage_texts(scene))


def _stage_texts(scene) -> list[tuple[str, QRectF]]:
    results = scene.document.results()
    total = scene.total_macs()
    out = []
    number = 0
    places = scene.obstacles.rects
    stages = scene.stages()
    handed_on = _stage_outputs(scene, results, {c: i for i, (_, cards) in enumerate(stages) for c in cards})
    for i, (key, cards) in enumerate(stages):
        items = [scene.blocks[c] for c in cards if c in scene.blocks]
        if not items:
            continue
        if all(i.state.kind == "Input" for i in items):
            name = "input"
        elif key == "point":
            name = "head"
        else:
            number += 1
            name = f"stage {number}"
        members = [*cards, *(chip for c in cards for chip in scene.chips_of(c))]
        macs = sum(results[b].cost.macs for b in members if results.get(b) is not None)
        share = f"{100 * macs / total:.0f} % MACs" if total else "no MACs"
        handed = handed_on.get(i) or _output(results, (scene.chips_of(cards[-1]) or cards)[-1])
        shape = str(handed) if handed is not None else "shape unknown"
        rects = [places[c] for c in cards if c in places]  # the cards' rectangles as they stand now
        left, top = min(r[0] for r in rects), min(r[1] for r in rects)
        right, bottom = max(r[2] for r in rects), max(r[3] for r in rects)
        out.append((f"{name} · {shape} · {share}", QRectF(left, top, right - left, bottom - top)))
    return out


def _stage_outputs(scene, results, stage_of: dict) -> dict:
    """What each stage (by index in ``stage_of``: card → stage) hands on: the largest tensor on a
    wire leaving it (a ResNet stage hands on its last unit's output, not the narrower 1×1 that
    opens the next stage); stages with no such wire are left out."""
    best: dict = {}
    folds = scene.folds  # chip → its card (scene.card_of, without a call per wire end)
    for w in scene.graph.wires:
        stage = stage_of.get(folds.get(w.src, w.src))
        if stage is None or stage_of.get(folds.get(w.dst, w.dst)) == stage:
            continue
        r = results.get(w.src)
        shape = r.outs[w.src_port] if r is not None and w.src_port < len(r.outs) else None
        if shape is not None and (stage not in best or shape.elements > best[stage].elements):
            best[stage] = shape
    return best


def _output(results, block: str):
    """A block's first output, or None."""
    r = results.get(block)
    return r.outs[0] if r is not None and r.outs else None


def labels(view) -> list[StageLabel]:
    """Each stage's label as the view draws it now (viewport pixels)."""
    fm = QFontMetricsF(label_font())
    out = []
    for text, rect in stage_texts(view.canvas_scene):
        corner = view.mapFromScene(rect.topLeft())
        w, h = fm.horizontalAdvance(text) + 2 * PAD, fm.height() + PAD
        out.append(StageLabel(text, QRectF(corner.x(), corner.y() - LIFT - h, w, h), LABEL_PX))
    return out


def draw(painter, view) -> None:
    """Paint every stage label over the view (called from its foreground, in scene coordinates)."""
    found = labels(view)
    if not found:
        return
    painter.save()
    painter.resetTransform()
    painter.setFont(label_font())
    for label in found:
        painter.setPen(Qt.PenStyle.NoPen)
        painter.setBrush(theme.LABEL_BACK)
        painter.drawRoundedRect(label.rect, 3.0, 3.0)
        painter.setPen(theme.TEXT)
        painter.drawText(label.rect.adjusted(PAD, 0, 0, 0), Qt.AlignmentFlag.AlignVCenter, label.text)
    painter.restore()


def top_room() -> float:
    """Viewport pixels a label needs above its stage's cards (fit to view keeps them in sight)."""
    return QFontMetricsF(label_font()).height() + PAD + LIFT + 2.0


@lru_cache(maxsize=8192)
def _name(text: str, width: int) -> QStaticText:
    """A card's name elided to ``width`` pixels, laid out once (drawn many times)."""
    f = sized_font("detail", NAME_PX)
    st = QStaticText(QFontMetricsF(f).elidedText(text, Qt.TextElideMode.ElideRight, width))
    st.prepare(QTransform(), f)
    return st


def overview_names(painter, view, exposed: QRectF, moving: bool | None = None) -> None:
    """Far out, each card's name in viewport pixels at :data:`NAME_PX`, elided to the card's width
    on screen (cards narrower than :data:`NAME_ROOM` pixels show none); ``moving`` True: only the
    cards being dragged, False: all others."""
    zoom = view.zoom_level()
    width = W * zoom - 4.0
    if width < NAME_ROOM:
        return
    transform = view.viewportTransform()
    painter.save()
    painter.resetTransform()
    painter.setFont(sized_font("detail", NAME_PX))
    painter.setPen(theme.TEXT)
    down = H * zoom / 2 - NAME_PX * 0.65
    room = int(width)
    for rect, title in view.canvas_scene.overview_cards(moving):
        if exposed.intersects(rect):
            corner = transform.map(rect.topLeft())
            painter.drawStaticText(QPointF(corner.x() + 2.0, corner.y() + down), _name(title, room))
    painter.restore()
