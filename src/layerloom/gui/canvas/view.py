"""The canvas view: shows the document's graph (the design or an open motif) left → right and turns
mouse and keys into edits.

Every change goes through ``document.apply`` as one undoable edit (add, wire, move, delete, paste,
rename, Tidy, mends, make motif, expand). Pan with the middle button or space + drag, zoom about
the cursor with the wheel. Double-click a motif instance to open its motif (each graph keeps its
own zoom and scroll). Quick add and rename in place are plain widgets over the view, never scene
items.
"""
from __future__ import annotations

import gc
from contextlib import contextmanager

from PySide6.QtCore import QEvent, QLineF, QPoint, QPointF, QRectF, QSize, Qt, Signal
from PySide6.QtGui import (QCursor, QFont, QGuiApplication, QImage, QKeySequence, QPainter, QPalette, QPen,
                           QPixmap, QTransform)
from PySide6.QtWidgets import QGraphicsView, QMenu, QToolTip

from layerloom.core import clipboard, edits, motif_ops
from layerloom.core.motif_library import BY_KEY, library_edit
from layerloom.core.quick_add_words import choices, rank
from layerloom.core.graph import Wire
from layerloom.core.kinds import KINDS
from layerloom.core.layout import COLUMN, tidy_layout
from layerloom.core.settings import SettingError
from layerloom.gui import theme
from layerloom.gui.canvas import stage_summary
from layerloom.gui.canvas.stage_summary import overview_names
from layerloom.gui.canvas.block_item import H, W, BlockItem, summary_zoom
from layerloom.gui.canvas.block_item import font as block_font
from layerloom.gui.canvas import context_menus, tooltips
from layerloom.gui.canvas.arrow_keys import neighbour
from layerloom.gui.canvas.chips import ChipItem
from layerloom.gui.canvas.name_editor import NameEditor
from layerloom.gui.canvas.quick_add import QuickAdd
from layerloom.gui.canvas.scene import CanvasScene
from layerloom.gui.canvas.wire_item import DraftWire, WireItem
from layerloom.gui.files import Prompts

KIND_MIME = "application/x-layerloom-kind"
"""Drag-and-drop type of a kind from Parts; the data is the kind's name in UTF-8."""
MOTIF_MIME = "application/x-layerloom-motif"
"""Drag-and-drop type of a motif from Parts; the data is ``library:<key>`` or ``design:<name>`` in UTF-8."""

ARROWS = {Qt.Key.Key_Left: "left", Qt.Key.Key_Right: "right", Qt.Key.Key_Up: "up", Qt.Key.Key_Down: "down"}
PASTE_STEP = 40.0  # each paste of the same blocks lands this much further down and right
ZOOM_STEP = 1.25


@contextmanager
def collector_paused():
    """Python's cyclic garbage collector off for a bulk step (reference counting still frees)."""
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            gc.enable()


