"""The canvas scene: one item per block and per wire of the graph shown (the design or an open
motif), kept in step with the document.

It observes :class:`~layerloom.gui.document.Document`: a change adds, removes or updates only the
affected items of the graph shown; a move or rename never touches inference; after a change that
re-infers, shapes, badges and cost bars are read from the document's results for the graph shown
(inside a motif: as in one use of it) and only items whose picture differs are updated. Opening
another graph rebuilds the items. Wires attached to a moving block are marked dirty and rebuilt
once per event-loop pass.

With Fold on (:attr:`CanvasScene.fold`), a norm and an activation right after a convolution or
Linear are chips inside its card (:mod:`layerloom.core.folding`): :attr:`CanvasScene.blocks` maps
their ids to :class:`ChipItem` s, the wires inside a card are not drawn, and the card's wires start
at the card. Wires are routed around the cards in their way (:mod:`layerloom.core.wire_route`).
"""
from __future__ import annotations

from dataclasses import replace

from PySide6.QtCore import QRectF, Qt, QTimer, Signal
from PySide6.QtGui import QPainterPath
from PySide6.QtWidgets import QGraphicsItem, QGraphicsScene

from layerloom.core import edits, units
from layerloom.core.edits import port_counts
from layerloom.core.findings import SEVERITY_RANK
from layerloom.core.folding import chip_label, chips_of, fold_groups
from layerloom.core.kinds import KINDS
from layerloom.core.mends import mends_for
from layerloom.core.settings import SettingError
from layerloom.core.stage_rows import resolution, stage_groups
from layerloom.core.wire_labels import label_spot, piece_boxes, tile_of, tile_rect
from layerloom.core.wire_route import Obstacles, route
from layerloom.gui import theme
from layerloom.gui.canvas.badge_item import BadgeItem
from layerloom.gui.canvas.block_item import BOUNDS, CARD_RECT, H, W, BlockItem, CardState
from layerloom.gui.canvas.chips import ChipItem
from layerloom.gui.canvas.wire_item import WireItem, polylines_path


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
AROUND = Qt.ItemSelectionMode.IntersectsItemBoundingRect  # a wire that goes around a place spans it


def _overview_colour(item: BlockItem):
    """A card's outline far out: error or warning, else the plain edge (the selection is drawn over it)."""
    status = item.state.status
    return theme.SEVERITY_COLOURS[status] if status in ("error", "warning") else theme.CARD_EDGE


def _rect(item: BlockItem) -> tuple:
    p = item.pos()
    return (p.x(), p.y(), p.x() + W, p.y() + H)


def _meets(a: tuple, b: tuple) -> bool:
    """Whether rectangles ``(left, top, right, bottom)`` overlap."""
    return a[0] < b[2] and a[2] > b[0] and a[1] < b[3] and a[3] > b[1]


def _overview_flags(item, on: bool) -> None:
    """An item drawn by the overview paints nothing itself (Qt then skips it while painting)."""
    item.setFlag(NO_CONTENTS, on)


