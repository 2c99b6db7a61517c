"""The canvas scene: one item per block and per wire of the graph shown (the design or an open
motif), kept in step with the document.

It observes :class:`~layerloom.gui.document.Document`: a change adds, removes or updates only the
affected items of the graph shown; a move or rename never touches inference; after a change that
re-infers, shapes, badges and cost bars are read from the document's results for the graph shown
(inside a motif: as in one use of it) and only items whose picture differs are updated. Opening
another graph rebuilds the items. Wires attached to a moving block are marked dirty and rebuilt
once per event-loop pass.
"""
from __future__ import annotations

from dataclasses import replace

from PySide6.QtCore import QPointF, QRectF, QTimer, Signal
from PySide6.QtWidgets import QGraphicsItem, QGraphicsScene

from layerloom.core import edits, units
from layerloom.core.edits import port_counts
from layerloom.core.findings import SEVERITY_RANK
from layerloom.core.kinds import KINDS
from layerloom.core.mends import mends_for
from layerloom.core.settings import SettingError
from layerloom.gui import theme
from layerloom.gui.canvas.badge_item import BadgeItem
from layerloom.gui.canvas.block_item import CARD_RECT, H, W, BlockItem, CardState
from layerloom.gui.canvas.wire_item import WireItem


class ParamValue(int):
    """A motif parameter's default that prints as the parameter's name (``3×3 · width``)."""

    def __new__(cls, value: int, name: str):
        obj = super().__new__(cls, value)
        obj.name = name
        return obj

    def __format__(self, spec: str) -> str:
        return self.name

    def __str__(self) -> str:
        return self.name


def detail_text(block, motif=None) -> str:
    """The card's second line: settings in trade notation (a motif instance: motif × repeat). Inside
    ``motif``, its ports read ``input port 1`` / ``output port 1`` and parameters show by name."""
    kind = KINDS.get(block.kind)
    if block.kind == "Motif":
        return f"{block.settings.get('motif', '?')} × {block.settings.get('repeat', 1)}"
    if kind is None:
        return block.kind
    settings = block.settings
    if motif is not None:
        if block.kind in ("Input", "Output"):
            ins, outs = motif.ports()
            side = ins if block.kind == "Input" else outs
            return f"{block.kind.lower()} port {side.index(block.id) + 1}"
        settings = {k: ParamValue(motif.params.get(v["param"], 1), v["param"]) if isinstance(v, dict) else v
                    for k, v in settings.items()}
    return kind.summary(settings) or kind.title


NO_CONTENTS = QGraphicsItem.GraphicsItemFlag.ItemHasNoContents


def _overview_flags(item, on: bool) -> None:
    """An item drawn by the overview paints nothing itself (Qt then skips it while painting)."""
    item.setFlag(NO_CONTENTS, on)