class CanvasView(QGraphicsView):
    """The canvas for ``document``. ``message`` carries a refusal or hint for a status line;
    ``settings_wanted`` asks for the keyboard to go to Block settings (Enter on a selected block)."""

    message = Signal(str)
    settings_wanted = Signal()
    zoom_changed = Signal(float)  # the zoom (1.0 = 100 %) after any change of it

    def __init__(self, document, parent=None):
        super().__init__(parent)
        self.document = document
        self.canvas_scene = CanvasScene(document, self)
        self.canvas_scene.mend_applier = self.apply_mend
        self.setScene(self.canvas_scene)
        self.canvas_scene.refused.connect(self.message)
        self.setRenderHints(QPainter.RenderHint.Antialiasing | QPainter.RenderHint.TextAntialiasing)
        self.setViewportUpdateMode(QGraphicsView.ViewportUpdateMode.SmartViewportUpdate)
        self.setCacheMode(QGraphicsView.CacheModeFlag.CacheBackground)
        self.setOptimizationFlag(QGraphicsView.OptimizationFlag.DontAdjustForAntialiasing, True)
        self.setDragMode(QGraphicsView.DragMode.RubberBandDrag)
        self.setRubberBandSelectionMode(Qt.ItemSelectionMode.IntersectsItemShape)
        self.setTransformationAnchor(QGraphicsView.ViewportAnchor.AnchorUnderMouse)
        self.setResizeAnchor(QGraphicsView.ViewportAnchor.AnchorViewCenter)
        self.setFocusPolicy(Qt.FocusPolicy.StrongFocus)
        self.setAcceptDrops(True)
        self.setObjectName("canvas")
        palette = self.palette()
        palette.setColor(QPalette.ColorRole.Highlight, theme.ACCENT)  # the rubber band
        self.setPalette(palette)
        self._pan_from: QPoint | None = None
        self._ov_cache: tuple | None = None  # (key, QPixmap) of the overview last drawn
        self._ov_wires: tuple | None = None  # (key, QPixmap) of its still wires, kept while only cards change
        self._space = False
        self._draft: DraftWire | None = None
        self._draft_from: tuple[str, int] | None = None
        self._quick = QuickAdd(self, self._add_lines)
        self._quick.hide()
        self._quick.chosen.connect(self._quick_chosen)
        self._quick.closed.connect(self._refocus)
        self._quick_spot = QPointF()
        self._quick_source: tuple[str, int] | None = None
        self._quick_wire: Wire | None = None  # Quick add inserts on this wire
        self._quick_into: str | None = None  # … or wires the new block into this one
        self._wire_pick = QuickAdd(self, self._source_lines, "Wire from: type a block's name", "no block by that name")
        self._wire_pick.hide()
        self._wire_pick.chosen.connect(self._wire_from)
        self._wire_pick.closed.connect(self._refocus)
        self._names = NameEditor(self)
        self._names.committed.connect(self._rename)
        self._paste_text, self._paste_count = "", 0
        self._looks: dict[str, tuple[QTransform, QPointF]] = {}  # graph key → zoom and centre last seen
        self._shown_key = document.graph_key
        self.ask_name = Prompts(self).ask_name  # (title, label, suggested) → a name or None; the window sets its own
        document.replaced.connect(self._replaced)
        document.graph_changed.connect(self._graph_shown)

    # ----- looking around
    def _zoom(self, factor: float) -> None:
        now = self.transform().m11()
        factor = max(theme.ZOOM_MIN / now, min(theme.ZOOM_MAX / now, factor))
        self.scale(factor, factor)

    def scale(self, sx: float, sy: float) -> None:
        super().scale(sx, sy)
        self._sync_overview()

    def setTransform(self, matrix, combine: bool = False) -> None:  # noqa: N802 (Qt naming)
        super().setTransform(matrix, combine)
        self._sync_overview()

    def resetTransform(self) -> None:  # noqa: N802 (Qt naming)
        super().resetTransform()
        self._sync_overview()

    def _sync_overview(self) -> None:
        """Below the zoom where cards are specks, draw them all at once (see CanvasScene.set_overview)."""
        self._labels_in_view()
        self.canvas_scene.set_overview(self.shows_stage_summaries())
        self.zoom_changed.emit(self.transform().m11())

    def _labels_in_view(self) -> None:
        """Wire labels are placed for what the view shows (the rest as it comes into view)."""
        r = self.mapToScene(self.viewport().rect()).boundingRect()
        self.canvas_scene.set_label_region((r.left(), r.top(), r.right(), r.bottom()))

    def scrollContentsBy(self, dx: int, dy: int) -> None:  # noqa: N802 (Qt naming)
        super().scrollContentsBy(dx, dy)
        self._labels_in_view()

    def resizeEvent(self, event) -> None:  # noqa: N802 (Qt naming)
        super().resizeEvent(event)
        self._labels_in_view()

    def drawForeground(self, painter, rect: QRectF) -> None:
        if self.canvas_scene.overview:
            if painter.device() is self.viewport():
                self._blit_overview(painter)
            else:  # a picture (PNG, SVG): drawn afresh, as shapes
                self._draw_overview(painter, rect)
            stage_summary.draw(painter, self)

    def _blit_overview(self, painter) -> None:
        """The overview of what the viewport shows, drawn once into a pixmap and kept until the
        view's transform, size or what the scene shows changes (a still frame is one blit). Its
        still wires are a pixmap of their own, kept while their path is (a change of cards alone,
        such as a finding after an edit, redraws only the cards over them)."""
        t = self.viewportTransform()
        size = self.viewport().size()
        view = (t.m11(), t.m22(), t.dx(), t.dy(), size.width(), size.height())
        key = (*view, self.canvas_scene.overview_revision)
        exposed = self.mapToScene(self.viewport().rect()).boundingRect()
        if self._ov_cache is None or self._ov_cache[0] != key:
            wires = self.canvas_scene.overview_wires(False)
            if self._ov_wires is None or self._ov_wires[0] != view or self._ov_wires[1] is not wires:
                p, pixmap = self._still_painter(t)
                self._draw_wires(p, wires)
                p.end()
                self._ov_wires = (view, wires, pixmap)
            pixmap = QPixmap(self._ov_wires[2])  # a copy: the cards are drawn over the wires
            p = QPainter(pixmap)
            p.setTransform(t)
            self._draw_overview(p, exposed, moving=False, wires=False)
            p.end()
            self._ov_cache = (key, pixmap)
        painter.save()
        painter.resetTransform()
        painter.drawPixmap(0, 0, self._ov_cache[1])
        painter.restore()
        # the selection, and cards being dragged with their wires, drawn live on top
        self._draw_overview(painter, exposed, moving=True)

    def _still_painter(self, transform) -> tuple:
        """A painter on a new transparent pixmap of the viewport's size, drawing in scene units."""
        ratio = self.viewport().devicePixelRatioF()
        pixmap = QPixmap(self.viewport().size() * ratio)
        pixmap.setDevicePixelRatio(ratio)
        pixmap.fill(Qt.GlobalColor.transparent)
        p = QPainter(pixmap)
        p.setTransform(transform)
        return p, pixmap

    def shows_stage_summaries(self) -> bool:
        """Whether cards are too small here to show name and shape, so stage rows are labelled."""
        return self.transform().m11() < summary_zoom()

    @staticmethod
    def _draw_wires(painter, path) -> None:
        """Far out, wires as hairlines."""
        painter.setRenderHint(QPainter.RenderHint.Antialiasing, False)
        painter.setPen(QPen(theme.WIRE, 0))
        painter.setBrush(Qt.BrushStyle.NoBrush)
        painter.drawPath(path)

    def _draw_overview(self, painter, exposed: QRectF, moving: bool | None = None, wires: bool = True) -> None:
        """Far out, every wire (unless not ``wires``) and card in a few calls: cards as outlined
        rectangles (status and selection by outline colour; specks when tiny), each with its name
        at a readable size where the card is wide enough on screen to hold some of it."""
        _, rects = self.canvas_scene.overview_shapes(moving)
        painter.setRenderHint(QPainter.RenderHint.Antialiasing, False)  # hairlines and rectangles: no need
        if wires:
            self._draw_wires(painter, self.canvas_scene.overview_wires(moving))
        specks = self.zoom_level() < theme.SHAPE_MIN_DETAIL
        for colour, group in rects:
            if specks:
                painter.setPen(Qt.PenStyle.NoPen)
                painter.setBrush(colour)
            else:  # the selection is an outline over its card's own rectangle
                painter.setPen(QPen(colour, 0 if colour == theme.CARD_EDGE else 2))
                painter.setBrush(Qt.BrushStyle.NoBrush if colour == theme.ACCENT else theme.CARD)
            painter.drawRects(group)
        if not specks:
            overview_names(painter, self, exposed, moving)

    def zoom_in(self) -> None:
        self._zoom_about_centre(ZOOM_STEP)

    def zoom_out(self) -> None:
        self._zoom_about_centre(1 / ZOOM_STEP)

    def _zoom_about_centre(self, factor: float) -> None:
        anchor = self.transformationAnchor()
        self.setTransformationAnchor(QGraphicsView.ViewportAnchor.AnchorViewCenter)
        self._zoom(factor)
        self.setTransformationAnchor(anchor)

    def zoom_level(self) -> float:
        return self.transform().m11()

    def fit_all(self) -> None:
        """Show every block (never magnified beyond 1.25×)."""
        self._fit(self.canvas_scene.cards_rect())

    def zoom_to_selection(self) -> None:
        """Show the selected blocks as large as fits (a chip shows its card), or all when none is."""
        scene = self.canvas_scene
        rect = QRectF()
        for bid in self.document.selection:
            item = scene.blocks.get(scene.card_of(bid))
            if item is not None:
                rect = rect.united(item.sceneBoundingRect())
        self._fit(rect if not rect.isEmpty() else scene.cards_rect())

    def actual_size(self) -> None:
        """Zoom to 100 % about the middle of the view."""
        centre = self.mapToScene(self.viewport().rect().center())
        self.resetTransform()
        self.centerOn(centre)

    def _fit(self, rect: QRectF) -> None:
        """Fit ``rect`` with a margin (never above 1.25×), leaving room above it for stage labels."""
        if rect.isEmpty():
            return
        self.fitInView(rect.adjusted(-40, -40, 40, 40), Qt.AspectRatioMode.KeepAspectRatio)
        if self.shows_stage_summaries():
            room = stage_summary.top_room() / self.transform().m11()
            self.fitInView(rect.adjusted(-40, -40 - room, 40, 40), Qt.AspectRatioMode.KeepAspectRatio)
        if self.transform().m11() > 1.25:
            self.resetTransform()
            self.scale(1.25, 1.25)
            self.centerOn(rect.center())
        self._sync_overview()

    def show_start(self) -> None:
        """How a design first appears: all of it when that is readable, else its input end (data
        flows left → right) at the smallest zoom whose text can still be read. The zoom is chosen
        before it is set: fitting a large design first would switch every item to the overview and
        back (a tenth of a second at 2,000 blocks)."""
        rect = self.canvas_scene.cards_rect()
        if rect.isEmpty():
            return
        room = self.viewport().rect().adjusted(2, 2, -2, -2)  # fitInView's own margin
        framed = rect.adjusted(-40, -40, 40, 40)
        if min(room.width() / framed.width(), room.height() / framed.height()) >= theme.READABLE_ZOOM:
            self.fit_all()
            return
        self.setTransform(QTransform.fromScale(theme.READABLE_ZOOM, theme.READABLE_ZOOM))
        half_width = self.viewport().width() / theme.READABLE_ZOOM / 2
        self.centerOn(rect.left() - 40 + half_width, rect.center().y())

    def _replaced(self) -> None:
        self._looks.clear()
        self._shown_key = self.document.graph_key
        self.show_start()

    def _graph_shown(self) -> None:
        """Keep the zoom and scroll of the graph left; show the new one as it was last seen, or all of it."""
        centre = self.mapToScene(self.viewport().rect().center())
        self._looks[self._shown_key] = (self.transform(), centre)
        self._shown_key = key = self.document.graph_key
        look = self._looks.get(key)
        if look is None:
            self.fit_all()
        else:
            self.setTransform(look[0])
            self.centerOn(look[1])

    def center_on(self, block_id: str) -> None:
        item = self.canvas_scene.blocks.get(block_id)
        if item is not None:
            self.centerOn(item.sceneBoundingRect().center())

    def wheelEvent(self, event) -> None:
        """Zoom about the point under the cursor: it stays where it was on screen."""
        pos = event.position()
        under = self.mapToScene(pos.toPoint())
        anchor = self.transformationAnchor()
        self.setTransformationAnchor(QGraphicsView.ViewportAnchor.NoAnchor)
        self._zoom(1.0015 ** event.angleDelta().y())
        self.setTransformationAnchor(anchor)
        drift = self.mapFromScene(under) - pos.toPoint()
        self.horizontalScrollBar().setValue(self.horizontalScrollBar().value() + drift.x())
        self.verticalScrollBar().setValue(self.verticalScrollBar().value() + drift.y())
        event.accept()

    def drawBackground(self, painter, rect: QRectF) -> None:
        painter.fillRect(rect, theme.CANVAS)
        scale = self.transform().m11()
        step = theme.GRID_STEP
        major = step * theme.GRID_MAJOR_EVERY
        for spacing, colour in ((step, theme.GRID_MINOR), (major, theme.GRID_MAJOR)):
            if spacing * scale < 8:
                continue
            left, top = int(rect.left() // spacing) * spacing, int(rect.top() // spacing) * spacing
            lines = []
            x = left
            while x < rect.right():
                lines.append(QLineF(x, rect.top(), x, rect.bottom()))
                x += spacing
            y = top
            while y < rect.bottom():
                lines.append(QLineF(rect.left(), y, rect.right(), y))
                y += spacing
            painter.setPen(colour)
            painter.drawLines(lines)

    # ----- mouse
    def _block_at(self, view_pos: QPoint, reach: float = 0.0) -> BlockItem | None:
        if reach:
            s = self.mapToScene(view_pos)
            items = self.canvas_scene.items(QRectF(s.x() - reach, s.y() - reach, 2 * reach, 2 * reach))
        else:
            items = self.items(view_pos)
        for item in items:
            while item is not None and not isinstance(item, BlockItem):
                item = item.parentItem()
            if item is not None:
                return item
        return None

    def mousePressEvent(self, event) -> None:
        button = event.button()
        if button == Qt.MouseButton.MiddleButton or (button == Qt.MouseButton.LeftButton and self._space):
            self._pan_from = event.position().toPoint()
            self.viewport().setCursor(Qt.CursorShape.ClosedHandCursor)
            event.accept()
            return
        if button == Qt.MouseButton.LeftButton:
            item = self._block_at(event.position().toPoint())
            if item is not None:
                port = item.port_at(item.mapFromScene(self.mapToScene(event.position().toPoint())))
                if port is not None and port[0] == "out":
                    self._start_wire(item, port[1])
                    event.accept()
                    return
        super().mousePressEvent(event)

    def mouseMoveEvent(self, event) -> None:
        if self._pan_from is not None:
            p = event.position().toPoint()
            delta = p - self._pan_from
            self._pan_from = p
            self.horizontalScrollBar().setValue(self.horizontalScrollBar().value() - delta.x())
            self.verticalScrollBar().setValue(self.verticalScrollBar().value() - delta.y())
            event.accept()
            return
        if self._draft is not None:
            self._draft.reach(self.mapToScene(event.position().toPoint()))
            event.accept()
            return
        super().mouseMoveEvent(event)
        self.canvas_scene.flush_wires()

    def mouseReleaseEvent(self, event) -> None:
        if self._pan_from is not None and event.button() in (Qt.MouseButton.MiddleButton, Qt.MouseButton.LeftButton):
            self._pan_from = None
            self.viewport().setCursor(Qt.CursorShape.OpenHandCursor if self._space else Qt.CursorShape.ArrowCursor)
            event.accept()
            return
        if self._draft is not None and event.button() == Qt.MouseButton.LeftButton:
            self._finish_wire(event.position().toPoint())
            event.accept()
            return
        super().mouseReleaseEvent(event)
        if event.button() == Qt.MouseButton.LeftButton:
            self._commit_moves()

    def mouseDoubleClickEvent(self, event) -> None:
        """Open a motif instance's motif; rename any other block in place."""
        item = self._block_at(event.position().toPoint())
        if item is not None and event.button() == Qt.MouseButton.LeftButton:
            if item.state.kind == "Motif":
                self.open_motif(item.block_id)
            else:
                self._start_rename(item)
            event.accept()
            return
        super().mouseDoubleClickEvent(event)

    def contextMenuEvent(self, event) -> None:
        """A badge offers its mends; a block, a wire and the empty canvas their own menus
        (:mod:`layerloom.gui.canvas.context_menus`)."""
        super().contextMenuEvent(event)
        if event.isAccepted():
            return
        self.context_menu_at(event.pos()).exec(event.globalPos())
        event.accept()

    def context_menu_at(self, view_pos: QPoint) -> QMenu:
        """The menu for what is under ``view_pos`` (a block is selected first, unless it already is)."""
        item = self._block_at(view_pos)
        if item is not None:
            bid = self._chip_at(view_pos) or item.block_id
            if bid not in self.document.selection:
                self.document.select([bid])
            return context_menus.block_menu(self, bid)
        wire = self._wire_at(view_pos)
        if wire is not None:
            return context_menus.wire_menu(self, wire)
        return context_menus.canvas_menu(self, view_pos)

    def _card_item(self, block_id: str) -> BlockItem:
        """The card showing ``block_id`` (its own, or the card it is a chip of)."""
        return self.canvas_scene.blocks[self.canvas_scene.card_of(block_id)]

    def _chip_at(self, view_pos: QPoint) -> str | None:
        """The block id of a chip under ``view_pos`` (a folded norm or activation), if any."""
        item = self.itemAt(view_pos)
        return item.block_id if isinstance(item, ChipItem) else None

    def _wire_at(self, view_pos: QPoint) -> Wire | None:
        """The wire under ``view_pos`` when no block is above it."""
        for item in self.items(view_pos):
            if isinstance(item, WireItem):
                return item.wire
            if isinstance(item, BlockItem) or item.parentItem() is not None:
                return None
        return None

    def viewportEvent(self, event) -> bool:  # noqa: N802 (Qt naming)
        """Hover texts for blocks and wires, made when asked for (see :mod:`tooltips`)."""
        if event.type() == QEvent.Type.ToolTip:
            text = self.tip_at(event.pos())
            if text:
                QToolTip.showText(event.globalPos(), text, self.viewport())
            else:
                QToolTip.hideText()
            return True
        return super().viewportEvent(event)

    def tip_at(self, view_pos: QPoint) -> str:
        """The hover text at ``view_pos``: a badge's own, a block's or a wire's ("" for none)."""
        items = self.items(view_pos)
        if items and items[0].toolTip() and not isinstance(items[0], BlockItem):
            return items[0].toolTip()
        item = self._block_at(view_pos)
        if item is not None:
            bid = self._chip_at(view_pos) or item.block_id
            return tooltips.block_tip(self.document, bid, self.canvas_scene.total_macs())
        wire = self._wire_at(view_pos)
        return tooltips.wire_tip(self.document, wire) if wire is not None else ""

    def motif_menu(self, menu: QMenu | None = None, applicable_only: bool = False) -> QMenu:
        """Make motif, Open motif, Expand and Back, each enabled when it applies (added to ``menu``;
        with ``applicable_only``, only those that apply)."""
        menu = menu if menu is not None else QMenu(self)
        instance = self._selected_instance()
        for text, slot, enabled in (("Make motif…", self.make_motif, bool(self.document.selection)),
                                    ("Open motif", self.open_motif, instance is not None),
                                    ("Expand motif", self.expand_motif, instance is not None),
                                    ("Back", lambda: self.document.back(), len(self.document.trail) > 1)):
            if applicable_only and not enabled:
                continue
            action = menu.addAction(text, slot)
            action.setEnabled(enabled)
            action.setObjectName("menu_" + text.lower().rstrip("…").replace(" ", "_"))
        return menu

    def _commit_moves(self) -> None:
        """One undoable move for every selected block the drag left somewhere new (the chips of a
        card move with it)."""
        graph = self.document.graph
        blocks = graph.blocks
        moved = {}
        for item in self.canvas_scene.selectedItems():
            if isinstance(item, BlockItem) and item.block_id in blocks:
                p = (item.pos().x(), item.pos().y())
                x, y = blocks[item.block_id].position
                if p != (x, y):
                    moved[item.block_id] = p
                    for chip in self.canvas_scene.chips_of(item.block_id):
                        cx, cy = blocks[chip].position
                        moved[chip] = (cx + p[0] - x, cy + p[1] - y)
        if moved:
            self.canvas_scene.apply(edits.move(graph, moved))

    # ----- wiring by dragging from an output notch
    def _start_wire(self, item: BlockItem, port: int) -> None:
        self._draft_from = (item.block_id, port)
        self._draft = DraftWire(item.output_pos(port))
        self.canvas_scene.addItem(self._draft)

    def _finish_wire(self, view_pos: QPoint) -> None:
        self.canvas_scene.removeItem(self._draft)
        self._draft = None
        src, src_port = self._draft_from
        self._draft_from = None
        target = self._block_at(view_pos, reach=8.0)
        if target is None:
            self.quick_add(at=view_pos, source=(src, src_port))
            return
        if target.block_id == src:
            return
        local = target.mapFromScene(self.mapToScene(view_pos))
        hit = target.port_at(local)
        design = self.document.graph
        if hit is not None and hit[0] == "in":
            port = hit[1]
        else:
            port = target.nearest_input(local.y(), {w.dst_port for w in design.in_wires[target.block_id]})
        if port is None:
            self.message.emit(f"{design.blocks[target.block_id].name} takes no input")
            return
        try:
            edit = edits.replace_wire(design, Wire(src, src_port, target.block_id, port))
        except edits.EditError as e:
            self.message.emit(str(e))
            return
        self.canvas_scene.apply(edit)

    # ----- keys
    def keyPressEvent(self, event) -> None:
        key, mods = event.key(), event.modifiers()
        if key in (Qt.Key.Key_Delete, Qt.Key.Key_Backspace):
            self.delete_selection(bridge=not mods & Qt.KeyboardModifier.ShiftModifier)
        elif key in (Qt.Key.Key_Return, Qt.Key.Key_Enter) and self.document.selection:
            self.settings_wanted.emit()
        elif key == Qt.Key.Key_I and mods & Qt.KeyboardModifier.ControlModifier:
            self.wire_into_selection()
        elif key in ARROWS and not mods & ~Qt.KeyboardModifier.KeypadModifier and self.document.graph.blocks:
            self.step_selection(ARROWS[key])
        elif key == Qt.Key.Key_F2:
            self.rename_selected()
        elif key == Qt.Key.Key_Space and not event.isAutoRepeat():
            self._space = True
            self.viewport().setCursor(Qt.CursorShape.OpenHandCursor)
        elif event.matches(QKeySequence.StandardKey.Copy):
            self.copy()
        elif event.matches(QKeySequence.StandardKey.Paste):
            self.paste()
        elif event.matches(QKeySequence.StandardKey.SelectAll):
            self.select_all()
        elif key == Qt.Key.Key_D and mods & Qt.KeyboardModifier.ControlModifier:
            self.duplicate()
        elif event.text().isprintable() and event.text().strip() and not mods & (
                Qt.KeyboardModifier.ControlModifier | Qt.KeyboardModifier.AltModifier):
            if self._quick.isVisible():  # typed faster than the focus moved
                self._quick.edit.insert(event.text())
            else:
                self.quick_add(text=event.text())
        else:
            super().keyPressEvent(event)
            return
        event.accept()

    def keyReleaseEvent(self, event) -> None:
        if event.key() == Qt.Key.Key_Space and not event.isAutoRepeat():
            self._space = False
            if self._pan_from is None:
                self.viewport().setCursor(Qt.CursorShape.ArrowCursor)
        super().keyReleaseEvent(event)

    # ----- adding blocks
    @staticmethod
    def _ours(event) -> bool:
        data = event.mimeData()
        return data.hasFormat(KIND_MIME) or data.hasFormat(MOTIF_MIME)

    def dragEnterEvent(self, event) -> None:
        if self._ours(event):
            event.acceptProposedAction()
        else:
            super().dragEnterEvent(event)

    def dragMoveEvent(self, event) -> None:
        if self._ours(event):
            event.acceptProposedAction()
        else:
            super().dragMoveEvent(event)

    def dropEvent(self, event) -> None:
        """A part dropped on a wire goes on that wire; elsewhere it lands where it was dropped."""
        data = event.mimeData()
        if not self._ours(event):
            super().dropEvent(event)
            return
        event.acceptProposedAction()
        point = event.position().toPoint()
        spot = self.mapToScene(point)
        wire = self._wire_at(point)
        if data.hasFormat(MOTIF_MIME):
            choice = (KINDS["Motif"].name, {}, bytes(data.data(MOTIF_MIME)).decode("utf-8"))
        else:
            choice = (bytes(data.data(KIND_MIME)).decode("utf-8"), {}, "")
        self.add_choice(*choice, spot, wire=wire, from_selection=True)
        self.activateWindow()

    def _selected_source(self) -> tuple[str, int] | None:
        """The one selected block's first output, if exactly one block with an output is selected."""
        sel = self.document.selection
        item = self.canvas_scene.blocks.get(sel[0]) if len(sel) == 1 else None
        return (item.block_id, 0) if item is not None and item.state.n_out else None

    def add_choice(self, kind: str, settings: dict, motif: str, spot: QPointF, *, source=None, wire: Wire | None = None,
                   into: str | None = None, from_selection: bool = False) -> str | None:
        """Add a block of ``kind`` (or, with ``motif`` ``library:<key>``/``design:<name>``, an instance
        of that motif) centred at ``spot``: on ``wire`` when given (wired both sides), else wired from
        ``source`` (or the selected block when ``from_selection``) and into block ``into``. One edit;
        the new block is selected and shown, and the keys go back to the canvas."""
        before, name = None, None
        if motif:
            found = self._motif_parts(motif)
            if found is None:
                return None
            before, motif_name = found
            settings, name = {"motif": motif_name, "repeat": 1}, self.document.graph.fresh_name(motif_name)
        if wire is not None and wire in self.document.graph.wires:
            return self._insert_on_wire(wire, kind, settings, spot, before, name)
        return self.add_kind(kind, spot, source, from_selection, settings, before, name, into=into)

    def _motif_parts(self, payload: str):
        """``(edit defining it or None, motif name)`` for a motif payload; None (with a message) if unknown."""
        source, _, name = payload.partition(":")
        design, before = self.document.design, None
        if source == "library" and name in BY_KEY:
            define, name = library_edit(design, name)
            before = edits.Edit(f"Add motif {name}", define.ops)
        elif source != "design" or name not in design.motifs:
            self.message.emit(f"there is no motif {payload!r} to add")
            return None
        if name == self.document.graph_key:
            self.message.emit(f"motif {name} cannot contain itself")
            return None
        return before, name

    def _insert_on_wire(self, wire: Wire, kind: str, settings: dict, spot: QPointF, before, name) -> str | None:
        flat = self._map_for_flat_input(kind, (wire.src, wire.src_port))
        steps = [("Flatten", {})] * bool(flat) + [(kind, settings)]
        try:
            edit = edits.insert_on_wire(self.document.design, wire, steps, self.document.graph_key,
                                        position=(round(spot.x() - W / 2), round(spot.y() - H / 2)), name=name)
        except (edits.EditError, SettingError) as e:
            self.message.emit(str(e))
            return None
        if before is not None:
            edit = edits.Edit(before.label, before.ops + edit.ops)
        return self._added(edit, edits.added_blocks(edit)[-1], flat)

    def _map_for_flat_input(self, kind: str, source: tuple[str, int] | None):
        """The feature map ``source`` (block id, port) carries when ``kind`` takes only a flat vector
        (a Linear): a Flatten then goes before the new block in the same edit. None otherwise."""
        spec = KINDS.get(kind)
        if source is None or spec is None or not spec.flat_input:
            return None
        r = self.document.results().get(source[0])
        shape = r.outs[source[1]] if r is not None and source[1] < len(r.outs) else None
        return shape if shape is not None and shape.is_map else None

    def add_kind(self, kind: str, centre: QPointF, source: tuple[str, int] | None = None,
                 from_selection: bool = True, settings: dict | None = None, before: edits.Edit | None = None,
                 name: str | None = None, into: str | None = None) -> str | None:
        """Add a block of ``kind`` centred at scene point ``centre`` as one edit (after the operations
        of ``before``, if given), wired from ``source`` (or from the one selected block when
        ``from_selection``) and into input 0 of block ``into``; selects it and returns its id."""
        spec = KINDS.get(kind)
        if spec is None:
            self.message.emit(f"there is no block kind {kind!r}")
            return None
        takes_input = kind == "Motif" or spec.input_count(spec.defaults) > 0
        if source is None and from_selection and takes_input:
            source = self._selected_source()
        design, key = self.document.design, self.document.graph_key
        source = source if takes_input else None
        flat = self._map_for_flat_input(kind, source)
        at = (round(centre.x() - W / 2), round(centre.y() - H / 2))
        try:
            lead = ()
            if flat:  # a Linear after a feature map: a Flatten first, where the Linear would have gone
                first, fid = edits.add_block(design, "Flatten", {}, graph=key, position=at, inputs=[source])
                lead, source = first.ops, (fid, 0)
                at = edits.clear_spot((b.position for b in self.document.graph.blocks.values()), (at[0] + COLUMN, at[1]))
            edit, bid = edits.add_block(design, kind, settings or {}, graph=key, name=name, position=at,
                                        inputs=[source] if source is not None else ())
        except (edits.EditError, SettingError) as e:
            self.message.emit(str(e))
            return None
        edit = edits.Edit(edit.label, lead + edit.ops)
        if into is not None:
            edit = edits.Edit(edit.label, edit.ops + (edits.AddWire(key, Wire(bid, 0, into, 0)),))
        if before is not None:
            edit = edits.Edit(before.label, before.ops + edit.ops)
        return self._added(edit, bid, flat)

    def _added(self, edit: edits.Edit, bid: str, flattened=None) -> str | None:
        """Apply an edit that adds block ``bid``; select it, bring it into view, keys back to the
        canvas. ``flattened``: the feature map a Flatten added before it turns into a vector (said)."""
        if not self.canvas_scene.apply(edit):
            return None
        if flattened is not None:
            name = self.document.graph.blocks[bid].name
            self.message.emit(f"Flatten added before {name} ({flattened} → {flattened.elements:,}): "
                              f"a Linear takes a flat vector")
        self.document.select([bid])
        if bid in self.canvas_scene.blocks:
            self.ensureVisible(self._card_item(bid).sceneBoundingRect(), 60, 40)
        self._refocus()
        return bid

    def _refocus(self) -> None:
        """Give the keys back to the canvas (after Quick add, a drop, Block settings)."""
        if self.isVisible():
            self.setFocus(Qt.FocusReason.OtherFocusReason)

    def add_motif(self, payload: str, centre: QPointF) -> str | None:
        """Add an instance of a motif from Parts: ``library:<key>`` defines the library motif in the
        design and adds an instance of it, as one edit; ``design:<name>`` adds an instance."""
        return self.add_choice("Motif", {}, payload, centre, from_selection=True)

    # ----- Quick add
    def _add_lines(self, text: str) -> list:
        """Quick add's lines: kinds and motifs matching ``text`` (a motif cannot go inside itself)."""
        own = [m for m in self.document.design.motifs if m != self.document.graph_key]
        return [(c.label, c) for c in choices(text, own)]

    def quick_add(self, text: str = "", at: QPoint | None = None, source: tuple[str, int] | None = None,
                  wire: Wire | None = None, into: str | None = None) -> None:
        """Open Quick add: on ``wire`` (the block chosen goes on it), at view point ``at`` (the block
        lands there, wired from ``source``), or beside the one selected block (the block goes to its
        right, wired from it); else at the cursor. ``into``: wire the new block into that block."""
        if wire is None and at is None and source is None:
            picked = [i.wire for i in self.canvas_scene.selectedItems() if isinstance(i, WireItem)]
            wire = picked[0] if len(picked) == 1 and not self.document.selection else None
        self._quick_source, self._quick_wire, self._quick_into = source, wire, into
        picked = self.document.selection
        sel = picked if len(picked) == 1 and at is None and wire is None and source is None else None
        if wire is not None:
            mid = self._wire_middle(wire)
            self._quick_spot = mid
            self._quick.open_at(self.mapFromScene(mid).x() + 12, self.mapFromScene(mid).y() + 12, text)
        elif sel is not None:
            card = self._card_item(sel[0])
            self.ensureVisible(card.sceneBoundingRect(), 60, 40)  # scrolled away: bring it back first
            scene = self.canvas_scene
            cards = ((i.pos().x(), i.pos().y()) for b, i in scene.blocks.items() if scene.card_of(b) == b)
            x, y = edits.clear_spot(cards, (card.pos().x() + COLUMN, card.pos().y()))
            self._quick_spot = QPointF(x + W / 2, y + H / 2)  # to its right, below any card already there
            self._quick.open_beside(self.mapFromScene(card.sceneBoundingRect()).boundingRect(), text)
        else:
            if at is None:
                at = self.mapFromGlobal(QCursor.pos())
                if not self.viewport().rect().contains(at):
                    at = self.viewport().rect().center()
            self._quick_spot = self.mapToScene(at)
            self._quick.open_at(at.x(), at.y(), text)

    def _wire_middle(self, wire: Wire) -> QPointF:
        """The middle of a wire as drawn (a wire inside a folded card: between its two ends)."""
        item = self.canvas_scene.wires.get(wire)
        if item is not None:
            return item._path.pointAtPercent(0.5)
        a, b = self._card_item(wire.src), self._card_item(wire.dst)
        return (a.sceneBoundingRect().center() + b.sceneBoundingRect().center()) / 2

    def _quick_chosen(self, choice) -> None:
        source, wire, into = self._quick_source, self._quick_wire, self._quick_into
        self._quick_source = self._quick_wire = self._quick_into = None
        from_selection = source is None and wire is None and into is None
        self.add_choice(choice.kind, dict(choice.settings), choice.motif, self._quick_spot, source=source, wire=wire,
                        into=into, from_selection=from_selection)

    def insert_beside(self, block_id: str, before: bool) -> None:
        """Quick add for a block before (on the wire into input 1) or after (on the first wire out)
        ``block_id``; with no such wire, the new block is wired to it and placed beside it."""
        graph = self.document.graph
        wires = [w for w in (graph.in_wires if before else graph.out_wires)[block_id]
                 if (w.dst_port if before else w.src_port) == 0]
        if wires:
            self.quick_add(wire=wires[0])
            return
        card = self._card_item(block_id)
        spot = card.pos() + QPointF((-COLUMN if before else COLUMN) + W / 2, H / 2)
        self.quick_add(at=self.mapFromScene(card.pos()), source=None if before else (block_id, 0),
                       into=block_id if before else None)
        self._quick_spot = spot  # the new card lands a column before or after, level with it

    # ----- wiring from the keyboard
    def _source_lines(self, text: str) -> list:
        """Blocks that can feed the selected one (an output, and not downstream of it: no loops),
        best match first, each with the shape it gives."""
        graph, target = self.document.graph, self._wire_target()
        downstream, todo = {target}, [target]
        while todo:
            for w in graph.out_wires.get(todo.pop(), ()):
                if w.dst not in downstream:
                    downstream.add(w.dst)
                    todo.append(w.dst)
        items = self.canvas_scene.blocks
        blocks = [b for b in graph.blocks.values() if b.id not in downstream and items[b.id].state.n_out]
        shown = rank(text, blocks, lambda b: ((b.name,),)) if text.strip() else blocks
        return [(f"{b.name}   · {items[b.id].state.shape or items[b.id].state.detail}", b.id) for b in shown]

    def _wire_target(self) -> str | None:
        sel = self.document.selection
        return sel[0] if len(sel) == 1 and sel[0] in self.canvas_scene.blocks else None

    def wire_into_selection(self) -> None:
        """Ask (by typing a name) which block to wire into the selected block's first free input
        (its last input when all are taken: that wire is replaced)."""
        target = self._wire_target()
        if target is None or not self.canvas_scene.blocks[target].state.n_in:
            self.message.emit("select one block that takes an input, then Ctrl+I to wire into it")
            return
        card = self._card_item(target)
        self._wire_pick.open_beside(self.mapFromScene(card.sceneBoundingRect()).boundingRect())

    def _wire_from(self, source: str) -> None:
        target = self._wire_target()
        if target is None or source not in self.document.graph.blocks:
            return
        graph, item = self.document.graph, self.canvas_scene.blocks[target]
        if not item.state.n_in:
            return
        taken = {w.dst_port for w in graph.in_wires[target]}
        port = next((p for p in range(item.state.n_in) if p not in taken), item.state.n_in - 1)
        try:
            edit = edits.replace_wire(graph, Wire(source, 0, target, port))
        except edits.EditError as e:
            self.message.emit(str(e))
            return
        self.canvas_scene.apply(edit)
        self._refocus()

    # ----- selection and edits
    def step_selection(self, direction: str) -> None:
        """Select the nearest block in ``direction`` (``left``, ``right``, ``up``, ``down``) from the one
        selected, and bring it into view; with none selected, the first block."""
        scene = self.canvas_scene
        sel = [b for b in self.document.selection if b in scene.blocks]
        if len(sel) != 1:
            target = next(iter(self.document.graph.blocks))
        else:  # from card to card; a chip moves as its card
            centres = {bid: (i.pos().x(), i.pos().y()) for bid, i in scene.cards()}
            target = neighbour(centres, scene.card_of(sel[0]), direction)
        if target is not None:
            self.document.select([target])
            self.ensureVisible(self._card_item(target).sceneBoundingRect(), 60, 40)

    def select_all(self) -> None:
        self.document.select(list(self.document.graph.blocks))

    def delete_selection(self, bridge: bool = True) -> None:
        """Delete the selected blocks (with their wires) and the selected wires, as one edit. With
        ``bridge``, what fed a removed one-in, one-out block is wired on to what it fed."""
        design = self.document.graph
        ids = [b for b in self.document.selection if b in design.blocks]  # cards and chips
        gone = set(ids)
        wires = [i.wire for i in self.canvas_scene.selectedItems()
                 if isinstance(i, WireItem) and i.wire.src not in gone and i.wire.dst not in gone]
        if not ids and not wires:
            return
        ops = tuple(op for w in wires for op in edits.disconnect(design, w).ops)
        if ids:
            remove = edits.remove_bridging if bridge else (lambda d, b, graph: edits.remove_blocks(d.graph(graph), b))
            edit = remove(self.document.design, ids, graph=self.document.graph_key)
            label = edit.label
            ops += edit.ops
        else:
            label = "Remove wire" if len(wires) == 1 else "Remove wires"
        self.canvas_scene.apply(edits.Edit(label, ops))

    def remove_wire(self, wire: Wire) -> None:
        if wire in self.document.graph.wires:
            self.canvas_scene.apply(edits.disconnect(self.document.graph, wire))

    def copy(self) -> dict | None:
        """Copy the selected blocks and the wires among them to the clipboard as JSON text."""
        if not self.document.selection:
            return None
        data = clipboard.copy_blocks(self.document.graph, self.document.selection)
        QGuiApplication.clipboard().setText(clipboard.to_text(data))
        return data

    def paste(self) -> None:
        text = QGuiApplication.clipboard().text()
        try:
            data = clipboard.from_text(text)
        except clipboard.ClipboardError as e:
            self.message.emit(str(e))
            return
        self._paste_count = self._paste_count + 1 if text == self._paste_text else 1
        self._paste_text = text
        self._paste(data, self._paste_count * PASTE_STEP)

    def duplicate(self) -> None:
        if self.document.selection:
            self._paste(clipboard.copy_blocks(self.document.graph, self.document.selection), PASTE_STEP)

    def _paste(self, data: dict, step: float) -> None:
        try:
            edit, ids = clipboard.paste_edit(self.document.design, data, (step, step), graph=self.document.graph_key)
        except clipboard.ClipboardError as e:
            self.message.emit(str(e))
            return
        if ids and self.canvas_scene.apply(edit):
            self.document.select(ids)

    def tidy_layout(self, fold: bool | None = None):
        """The stage-row layout of the graph shown, with its shapes, for this view's size."""
        results = self.document.results()
        shapes = {b: (r.outs[0] if r is not None and r.outs else None) for b, r in results.items()}
        size = self.viewport().size()
        return tidy_layout(self.document.graph, shapes, self.canvas_scene.fold if fold is None else fold,
                           (float(size.width()), float(size.height())))

    def tidy(self) -> None:
        """Lay the graph shown out in stage rows with Tidy, as one undoable edit, and show it all.
        Python's cycle collector waits meanwhile: the step makes tens of thousands of short-lived
        tuples (freed as usual), and a collection in the middle would walk the whole heap."""
        design = self.document.graph
        with collector_paused():
            changed = {b: p for b, p in self.tidy_layout().positions.items() if tuple(design.blocks[b].position) != p}
            if changed:
                self.canvas_scene.apply(edits.Edit("Tidy", edits.move(design, changed).ops))
            self.fit_all()

    def is_tidy(self, fold: bool | None = None) -> bool:
        """Whether the graph shown stands as Tidy lays it out (with Fold ``fold``, else as shown)."""
        graph = self.document.graph
        return all(tuple(graph.blocks[b].position) == p for b, p in self.tidy_layout(fold).positions.items())

    def apply_mend(self, mend) -> bool:
        """Apply a mend as one undo step; a design laid out by Tidy is tidied again in that step
        (the blocks a mend adds would otherwise land beside the rows, their wires crossing others)."""
        was_tidy = self.is_tidy()
        if not self.canvas_scene.apply(mend.edit):
            return False
        if was_tidy:
            graph = self.document.graph
            moved = {b: p for b, p in self.tidy_layout().positions.items() if tuple(graph.blocks[b].position) != p}
            if moved:
                self.document.apply_in_last_step(edits.Edit("Tidy", edits.move(graph, moved).ops))
        return True

    def set_fold(self, on: bool) -> None:
        """Fold norms and activations into their convolution's card (on) or show each as a card. A
        design laid out by Tidy is tidied again for the new look (one undoable edit), and so is one
        whose unfolded blocks would lie under their card (they had no place of their own)."""
        scene = self.canvas_scene
        if on == scene.fold:
            return
        graph = self.document.graph
        was_tidy = self.is_tidy(scene.fold)
        hidden = not on and any(tuple(graph.blocks[c].position) == tuple(graph.blocks[h].position)
                                for c, h in scene.folds.items())
        scene.set_fold(on)
        if was_tidy or hidden:
            self.tidy()

    def rename_selected(self) -> None:
        sel = self.document.selection
        if len(sel) == 1 and sel[0] in self.canvas_scene.blocks:
            self._start_rename(self.canvas_scene.blocks[sel[0]])

    def _start_rename(self, item) -> None:
        """Edit the name in place: over a card's title, or over a chip."""
        self.ensureVisible(item.sceneBoundingRect(), 20, 20)
        local = item.title_rect() if isinstance(item, BlockItem) else item.boundingRect()
        rect = self.mapFromScene(item.mapToScene(local)).boundingRect()
        rect.setHeight(max(rect.height(), self._names.sizeHint().height()))
        rect.setWidth(max(rect.width(), 120))
        font = QFont(block_font("title"))
        font.setPointSizeF(max(font.pointSizeF() * self.zoom_level(), 7.0))
        self._names.setFont(font)
        self._names.start(item.block_id, self.document.graph.blocks[item.block_id].name, rect)

    def _rename(self, block_id: str, name: str) -> None:
        design = self.document.graph
        if block_id in design.blocks:
            self.canvas_scene.apply(edits.rename(design, block_id, name))

    # ----- motifs
    def _selected_instance(self) -> str | None:
        sel = self.document.selection
        graph = self.document.graph
        return sel[0] if len(sel) == 1 and graph.blocks[sel[0]].kind == "Motif" else None

    def make_motif(self, name: str | None = None) -> str | None:
        """Turn the selected blocks into a motif and one instance of it in their place (one edit),
        asking for the motif's name unless given; selects the instance and returns its id."""
        doc = self.document
        if not doc.selection:
            self.message.emit("select the blocks to make a motif from")
            return None
        if name is None:
            stem, n = "motif", 1
            while (f"{stem}_{n}" if n > 1 else stem) in doc.design.motifs:
                n += 1
            name = self.ask_name("Make motif", "Name of the new motif:", stem if n == 1 else f"{stem}_{n}")
            if name is None:
                return None
        try:
            edit, instance = motif_ops.make_motif(doc.design, doc.selection, name, graph=doc.graph_key)
        except edits.EditError as e:
            self.message.emit(str(e))
            return None
        if self.canvas_scene.apply(edit):
            doc.select([instance])
            return instance
        return None

    def open_motif(self, block_id: str | None = None) -> None:
        """Show the motif of instance ``block_id`` (default: the one selected instance)."""
        block_id = block_id or self._selected_instance()
        block = self.document.graph.blocks.get(block_id) if block_id else None
        if block is None or block.kind != "Motif":
            self.message.emit("select one motif instance to open its motif")
            return
        name = block.settings["motif"]
        if name not in self.document.design.motifs:
            self.message.emit(f"{block.name} uses motif {name!r}, which this design does not define")
            return
        self.document.open_motif(name, block_id)

    def expand_motif(self) -> None:
        """Dissolve the one selected instance into plain blocks (one edit) and select them."""
        instance = self._selected_instance()
        if instance is None:
            self.message.emit("select one motif instance to expand")
            return
        doc = self.document
        before = set(doc.graph.blocks)
        try:
            edit = motif_ops.expand(doc.design, instance, graph=doc.graph_key)
        except edits.EditError as e:
            self.message.emit(str(e))
            return
        if self.canvas_scene.apply(edit):
            doc.select([b for b in doc.graph.blocks if b not in before])

    # ----- pictures
    def _picture_rect(self) -> QRectF:
        return self.canvas_scene.itemsBoundingRect().adjusted(-30, -30, 30, 30)

    def save_png(self, path, scale: float = 2.0) -> bool:
        """Write a picture of the whole canvas (all blocks) to ``path`` as PNG."""
        self.canvas_scene.label_region = None  # every wire's label, not only those in view
        self.canvas_scene.set_overview(False)  # the items paint themselves, whatever the view's zoom
        self.canvas_scene.place_labels()
        rect = self._picture_rect()
        image = QImage(QSize(max(int(rect.width() * scale), 1), max(int(rect.height() * scale), 1)),
                       QImage.Format.Format_ARGB32_Premultiplied)
        image.fill(theme.CANVAS)
        painter = QPainter(image)
        painter.setRenderHints(QPainter.RenderHint.Antialiasing | QPainter.RenderHint.TextAntialiasing)
        self.canvas_scene.render(painter, QRectF(image.rect()), rect)
        painter.end()
        self._sync_overview()
        return image.save(str(path), "PNG")

    def save_svg(self, path) -> bool:
        """Write a picture of the whole canvas to ``path`` as SVG."""
        from PySide6.QtSvg import QSvgGenerator

        self.canvas_scene.label_region = None  # every wire's label, not only those in view
        self.canvas_scene.set_overview(False)  # the items paint themselves, whatever the view's zoom
        self.canvas_scene.place_labels()
        rect = self._picture_rect()
        gen = QSvgGenerator()
        gen.setFileName(str(path))
        gen.setSize(rect.size().toSize())
        gen.setViewBox(QRectF(0, 0, rect.width(), rect.height()))
        gen.setTitle(self.document.design.name)
        painter = QPainter()
        if not painter.begin(gen):
            return False
        painter.fillRect(QRectF(0, 0, rect.width(), rect.height()), theme.CANVAS)
        self.canvas_scene.set_caching(False)
        self.canvas_scene.render(painter, QRectF(0, 0, rect.width(), rect.height()), rect)
        painter.end()
        self.canvas_scene.set_caching(True)
        self._sync_overview()
        return True