class CanvasScene(QGraphicsScene):
    """Items for the graph a document shows. ``refused`` carries the message of an edit the core refused."""

    refused = Signal(str)

    def __init__(self, document, parent=None):
        super().__init__(parent)
        self.document = document
        self.blocks: dict = {}  # block id → BlockItem (a card) or ChipItem (folded into a card)
        self.wires: dict = {}  # Wire → WireItem, for the wires drawn (not those inside a card)
        self.fold = True  # norms and activations after a convolution are chips of its card
        self.folds: dict[str, str] = {}  # chip id → its card's id
        self._chips: dict[str, list[str]] = {}  # card id → chip ids
        self.obstacles = Obstacles()  # card rectangles the wires go around
        self.pieces = Obstacles()  # (wire, i) → the rectangle of piece i of a drawn wire (labels keep off them)
        self.label_places = Obstacles()  # wire → its label's rectangle, as placed
        self._label_dirty: set = set()  # wires whose label goes somewhere again (see place_labels)
        self._label_areas: list = []  # rectangles where cards or wires came or went since the last placing
        self._labels_all = True  # every label is placed afresh
        self._tile_of: dict = {}  # wire → the tile its label belongs to (core.wire_labels.tile_of)
        self._tile_wires: dict = {}  # tile → wires whose label belongs to it
        self._tiles_placed: dict = {}  # tile → wires whose label was placed in it, for the tiles placed
        self._pieces_pending: set = set()  # wires whose pieces are not in :attr:`pieces` yet
        self.label_region: tuple | None = None  # where labels are placed now (see set_label_region)
        self._stages: dict | None = None  # stages and their labels, made on demand (see stage_cache)
        self._staged: tuple = (None, [])  # (each block's resolution, the stages made from them), see stages()
        self.badges: dict[str, list[BadgeItem]] = {}
        self._findings: dict[str, tuple] = {}
        self._dirty_wires: set = set()
        self._vacated: list = []  # rectangles where cards stood still before they moved (see _on_changed)
        self._flush_queued = False
        self._syncing_selection = False
        self._total_macs = 0
        self.overview = False  # far out, the view draws every item at once (see set_overview)
        self._ov_lines: dict = {}  # Wire → its polyline (WireItem.points), kept as wires change
        self.wires_revision = 0  # grows whenever a wire's polyline, the set of wires or the cards moving change
        self._wire_path: tuple | None = None  # (wires revision, the still wires as one path), see overview_wires
        self._ov_rects: dict = {}  # colour rgba → (colour, {block id → card rect})
        self._ov_where: dict = {}  # block id → colour rgba of the group holding it
        self._card_rects: dict = {}  # block id → (its rectangle as a tuple, as a QRectF), reused while it stays
        self._ov_valid = False
        self.overview_revision = 0  # grows whenever the overview's still part may have changed
        self.moving: set[str] = set()  # cards dragged since the last change of the document
        self.mend_applier = None  # the view's way of applying a mend (it keeps a tidy design tidy)
        self._bulk = False  # while an edit moves most cards at once
        self.setItemIndexMethod(QGraphicsScene.ItemIndexMethod.BspTreeIndex)
        document.changed.connect(self._on_changed)
        document.replaced.connect(self.rebuild)
        document.graph_changed.connect(self.rebuild)
        document.selection_changed.connect(self._select_from_document)
        self.selectionChanged.connect(self._select_to_document)
        self.selectionChanged.connect(self._selection_seen)
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
        self.folds, self._chips, self.obstacles, self._card_rects = {}, {}, Obstacles(), {}
        self._ov_lines = {}
        self._labels_all = True
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

    def cards_rect(self) -> QRectF:
        """The scene rectangle holding every card with its outline, and every badge (empty when
        there is none): read from the cards' rectangles, without asking Qt for every item's bounds."""
        rects = self.obstacles.rects.values()
        if not rects:
            return QRectF()
        m = BOUNDS.right() - W  # a card's outline reaches this far past its edge
        left, top = min(r[0] for r in rects) - m, min(r[1] for r in rects) - m
        out = QRectF(left, top, max(r[2] for r in rects) + m - left, max(r[3] for r in rects) + m - top)
        for badges in self.badges.values():
            for badge in badges:
                out = out.united(badge.sceneBoundingRect())
        return out

    def grow_to_fit(self) -> None:
        """Widen the scene rect when blocks come near or past its edges (it never shrinks while editing)."""
        wanted = self._wanted_rect()
        current = self.sceneRect()
        if not current.contains(wanted):
            self.setSceneRect(current.united(wanted))

    # ----- following the model
    def _on_changed(self, change) -> None:
        key, graph = self.document.graph_key, self.graph
        self.overview_revision += 1
        if key in change.topology:
            self._sync_topology()
        many = len(change.moved.get(key, ())) * 4 > len(self.blocks)  # most cards move (Tidy): in bulk
        self._bulk = many
        try:
            rects, blocks = self.obstacles.rects, self.blocks
            for bid in change.moved.get(key, ()):
                item = blocks.get(bid)
                if isinstance(item, BlockItem):
                    x, y = graph.blocks[bid].position
                    if rects[bid][:2] != (x, y):  # a card's rectangle follows its item (see _block_moved)
                        item.setPos(x, y)
                        self._block_moved(bid)
        finally:
            self._bulk = False
        if many:
            self._labels_all = True
            places = graph.blocks  # where the cards now stand (read without a call into Qt per card)
            self.obstacles = Obstacles({b: (x, y, x + W, y + H) for b, _ in self.cards() for x, y in (places[b].position,)})
            self._ov_valid = False
        if change.moved.get(key):  # a card set down elsewhere may now stand in another wire's way
            self._forget_places()
            if many:  # every route may change
                self._dirty_wires.update(self.wires)
            else:
                for bid in change.moved[key]:
                    item = self.blocks.get(bid)
                    if isinstance(item, BlockItem):
                        self._dirty_wires.update(i.wire for i in self.items(item.sceneBoundingRect())
                                                 if isinstance(i, WireItem))
                for x0, y0, x1, y1 in filter(None, self._vacated):  # wires that went around a card's old place
                    self._dirty_wires.update(i.wire for i in self.items(QRectF(x0, y0, x1 - x0, y1 - y0), AROUND)
                                             if isinstance(i, WireItem))
        self._vacated.clear()
        for bid in change.renamed.get(key, ()):
            item = self.blocks.get(bid)
            if item is not None:
                item.set_state(item.state._replace(title=graph.blocks[bid].name))
        if change.reinfers:
            self._refresh_results()
        self.flush_wires()
        if self.moving:  # cards set where the document says are still again (after the wires follow)
            self.moving.clear()
            self.wires_revision += 1
        if key in change.moved or key in change.topology:
            self.grow_to_fit()

    def set_fold(self, on: bool) -> None:
        """Show norms and activations after a convolution as chips of its card (on) or as cards."""
        if on != self.fold:
            self.fold = on
            self.rebuild()

    def card_of(self, block_id: str) -> str:
        """The id of the card that shows ``block_id`` (itself, or the card it is a chip of)."""
        return self.folds.get(block_id, block_id)

    def _drop(self, bid: str) -> None:
        if bid in self.obstacles.rects:
            self._label_areas.append(self.obstacles.rects[bid])
        item = self.blocks.pop(bid)
        self.badges.pop(bid, None)
        self._findings.pop(bid, None)
        self.obstacles.drop(bid)
        if isinstance(item, ChipItem):
            item.setParentItem(None)
        self.removeItem(item)

    def _sync_topology(self) -> None:
        self._ov_valid = False
        self.overview_revision += 1
        self._stages = None
        self._staged = (None, [])
        design = self.design
        graph = self.graph
        old = self.folds
        folds = fold_groups(graph) if self.fold else {}
        regrouped = {b for b in old.keys() | folds.keys() if old.get(b) != folds.get(b)}
        for bid in [b for b in self.blocks if b not in graph.blocks or b in regrouped]:
            if isinstance(self.blocks[bid], ChipItem):
                self._drop(bid)
        for bid in [b for b in self.blocks if b not in graph.blocks or b in regrouped]:
            self._drop(bid)
        self.folds, self._chips = folds, chips_of(folds)
        self.wires_revision += 1
        for w in [w for w in self.wires if w not in graph.wires or folds.get(w.src, w.src) == folds.get(w.dst, w.dst)]:
            self._ov_lines.pop(w, None)
            self._label_areas += self._forget_pieces(w)
            self._label_dirty.add(w)
            self.removeItem(self.wires.pop(w))
            self._dirty_wires.discard(w)
        for bid, block in graph.blocks.items():
            if bid not in self.blocks and bid not in folds:
                n_in, n_out = port_counts(design, block)
                detail = detail_text(block, graph if graph.key else None)
                item = BlockItem(bid, CardState(block.kind, block.name, detail, "", n_in, n_out, "", 0.0))
                item.setPos(*block.position)
                self.blocks[bid] = item
                self.obstacles.put(bid, _rect(item))
                self._label_areas.append(_rect(item))
                self._adopt(item)
        for card, chips in self._chips.items():
            for bid in chips:
                if bid not in self.blocks:
                    block = graph.blocks[bid]
                    state = CardState(block.kind, block.name, "", "", 1, 1, "", 0.0, chips=(chip_label(block.kind),))
                    self.blocks[bid] = ChipItem(bid, self.blocks[card], state)
                    if self.overview:
                        _overview_flags(self.blocks[bid], True)
            self.blocks[card].set_chips([self.blocks[b] for b in chips])
        for w in graph.wires:
            if w not in self.wires and folds.get(w.src, w.src) != folds.get(w.dst, w.dst):
                item = self.wires[w] = WireItem(w)
                self._adopt(item)
                self._dirty_wires.add(w)
        self._dirty_wires.update(self.wires)  # cards came or went: routes may change

    def _refresh_results(self) -> None:
        """Read shapes, findings and MAC shares for the graph shown; update items whose picture differs.
        Inside a motif the MAC shares are of one use of it."""
        self._ov_valid = False
        self.overview_revision += 1
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
            chips = self._chips.get(bid, ())
            macs = r.cost.macs if r is not None else 0
            macs += sum(results[c].cost.macs for c in chips if results.get(c) is not None)
            share = round(macs / total, 2) if (r is not None and total) else 0.0
            detail = detail_text(block, motif)
            last = results.get(chips[-1]) if chips else r
            shape = str(last.outs[0]) if last is not None and last.outs else ""
            cost = "" if block.kind != "Motif" else f"{units.count(r.cost.macs)} MACs" if r is not None else "MACs unknown"
            labels = tuple(chip_label(graph.blocks[c].kind) for c in chips) if bid not in self.folds else (
                chip_label(block.kind),)
            state = CardState(block.kind, block.name, detail, "" if shape == detail else shape, n_in, n_out, status,
                              share, cost, labels)
            if (n_in, n_out) != (old.n_in, old.n_out):
                self._dirty_wires.update(graph.in_wires[bid] + graph.out_wires[bid])
            if block.kind == "Motif":
                item.setToolTip(self._instance_tip(block, r))
            item.set_state(state)
            if found != self._findings.get(bid, ()):
                self._set_badges(item, found)
        self._stages = None
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
            chip = isinstance(item, ChipItem)
            port = f.port if f.port is not None and f.port < item.state.n_in and not chip else None
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
        if not on:
            self.place_labels()

    def overview_shapes(self, moving: bool | None = None) -> tuple[list, list]:
        """Wire polylines (each wire's :attr:`WireItem.points`), and (colour, card rectangles)
        groups: error, warning, plain, and the selection drawn over them. Kept up to date piece by
        piece while blocks move; made again after other changes (a card's rectangle is made again
        only when it moved). ``moving`` True gives what is drawn live (the cards being dragged,
        their wires, the selection), False the still rest."""
        if not self._ov_valid:
            self._ov_rects, self._ov_where = {}, {}
            by_status: dict = {}  # a card's status → (colour rgba, its group's rectangles)
            places, made, blocks = self.obstacles.rects, self._card_rects, self.blocks
            for bid in places:  # every card (chips have no rectangle of their own)
                item = blocks[bid]
                group = by_status.get(item.state.status)
                if group is None:
                    colour = _overview_colour(item)
                    group = by_status[item.state.status] = (
                        colour.rgba(), self._ov_rects.setdefault(colour.rgba(), (colour, {}))[1])
                place, rect = made.get(bid, (None, None))
                if place != places[bid]:
                    place = places[bid]
                    rect = QRectF(place[0], place[1], W, H)
                    made[bid] = (place, rect)
                group[1][bid] = rect
                self._ov_where[bid] = group[0]
            self._ov_valid = True
        chosen = [] if moving is False else [
            (theme.ACCENT, [CARD_RECT.translated(i.pos()) for i in self.selectedItems() if isinstance(i, BlockItem)])]
        if moving is None or not self.moving:
            if moving:
                return [], chosen
            return (list(self._ov_lines.values()), [(c, list(r.values())) for c, r in self._ov_rects.values()] + chosen)
        dragged = self._moving_wires()
        lines = [pts for w, pts in self._ov_lines.items() if (w in dragged) == moving]
        return lines, [(c, [r for b, r in rs.items() if (b in self.moving) == moving])
                       for c, rs in self._ov_rects.values()] + chosen

    def overview_wires(self, moving: bool | None = None) -> QPainterPath:
        """Every wire far out as one path (``moving`` as for :meth:`overview_shapes`); all of them
        or the still ones are kept as made until a wire changes or other cards start moving."""
        if moving:
            return polylines_path(self.overview_shapes(True)[0])
        key = (self.wires_revision, moving)
        if self._wire_path is None or self._wire_path[0] != key:
            lines = self._ov_lines.values() if moving is None or not self.moving else self.overview_shapes(False)[0]
            self._wire_path = (key, polylines_path(lines))
        return self._wire_path[1]

    def overview_cards(self, moving: bool | None = None) -> list:
        """``(scene rectangle, name)`` of every card far out (``moving`` as for :meth:`overview_shapes`)."""
        self.overview_shapes()
        blocks, dragged = self.blocks, self.moving
        return [(r, blocks[b].name_shown) for _, rs in self._ov_rects.values() for b, r in rs.items()
                if moving is None or (b in dragged) == moving]

    def _moving_wires(self) -> set:
        g, out = self.graph, set()
        for card in self.moving:
            for bid in (card, *self._chips.get(card, ())):
                out.update(g.in_wires.get(bid, ()))
                out.update(g.out_wires.get(bid, ()))
        return out

    def chips_of(self, card: str) -> list:
        """Ids of the chips in ``card`` (none when it holds none or Fold is off)."""
        return self._chips.get(card, [])

    def set_caching(self, on: bool) -> None:
        """Let cards and badges keep their picture in a device pixmap (on, for the screen) or paint
        afresh (off: a vector picture then holds shapes and text, not bitmaps)."""
        mode = QGraphicsItem.CacheMode.DeviceCoordinateCache if on else QGraphicsItem.CacheMode.NoCache
        for item in [*self.blocks.values(), *(b for bs in self.badges.values() for b in bs)]:
            if not isinstance(item, ChipItem):
                item.setCacheMode(mode)

    def cards(self):
        """``(block id, BlockItem)`` for every card (chips excluded)."""
        return ((b, i) for b, i in self.blocks.items() if isinstance(i, BlockItem))

    def stages(self) -> list:
        """``(resolution, card ids)`` per stage of the graph shown (see core.stage_rows), top → bottom."""
        return self.stage_cache("stages", self._make_stages)

    def _make_stages(self) -> list:
        """The stages, made again only when the wiring, the folds or some block's resolution
        changed (an edit of a width leaves them as they were)."""
        results = self.document.results()
        shapes = {b: (r.outs[0] if r is not None and r.outs else None) for b, r in results.items()}
        key = {b: resolution(shape) for b, shape in shapes.items()}
        if key != self._staged[0]:
            self._staged = (key, stage_groups(self.graph, shapes, self.folds))
        return self._staged[1]

    def _forget_places(self) -> None:
        """Drop what :meth:`stage_cache` keeps that depends on where cards are (the stages
        themselves depend only on the graph, its shapes and the folds)."""
        if self._stages is not None:
            self._stages = {k: v for k, v in self._stages.items() if k == "stages"}

    def stage_cache(self, key: str, make):
        """What ``make()`` returns, kept until the graph shown or its results change, or (but for
        the stages) a position changes."""
        if self._stages is None:
            self._stages = {}
        if key not in self._stages:
            self._stages[key] = make()
        return self._stages[key]

    def _overview_stale(self, *args) -> None:
        self._ov_valid = False
        self.overview_revision += 1

    def _selection_seen(self) -> None:
        """Far out the selection is drawn live over the still picture: show it where it is now."""
        if self.overview:
            self.update()

    # ----- wires following blocks
    def mouseMoveEvent(self, event) -> None:  # noqa: N802 (Qt naming)
        super().mouseMoveEvent(event)  # a drag moves the selected cards' items
        if event.buttons() & Qt.MouseButton.LeftButton:
            self.follow_moved_cards()

    def follow_moved_cards(self, items=None) -> None:
        """Let wires, obstacles and the overview follow the cards (``items``, else the selected
        ones) whose items were moved directly: a drag moves the items itself, and the document
        learns of it on the drop."""
        rects = self.obstacles.rects
        for item in self.selectedItems() if items is None else items:
            if isinstance(item, BlockItem):
                p = item.pos()
                if rects.get(item.block_id, (None, None))[:2] != (p.x(), p.y()):
                    self._block_moved(item.block_id)

    def _block_moved(self, block_id: str) -> None:
        if self._bulk:  # the scene re-indexes and re-routes everything once afterwards
            return
        item = self.blocks[block_id]
        if block_id not in self.moving:  # the still part is drawn once more without it
            self.moving.add(block_id)
            self.overview_revision += 1
            self.wires_revision += 1
            self._vacated.append(self.obstacles.rects.get(block_id))
        if self._ov_valid and block_id in self._ov_where:
            self._ov_rects[self._ov_where[block_id]][1][block_id] = CARD_RECT.translated(item.pos())
        self._label_areas += (self.obstacles.rects.get(block_id), _rect(item))
        self.obstacles.put(block_id, _rect(item))
        g = self.graph
        if g.in_wires.get(block_id) is None:
            return
        for bid in (block_id, *self._chips.get(block_id, ())):
            self._dirty_wires.update(w for w in g.in_wires[bid] if w in self.wires)
            self._dirty_wires.update(w for w in g.out_wires[bid] if w in self.wires)
        if not self._flush_queued:
            self._flush_queued = True
            QTimer.singleShot(0, self, self.flush_wires)

    def flush_wires(self) -> None:
        """Re-route every dirty wire once. Ends are read from the cards' rectangles (kept in
        :attr:`obstacles` as cards move), not from the items: no call into Qt per wire end."""
        self._flush_queued = False
        dirty, wires = self._dirty_wires, self.wires
        if not dirty:
            return
        blocks, folds, obstacles, moving = self.blocks, self.folds, self.obstacles, self.moving
        rects = obstacles.rects
        out_wires = self.graph.out_wires
        for w in [*dirty]:  # wires sharing an output: the one labelled may change
            siblings = out_wires.get(w.src, ())
            if len(siblings) > 1:
                dirty.update(x for x in siblings if x.src_port == w.src_port and x in wires)
        chosen: dict = {}  # (block, port) → the wire of that output that carries the label
        gap = theme.WIRE_GAP
        for w in dirty:
            item = wires.get(w)
            if item is None:
                continue
            src, dst = folds.get(w.src, w.src), folds.get(w.dst, w.dst)
            (_, st, sr, _), (dl, dt, _, _) = rects[src], rects[dst]
            port = w.src_port if src == w.src else 0
            a = (sr + gap, st + H * (port + 1) / (max(blocks[src].state.n_out, port + 1) + 1))
            b = (dl - gap, dt + H * (w.dst_port + 1) / (max(blocks[dst].state.n_in, w.dst_port + 1) + 1))
            labelled = len(out_wires.get(w.src, ())) < 2 or self._labelled(w, chosen)
            if not item.set_geometry(a, b, route(a, b, obstacles, (src, dst)), labelled):
                continue
            self._label_dirty.add(w)
            if self._ov_lines.get(w) == item.points:
                continue  # its shape or label changed, not its way: the overview is the same
            self._ov_lines[w] = item.points
            self.wires_revision += 1
            if src not in moving and dst not in moving:
                self.overview_revision += 1  # a still wire took another way
        dirty.clear()
        if not self.overview:  # far out labels are not drawn: they are placed on the way back in
            self.place_labels()

    # ----- wire labels
    def _forget_pieces(self, w) -> list:
        """Take wire ``w``'s pieces out of :attr:`pieces`; their rectangles."""
        old = []
        i = 0
        while (w, i) in self.pieces.rects:
            old.append(self.pieces.rects[(w, i)])
            self.pieces.drop((w, i))
            i += 1
        return old

    def _index_pieces(self, w, item) -> list:
        boxes = piece_boxes(item.polyline(), item.width / 2)
        for i, box in enumerate(boxes):
            self.pieces.put((w, i), box)
        return boxes

    def set_label_region(self, rect: tuple | None) -> None:
        """Place labels only for wires in ``rect`` (left, top, right, bottom: what the view shows);
        the others wait until they come into view. None: every wire (a picture of the whole)."""
        self.label_region = rect
        if not self.overview:
            self.place_labels()

    def place_labels(self) -> None:
        """Place the labels of the tiles in :attr:`label_region` not placed yet, after dropping the
        tiles where wires changed or cards or wires came, went or moved: each tile's labels afresh,
        in the order of the wires' names, each clear of cards, wires and the tile's other labels
        (:mod:`layerloom.core.wire_labels`), so what is placed does not depend on what was shown first."""
        wires, placed, tile_wires = self.wires, self._tiles_placed, self._tile_wires
        if self._labels_all:
            self._labels_all = False
            self.pieces, self.label_places = Obstacles(), Obstacles()
            self._pieces_pending = set(wires)
            self._tile_of, self._tile_wires, self._tiles_placed = {}, {}, {}
            tile_wires, placed = self._tile_wires, self._tiles_placed
            for w, item in wires.items():
                item.place_label(None)
                self._assign_tile(w, item)
        else:
            areas, dirty = self._label_areas, set()
            for w in self._label_dirty:
                old = self._tile_of.pop(w, None)
                if old is not None:
                    tile_wires[old].discard(w)
                    dirty.add(old)
                if w in wires:
                    areas += self._forget_pieces(w)
                    areas.append(wires[w].wire_box)
                    self._pieces_pending.add(w)
                    dirty.add(self._assign_tile(w, wires[w]))
                else:
                    self._pieces_pending.discard(w)
            for area in areas:
                if area is not None:
                    dirty.update(t for t in placed if _meets(tile_rect(t), area))
            for tile in dirty & placed.keys():
                for w in placed.pop(tile):
                    self.label_places.drop(w)
                    if w in wires:
                        wires[w].place_label(None)
        self._label_dirty.clear()
        self._label_areas = []
        region = self.label_region
        for tile in sorted(t for t, ws in tile_wires.items()
                           if ws and t not in placed and (region is None or _meets(tile_rect(t), region))):
            self._place_tile(tile)

    def _assign_tile(self, w, item) -> tuple:
        tile = self._tile_of[w] = tile_of(item.polyline())
        self._tile_wires.setdefault(tile, set()).add(w)
        return tile

    def _place_tile(self, tile: tuple) -> None:
        """Place the labels of the wires of ``tile``, inside it."""
        wires, pending = self.wires, self._pieces_pending
        left, top, right, bottom = box = tile_rect(tile)
        for w in [w for w in pending if _meets(wires[w].wire_box, box)]:  # the pieces a label here must avoid
            pending.discard(w)
            self._index_pieces(w, wires[w])
        cards, pieces, labels = self.obstacles, self.pieces, self.label_places

        def blocked(x0, y0, x1, y1):
            return (x0 < left or y0 < top or x1 > right or y1 > bottom or labels.blocked(x0, y0, x1, y1)
                    or cards.blocked(x0, y0, x1, y1) or pieces.blocked(x0, y0, x1, y1))

        done = self._tiles_placed[tile] = []
        for w in sorted(self._tile_wires[tile]):
            item = wires[w]
            item.place_label(label_spot(item.polyline(), item.label_size, item.width / 2, blocked)
                             if item.label else None)
            if item.label_box is not None:
                labels.put(w, item.label_box)
                done.append(w)

    def _labelled(self, w, chosen: dict) -> bool:
        """Whether wire ``w`` shows its shape: of the wires leaving one output, only the one to the
        nearest card does (they all carry the same tensor); ``chosen`` remembers the pick per output."""
        if len(self.graph.out_wires.get(w.src, ())) < 2:  # the only wire leaving its block
            return True
        key = (w.src, w.src_port)
        if key not in chosen:
            siblings = [x for x in self.graph.out_wires.get(w.src, ()) if x.src_port == w.src_port and x in self.wires]
            rects, card_of = self.obstacles.rects, self.card_of
            x0, y0 = rects[card_of(w.src)][:2]

            def distance(x):
                left, top = rects[card_of(x.dst)][:2]
                return (abs(left - x0) + abs(top - y0), x.dst)

            chosen[key] = min(siblings, key=distance) if len(siblings) > 1 else w
        return chosen[key] == w

    # ----- selection, both ways
    def _select_to_document(self) -> None:
        if self._syncing_selection:
            return
        self._syncing_selection = True
        try:
            self.document.select([i.block_id for i in self.selectedItems() if isinstance(i, (BlockItem, ChipItem))])
        finally:
            self._syncing_selection = False

    def _select_from_document(self, ids: list) -> None:
        if self._syncing_selection:
            return
        self._syncing_selection = True
        try:
            wanted = set(ids)
            for item in self.selectedItems():
                if getattr(item, "block_id", None) not in wanted:
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
        """Apply a mend (as the view wants it, see :attr:`mend_applier`, else as one edit)."""
        return self.mend_applier(mend) if self.mend_applier is not None else self.apply(mend.edit)

    def total_macs(self) -> int:
        """MACs of the whole design per sample, as of the last refresh."""
        return self._total_macs