class CanvasScene(QGraphicsScene):
    """Items for the graph a document shows. ``refused`` carries the message of an edit the core refused."""

    refused = Signal(str)

    def __init__(self, document, parent=None):
        super().__init__(parent)
        self.document = document
        self.blocks: dict[str, BlockItem] = {}
        self.wires: dict = {}  # Wire → WireItem
        self.badges: dict[str, list[BadgeItem]] = {}
        self._findings: dict[str, tuple] = {}
        self._dirty_wires: set = set()
        self._flush_queued = False
        self._syncing_selection = False
        self._total_macs = 0
        self.overview = False  # far out, the view draws every item at once (see set_overview)
        self._ov_lines: dict = {}  # Wire → chord, kept while in overview
        self._ov_rects: dict = {}  # colour rgba → (colour, {block id → card rect})
        self._ov_where: dict = {}  # block id → colour rgba of the group holding it
        self._ov_valid = False
        self.setItemIndexMethod(QGraphicsScene.ItemIndexMethod.BspTreeIndex)
        document.changed.connect(self._on_changed)
        document.replaced.connect(self.rebuild)
        document.graph_changed.connect(self.rebuild)
        document.selection_changed.connect(self._select_from_document)
        self.selectionChanged.connect(self._select_to_document)
        self.selectionChanged.connect(self._overview_stale)
        self.rebuild()

    @property
    def design(self):
        return self.document.design

    @property
    def graph(self):
        """The graph shown: the design or the open motif."""
        return self.document.graph

    # ----- whole graph
    def rebuild(self) -> None:
        """Drop every item and make them again for the graph shown (a load, a new design, another graph)."""
        self._syncing_selection = True
        try:
            self.clear()
        finally:
            self._syncing_selection = False
        self.blocks, self.wires, self.badges, self._findings = {}, {}, {}, {}
        self._dirty_wires.clear()
        self._sync_topology()
        self._refresh_results()
        self.flush_wires()
        self.setSceneRect(self._wanted_rect())

    def _wanted_rect(self) -> QRectF:
        pos = [b.position for b in self.graph.blocks.values()]
        if not pos:
            return QRectF(-theme.SCENE_MARGIN, -theme.SCENE_MARGIN, 2 * theme.SCENE_MARGIN, 2 * theme.SCENE_MARGIN)
        xs, ys = [p[0] for p in pos], [p[1] for p in pos]
        m = theme.SCENE_MARGIN
        return QRectF(min(xs) - m, min(ys) - m, max(xs) - min(xs) + W + 2 * m, max(ys) - min(ys) + H + 2 * m)

    def grow_to_fit(self) -> None:
        """Widen the scene rect when blocks come near or past its edges (it never shrinks while editing)."""
        wanted = self._wanted_rect()
        current = self.sceneRect()
        if not current.contains(wanted):
            self.setSceneRect(current.united(wanted))

    # ----- following the model
    def _on_changed(self, change) -> None:
        key, graph = self.document.graph_key, self.graph
        if key in change.topology:
            self._sync_topology()
        for bid in change.moved.get(key, ()):
            item = self.blocks.get(bid)
            if item is not None:
                x, y = graph.blocks[bid].position
                if item.pos() != QPointF(x, y):
                    item.setPos(x, y)
        for bid in change.renamed.get(key, ()):
            item = self.blocks.get(bid)
            if item is not None:
                item.set_state(item.state._replace(title=graph.blocks[bid].name))
        if change.reinfers:
            self._refresh_results()
        self.flush_wires()
        if key in change.moved or key in change.topology:
            self.grow_to_fit()

    def _sync_topology(self) -> None:
        self._ov_valid = False
        design = self.design
        graph = self.graph
        for bid in [b for b in self.blocks if b not in graph.blocks]:
            self.removeItem(self.blocks.pop(bid))
            self.badges.pop(bid, None)
            self._findings.pop(bid, None)
        for w in [w for w in self.wires if w not in graph.wires]:
            self.removeItem(self.wires.pop(w))
            self._dirty_wires.discard(w)
        for bid, block in graph.blocks.items():
            if bid not in self.blocks:
                n_in, n_out = port_counts(design, block)
                detail = detail_text(block, graph if graph.key else None)
                item = BlockItem(bid, CardState(block.kind, block.name, detail, "", n_in, n_out, "", 0.0),
                                 self._block_moved)
                item.setPos(*block.position)
                self.blocks[bid] = item
                self._adopt(item)
        for w in graph.wires:
            if w not in self.wires:
                item = self.wires[w] = WireItem(w)
                self._adopt(item)
                self._dirty_wires.add(w)

    def _refresh_results(self) -> None:
        """Read shapes, findings and MAC shares for the graph shown; update items whose picture differs.
        Inside a motif the MAC shares are of one use of it."""
        self._ov_valid = False
        design, graph = self.design, self.graph
        motif = graph if graph.key else None
        results = self.document.results()
        total = sum(r.cost.macs for r in results.values() if r is not None)
        self._total_macs = total
        by_block = self.document.findings_by_block()
        for bid, item in self.blocks.items():
            block = graph.blocks[bid]
            r = results.get(bid)
            old = item.state
            n_in, n_out = port_counts(design, block)
            found = tuple(by_block.get(bid, ()))
            status = found[0].severity if found else ""
            share = round(r.cost.macs / total, 2) if (r is not None and total) else 0.0
            detail = detail_text(block, motif)
            shape = str(r.outs[0]) if r is not None and r.outs else ""
            cost = "" if block.kind != "Motif" else f"{units.count(r.cost.macs)} MACs" if r is not None else "MACs unknown"
            state = CardState(block.kind, block.name, detail, "" if shape == detail else shape, n_in, n_out, status,
                              share, cost)
            if (n_in, n_out) != (old.n_in, old.n_out):
                self._dirty_wires.update(graph.in_wires[bid] + graph.out_wires[bid])
            if block.kind == "Motif":
                item.setToolTip(self._instance_tip(block, r))
            item.set_state(state)
            if found != self._findings.get(bid, ()):
                self._set_badges(item, found)
        for w, item in self.wires.items():
            r = results.get(w.src)
            carried = r.outs[w.src_port] if r is not None and w.src_port < len(r.outs) else None
            if carried != item.carried:
                item.carried = carried
                self._dirty_wires.add(w)

    def _instance_tip(self, block, r) -> str:
        motif, repeat = block.settings.get("motif", "?"), block.settings.get("repeat", 1)
        lines = [f"{block.name}: motif {motif} × {repeat}"]
        if r is not None:
            lines.append(f"all {repeat} use{'s' if repeat != 1 else ''}: {units.count(r.cost.weights)} weights, "
                         f"{units.count(r.cost.macs)} MACs per sample")
        lines.append("Double-click to open the motif")
        return "\n".join(lines)

    def _set_badges(self, item: BlockItem, found: tuple) -> None:
        for badge in self.badges.pop(item.block_id, []):
            badge.setParentItem(None)
            self.removeItem(badge)
        self._findings[item.block_id] = found
        groups: dict = {}
        for f in found:
            port = f.port if f.port is not None and f.port < item.state.n_in else None
            groups.setdefault(port, []).append(f)
        self.badges[item.block_id] = [
            BadgeItem(item, port, sorted(fs, key=lambda f: SEVERITY_RANK[f.severity]), self)
            for port, fs in groups.items()]
        for badge in self.badges[item.block_id]:
            _overview_flags(badge, self.overview)

    # ----- far out: one drawing for every item
    def _adopt(self, item) -> None:
        self.addItem(item)
        if self.overview:
            _overview_flags(item, True)

    def set_overview(self, on: bool) -> None:
        """Far out, items stop painting themselves and the view draws them all in a few calls
        (:meth:`overview_shapes`): there Qt's own cost per painted item is most of a frame. Items
        stay in the scene, so selecting and hit tests work as before."""
        if on == self.overview:
            return
        self.overview = on
        items = [*self.blocks.values(), *self.wires.values(), *(b for bs in self.badges.values() for b in bs)]
        for item in items:
            _overview_flags(item, on)

    def overview_shapes(self) -> tuple[list, list]:
        """Wire chords, and (colour, card rectangles) groups: selection, error, warning, plain. Kept
        up to date piece by piece while blocks move; made again after other changes."""
        if not self._ov_valid:
            self._ov_lines = {w: item.chord for w, item in self.wires.items()}
            self._ov_rects, self._ov_where = {}, {}
            for bid, item in self.blocks.items():
                status = item.state.status
                colour = (theme.ACCENT if item.isSelected() else
                          theme.SEVERITY_COLOURS[status] if status in ("error", "warning") else theme.CARD_EDGE)
                self._ov_rects.setdefault(colour.rgba(), (colour, {}))[1][bid] = CARD_RECT.translated(item.pos())
                self._ov_where[bid] = colour.rgba()
            self._ov_valid = True
        return list(self._ov_lines.values()), [(c, list(r.values())) for c, r in self._ov_rects.values()]

    def _overview_stale(self, *args) -> None:
        self._ov_valid = False

    # ----- wires following blocks
    def _block_moved(self, block_id: str) -> None:
        if self._ov_valid and block_id in self._ov_where:
            item = self.blocks[block_id]
            self._ov_rects[self._ov_where[block_id]][1][block_id] = CARD_RECT.translated(item.pos())
        g = self.graph
        ws = g.in_wires.get(block_id)
        if ws is None:
            return
        self._dirty_wires.update(ws)
        self._dirty_wires.update(g.out_wires[block_id])
        if not self._flush_queued:
            self._flush_queued = True
            QTimer.singleShot(0, self, self.flush_wires)

    def flush_wires(self) -> None:
        """Re-route every dirty wire once."""
        self._flush_queued = False
        blocks = self.blocks
        for w in self._dirty_wires:
            item = self.wires.get(w)
            if item is not None:
                item.set_geometry(blocks[w.src].output_pos(w.src_port), blocks[w.dst].input_pos(w.dst_port))
                if self._ov_valid:
                    self._ov_lines[w] = item.chord
        self._dirty_wires.clear()

    # ----- selection, both ways
    def _select_to_document(self) -> None:
        if self._syncing_selection:
            return
        self._syncing_selection = True
        try:
            self.document.select([i.block_id for i in self.selectedItems() if isinstance(i, BlockItem)])
        finally:
            self._syncing_selection = False

    def _select_from_document(self, ids: list) -> None:
        if self._syncing_selection:
            return
        self._syncing_selection = True
        try:
            wanted = set(ids)
            for item in self.selectedItems():
                if not isinstance(item, BlockItem) or item.block_id not in wanted:
                    item.setSelected(False)
            for bid in ids:
                item = self.blocks.get(bid)
                if item is not None and not item.isSelected():
                    item.setSelected(True)
        finally:
            self._syncing_selection = False

    # ----- edits
    def apply(self, edit) -> bool:
        """Apply ``edit`` through the document (one undo step); on refusal emit ``refused`` and return False."""
        try:
            self.document.apply(edit)
        except (edits.EditError, SettingError) as e:
            self.refused.emit(str(e))
            return False
        return True

    def mends(self, finding):
        """Mends for a finding on a card; inside a motif it is first seen from the design, through
        the use shown (a motif with no use has no shapes to mend by)."""
        view = self.document.motif_view()
        if view is not None:
            if not view.use:
                return []
            finding = replace(finding, block=view.use[0], path=(*view.use[1:], finding.block))
        return mends_for(self.design, finding)

    def apply_mend(self, mend) -> bool:
        return self.apply(mend.edit)

    def total_macs(self) -> int:
        """MACs of the whole design per sample, as of the last refresh."""
        return self._total_macs
