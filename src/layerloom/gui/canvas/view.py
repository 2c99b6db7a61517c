"""The canvas view: shows the document's graph (the design or an open motif) left → right and turns
mouse and keys into edits.

Every change goes through ``document.apply`` as one undoable edit (add, wire, move, delete, paste,
rename, Tidy, mends, make motif, expand). Pan with the middle button or space + drag, zoom about
the cursor with the wheel. Double-click a motif instance to open its motif (each graph keeps its
own zoom and scroll). Quick add and rename in place are plain widgets over the view, never scene
items.
"""
from __future__ import annotations

from PySide6.QtCore import QLineF, QPoint, QPointF, QRectF, QSize, Qt, Signal
from PySide6.QtGui import QCursor, QFont, QGuiApplication, QImage, QKeySequence, QPainter, QPalette, QPen, QTransform
from PySide6.QtWidgets import QGraphicsView, QMenu

from layerloom.core import clipboard, edits, motif_ops
from layerloom.core.motif_library import BY_KEY, library_edit
from layerloom.core.graph import Wire
from layerloom.core.kinds import KINDS
from layerloom.core.layout import COLUMN, tidy_positions
from layerloom.gui import theme
from layerloom.gui.canvas.block_item import H, W, BlockItem
from layerloom.gui.canvas.block_item import font as block_font
from layerloom.gui.canvas.name_editor import NameEditor
from layerloom.gui.canvas.quick_add import QuickAdd
from layerloom.gui.canvas.scene import CanvasScene
from layerloom.gui.canvas.wire_item import DraftWire, WireItem
from layerloom.gui.files import Prompts

KIND_MIME = "application/x-layerloom-kind"
"""Drag-and-drop type of a kind from Parts; the data is the kind's name in UTF-8."""
MOTIF_MIME = "application/x-layerloom-motif"
"""Drag-and-drop type of a motif from Parts; the data is ``library:<key>`` or ``design:<name>`` in UTF-8."""

PASTE_STEP = 40.0  # each paste of the same blocks lands this much further down and right
ZOOM_STEP = 1.25


class CanvasView(QGraphicsView):
    """The canvas for ``document``. ``message`` carries a refusal or hint for a status line."""

    message = Signal(str)

    def __init__(self, document, parent=None):
        super().__init__(parent)
        self.document = document
        self.canvas_scene = CanvasScene(document, self)
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
        self._space = False
        self._draft: DraftWire | None = None
        self._draft_from: tuple[str, int] | None = None
        self._quick = QuickAdd(self)
        self._quick.hide()
        self._quick.chosen.connect(self._quick_chosen)
        self._quick_spot = QPointF()
        self._quick_source: tuple[str, int] | None = None
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
        self.canvas_scene.set_overview(self.transform().m11() < theme.SHAPE_MIN_DETAIL)

    def drawForeground(self, painter, rect: QRectF) -> None:
        scene = self.canvas_scene
        if not scene.overview:
            return
        lines, rects = scene.overview_shapes()
        painter.setRenderHint(QPainter.RenderHint.Antialiasing, False)  # specks and hairlines: no need
        painter.setPen(QPen(theme.WIRE, 0))
        painter.drawLines(lines)
        painter.setPen(Qt.PenStyle.NoPen)
        for colour, group in rects:
            painter.setBrush(colour)
            painter.drawRects(group)

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
        rect = self.canvas_scene.itemsBoundingRect()
        if rect.isEmpty():
            return
        self.fitInView(rect.adjusted(-40, -40, 40, 40), Qt.AspectRatioMode.KeepAspectRatio)
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
        rect = self.canvas_scene.itemsBoundingRect()
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
        """A badge offers its mends; elsewhere the motif commands for the selection."""
        super().contextMenuEvent(event)
        if event.isAccepted():
            return
        item = self._block_at(event.pos())
        if item is not None and item.block_id not in self.document.selection:
            self.document.select([item.block_id])
        self.motif_menu().exec(event.globalPos())
        event.accept()

    def motif_menu(self) -> QMenu:
        """Make motif, Open motif, Expand and Back, each enabled when it applies."""
        menu = QMenu(self)
        instance = self._selected_instance()
        for text, slot, enabled in (("Make motif…", self.make_motif, bool(self.document.selection)),
                                    ("Open motif", self.open_motif, instance is not None),
                                    ("Expand motif", self.expand_motif, instance is not None),
                                    ("Back", self.document.back, len(self.document.trail) > 1)):
            menu.addAction(text, slot).setEnabled(enabled)
        return menu

    def _commit_moves(self) -> None:
        """One undoable move for every selected block the drag left somewhere new."""
        graph = self.document.graph
        blocks = graph.blocks
        moved = {}
        for item in self.canvas_scene.selectedItems():
            if isinstance(item, BlockItem) and item.block_id in blocks:
                p = (item.pos().x(), item.pos().y())
                if p != tuple(blocks[item.block_id].position):
                    moved[item.block_id] = p
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
            edit = edits.connect(design, Wire(src, src_port, target.block_id, port))
        except edits.EditError as e:
            self.message.emit(str(e))
            return
        self.canvas_scene.apply(edit)

    # ----- keys
    def keyPressEvent(self, event) -> None:
        key, mods = event.key(), event.modifiers()
        if key in (Qt.Key.Key_Delete, Qt.Key.Key_Backspace):
            self.delete_selection()
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
        data = event.mimeData()
        if not self._ours(event):
            super().dropEvent(event)
            return
        event.acceptProposedAction()
        spot = self.mapToScene(event.position().toPoint())
        if data.hasFormat(MOTIF_MIME):
            self.add_motif(bytes(data.data(MOTIF_MIME)).decode("utf-8"), spot)
        else:
            self.add_kind(bytes(data.data(KIND_MIME)).decode("utf-8"), spot)

    def _selected_source(self) -> tuple[str, int] | None:
        """The one selected block's first output, if exactly one block with an output is selected."""
        sel = self.document.selection
        item = self.canvas_scene.blocks.get(sel[0]) if len(sel) == 1 else None
        return (item.block_id, 0) if item is not None and item.state.n_out else None

    def add_kind(self, kind: str, centre: QPointF, source: tuple[str, int] | None = None,
                 from_selection: bool = True, settings: dict | None = None, before: edits.Edit | None = None,
                 name: str | None = None) -> str | None:
        """Add a block of ``kind`` centred at scene point ``centre`` as one edit (after the operations
        of ``before``, if given), wired from ``source`` (or from the one selected block when
        ``from_selection``); selects it and returns its id."""
        spec = KINDS.get(kind)
        if spec is None:
            self.message.emit(f"there is no block kind {kind!r}")
            return None
        takes_input = kind == "Motif" or spec.input_count(spec.defaults) > 0
        if source is None and from_selection and takes_input:
            source = self._selected_source()
        design = self.document.design
        edit, bid = edits.add_block(design, kind, settings or {}, graph=self.document.graph_key, name=name,
                                    position=(round(centre.x() - W / 2), round(centre.y() - H / 2)),
                                    inputs=[source] if source is not None and takes_input else ())
        if before is not None:
            edit = edits.Edit(before.label, before.ops + edit.ops)
        if self.canvas_scene.apply(edit):
            self.document.select([bid])
            return bid
        return None

    def add_motif(self, payload: str, centre: QPointF) -> str | None:
        """Add an instance of a motif from Parts: ``library:<key>`` defines the library motif in the
        design and adds an instance of it, as one edit; ``design:<name>`` adds an instance."""
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
        return self.add_kind("Motif", centre, settings={"motif": name, "repeat": 1}, before=before,
                             name=self.document.graph.fresh_name(name))

    def quick_add(self, text: str = "", at: QPoint | None = None, source: tuple[str, int] | None = None) -> None:
        """Open Quick add at the cursor (or view point ``at``); the block chosen lands there, wired
        from ``source`` or else from the one selected block (then placed to its right)."""
        if at is None:
            at = self.mapFromGlobal(QCursor.pos())
            if not self.viewport().rect().contains(at):
                at = self.viewport().rect().center()
        self._quick_spot = self.mapToScene(at)
        self._quick_source = source
        self._quick.open_at(at.x(), at.y(), text)

    def _quick_chosen(self, kind: str) -> None:
        spot, source = self._quick_spot, self._quick_source
        self._quick_source = None
        if source is None:
            source = self._selected_source()
            if source is not None:
                item = self.canvas_scene.blocks[source[0]]
                spot = item.pos() + QPointF(COLUMN + W / 2, H / 2)
        self.add_kind(kind, spot, source, from_selection=False)
        self.setFocus()

    # ----- selection and edits
    def select_all(self) -> None:
        self.document.select(list(self.document.graph.blocks))

    def delete_selection(self) -> None:
        """Delete the selected blocks (with their wires) and the selected wires, as one edit."""
        design = self.document.graph
        ids = [i.block_id for i in self.canvas_scene.selectedItems() if isinstance(i, BlockItem)]
        gone = set(ids)
        wires = [i.wire for i in self.canvas_scene.selectedItems()
                 if isinstance(i, WireItem) and i.wire.src not in gone and i.wire.dst not in gone]
        if not ids and not wires:
            return
        ops = tuple(op for w in wires for op in edits.disconnect(design, w).ops)
        if ids:
            edit = edits.remove_blocks(design, ids)
            label = edit.label
            ops += edit.ops
        else:
            label = "Remove wire" if len(wires) == 1 else "Remove wires"
        self.canvas_scene.apply(edits.Edit(label, ops))

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

    def tidy(self) -> None:
        """Lay the graph shown out left → right with Tidy, as one undoable edit, and show it all."""
        design = self.document.graph
        changed = {b: p for b, p in tidy_positions(design).items() if tuple(design.blocks[b].position) != p}
        if changed:
            self.canvas_scene.apply(edits.Edit("Tidy", edits.move(design, changed).ops))
        self.fit_all()

    def rename_selected(self) -> None:
        sel = self.document.selection
        if len(sel) == 1 and sel[0] in self.canvas_scene.blocks:
            self._start_rename(self.canvas_scene.blocks[sel[0]])

    def _start_rename(self, item: BlockItem) -> None:
        self.ensureVisible(item.sceneBoundingRect(), 20, 20)
        rect = self.mapFromScene(item.mapToScene(item.title_rect())).boundingRect()
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
        rect = self._picture_rect()
        image = QImage(QSize(max(int(rect.width() * scale), 1), max(int(rect.height() * scale), 1)),
                       QImage.Format.Format_ARGB32_Premultiplied)
        image.fill(theme.CANVAS)
        painter = QPainter(image)
        painter.setRenderHints(QPainter.RenderHint.Antialiasing | QPainter.RenderHint.TextAntialiasing)
        self.canvas_scene.render(painter, QRectF(image.rect()), rect)
        painter.end()
        return image.save(str(path), "PNG")

    def save_svg(self, path) -> bool:
        """Write a picture of the whole canvas to ``path`` as SVG."""
        from PySide6.QtSvg import QSvgGenerator

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
        self.canvas_scene.render(painter, QRectF(0, 0, rect.width(), rect.height()), rect)
        painter.end()
        return True
