"""Stage rows: Tidy lays a network out like lines of text.

Each card (a block, or a convolution with its folded chips) belongs to a resolution stage: a new
stage begins where the output's H×W changes along the data flow (a 1×1 map and a flat vector count
as one "point" stage). A branch that leaves a stage and comes back to its resolution (a
squeeze-and-excite gate) stays in that stage; a branch that ends in a later stage (a projection
shortcut) belongs to the stage it joins. Stages are rows, top → bottom in data-flow order; in a
row, cards stand left → right in columns (longest path within the row), the longest path of the
network on the row's main line and other branches stacked above and below it. A row longer than
the view wraps onto further lines; the wrap width is the one that shows the design largest in a
view of the given size (never above 100 %). Units are scene pixels; a card's position is its
top-left corner.

>>> from layerloom import Design
>>> d = Design(); x = d.input(3, 32, 32); c = d.add("Conv2d", x, out_channels=8, kernel=3, stride=2)
>>> lay = stage_layout(d, {b: d.analysis().shape(b) for b in d.blocks}, {})
>>> [r.key for r in lay.rows], lay.positions[c][1] > lay.positions[x][1]
([(32, 32), (16, 16)], True)
"""
from __future__ import annotations

from bisect import bisect_right
from dataclasses import dataclass, field
from itertools import count

CARD_WIDTH, CARD_HEIGHT = 180.0, 54.0  # a block's card (the editor draws it this size)
COLUMN = 250.0  # x step between columns: a card and room for a wire with its shape label
STACK = 84.0  # y step between cards stacked in one column
ROW_GAP = 64.0  # free height between two lines: lanes for return wires and skip wires
VIEW = (960.0, 560.0)  # the view Tidy lays out for when none is given: the canvas of a 1280×800 window
FIT_MARGIN = 40.0  # fit to view leaves this much around the cards


def resolution(shape):
    """The stage key of an output shape: (H, W) of a feature map, ``"point"`` for a 1×1 map or a
    flat vector, None while unknown."""
    if shape is None:
        return None
    if len(shape) == 3 and (shape[1], shape[2]) != (1, 1):
        return (shape[1], shape[2])
    return "point"


@dataclass(frozen=True)
class Row:
    """One line of the layout: the cards of (part of) one stage and the rectangle they fill."""

    stage: int  # index of the stage (several lines share it when a stage wraps)
    key: object  # the stage's resolution (see :func:`resolution`)
    cards: tuple  # card ids, left → right
    rect: tuple  # (left, top, right, bottom)


@dataclass
class StageLayout:
    positions: dict = field(default_factory=dict)  # block id → (x, y); a chip takes its card's
    rows: list = field(default_factory=list)  # Row per line, top → bottom
    stage_of: dict = field(default_factory=dict)  # card id → stage index


class _Stage:
    __slots__ = ("key", "parent", "depth", "serial", "alias")

    def __init__(self, key, parent, serial):
        self.key, self.parent, self.serial, self.alias = key, parent, serial, None
        self.depth = parent.depth + 1 if parent is not None else 0

    def find(self) -> "_Stage":
        s = self
        while s.alias is not None:
            s = s.alias
        return s


def _card_graph(graph, folds: dict):
    """Cards in data-flow order with their predecessor and successor cards (a chip's wires are its card's)."""
    cards = [b for b in graph.blocks if b not in folds]
    preds: dict[str, list[str]] = {c: [] for c in cards}
    succs: dict[str, list[str]] = {c: [] for c in cards}
    for w in graph.wires:
        s, d = folds.get(w.src, w.src), folds.get(w.dst, w.dst)
        if s != d and s not in preds[d]:
            preds[d].append(s)
            succs[s].append(d)
    indeg = {c: len(preds[c]) for c in cards}
    order = [c for c in cards if not indeg[c]]
    for c in order:
        for d in succs[c]:
            indeg[d] -= 1
            if not indeg[d]:
                order.append(d)
    placed = set(order)
    order += [c for c in cards if c not in placed]  # on or after a loop: last, in insertion order
    return order, preds, succs


def _stages(order, preds, keys) -> dict:
    serial = count()
    roots: dict = {}
    children: dict = {}
    stage: dict = {}

    def rank(s):
        return (s.depth, s.serial)

    for c in order:
        k = keys[c]
        ps = [stage[p].find() for p in preds[c] if p in stage]
        if not ps:
            s = roots.get(k)
            if s is None:
                s = roots[k] = _Stage(k, None, next(serial))
            stage[c] = s
            continue
        best = None
        for s in ps:
            if k is None or s.key is None or s.key == k:
                if s.key is None:
                    s.key = k
                cand = s
            else:
                parent = s.parent.find() if s.parent is not None else None
                if parent is not None and parent.key == k and parent in ps:  # a detour back into its stage
                    s.alias = parent
                    cand = parent
                else:
                    cand = children.get((s.serial, k))
                    if cand is None:
                        cand = children[(s.serial, k)] = _Stage(k, s, next(serial))
            if best is None or rank(cand) > rank(best.find()):
                best = cand
        stage[c] = best.find()
    return {c: s.find() for c, s in stage.items()}


def _main_path(order, preds) -> set:
    """The cards of the longest path (in cards) through the network."""
    best: dict[str, int] = {}
    back: dict[str, str | None] = {}
    for c in order:
        ps = [p for p in preds[c] if p in best]
        p = max(ps, key=lambda q: best[q]) if ps else None
        best[c] = best[p] + 1 if p is not None else 1
        back[c] = p
    end = max(best, key=best.get) if best else None
    path = set()
    while end is not None:
        path.add(end)
        end = back[end]
    return path


def _slots(order, preds, stage_of, column, main) -> dict:
    """Place in its column's stack per card: 0 the main line, −1, +1, −2, … above and below; a
    branch keeps the line of the branch card before it when that place is free."""
    taken: dict = {}
    for c in main:
        taken.setdefault((stage_of[c], column[c]), set()).add(0)
    slot: dict[str, int] = {}
    for c in order:
        if c in main:
            slot[c] = 0
            continue
        here = taken.setdefault((stage_of[c], column[c]), set())
        want = next((slot[p] for p in preds[c] if p in slot and stage_of[p] is stage_of[c] and p not in main), None)
        if want is None or want in here:
            want = 0 if 0 not in here else next(s for i in count(1) for s in (-i, i) if s not in here)
        here.add(want)
        slot[c] = want
    return slot


def _cuts(cards: list, preds: dict, column: dict) -> list[int]:
    """Column boundaries (after column i) that at most one wire of the stage crosses: a line breaks
    best there, between units rather than inside one."""
    n = max(column[c] for c in cards) + 1
    diff = [0] * (n + 1)
    inside = set(cards)
    for c in cards:
        for p in preds[c]:
            if p in inside and column[p] < column[c]:
                diff[column[p]] += 1
                diff[column[c]] -= 1
    cuts, crossing = [], 0
    for i in range(n - 1):
        crossing += diff[i]
        if crossing <= 1:
            cuts.append(i)
    return cuts


def _breaks(n: int, k: int, cuts: list[int]) -> list[tuple[int, int]]:
    """Lines ``(first column, end column)`` of a stage of ``n`` columns, at most ``k`` per line,
    each ending at a cut when there is one in its second half."""
    lines, start = [], 0
    while start < n:
        end = start + k
        if end < n:
            j = bisect_right(cuts, end - 1) - 1
            if j >= 0 and cuts[j] + 1 >= start + max(1, (k + 1) // 2):
                end = cuts[j] + 1
        end = min(end, n)
        lines.append((start, end))
        start = end
    return lines


def _extent(columns: tuple[list[int], list[int], list[int]], k: int) -> tuple[float, float, int]:
    """Width and height of a stage whose columns (lists of min and max slot, and its cuts) wrap
    at most every ``k`` columns."""
    lows, highs, cuts = columns
    height, widest = 0.0, 0
    lines = _breaks(len(lows), k, cuts)
    for a, b in lines:
        height += (max(highs[a:b]) - min(lows[a:b])) * STACK + CARD_HEIGHT
        widest = max(widest, b - a)
    return (widest - 1) * COLUMN + CARD_WIDTH, height, len(lines)


def _wrap(stage_columns: list[tuple[list[int], list[int], list[int]]], view) -> int:
    """Columns per line that show the whole layout largest in ``view`` (capped at 100 %: then
    the fewest wraps)."""
    longest = max((len(c[0]) for c in stage_columns), default=1)
    candidates = set(range(1, min(longest, 16) + 1)) | {longest}
    k = 16.0
    while k < longest:
        candidates.add(int(k))
        k *= 1.15
    best, best_score = longest, -1.0
    for k in sorted(candidates, reverse=True):
        fewest = sum(-(-len(c[0]) // k) for c in stage_columns)  # a stage needs at least ⌈n / k⌉ lines
        if view[1] / (fewest * (CARD_HEIGHT + ROW_GAP) - ROW_GAP + 2 * FIT_MARGIN) <= best_score:
            continue  # too tall to beat the best already found
        width = height = 0.0
        lines = 0
        for cols in stage_columns:
            w, h, n = _extent(cols, k)
            width, height, lines = max(width, w), height + h, lines + n
        height += (lines - 1) * ROW_GAP
        score = min(view[0] / (width + 2 * FIT_MARGIN), view[1] / (height + 2 * FIT_MARGIN), 1.0)
        if score > best_score + 1e-9:
            best, best_score = k, score
    return best


def _staged(graph, shapes: dict, folds: dict):
    """Cards in data-flow order, their predecessor cards, the stage of each, and the stages in order."""
    order, preds, _ = _card_graph(graph, folds)
    keys = {c: resolution(shapes.get(c)) for c in order}
    stage_of = _stages(order, preds, keys)
    seen: dict = {}
    for c in order:
        seen.setdefault(stage_of[c], None)
    return order, preds, stage_of, list(seen)


def stage_groups(graph, shapes: dict, folds: dict) -> list[tuple]:
    """``(resolution, card ids in data-flow order)`` per stage, top → bottom (arguments as for
    :func:`stage_layout`); the cards of a stage are where it is wherever the user put them."""
    order, _, stage_of, stages = _staged(graph, shapes, folds)
    members: dict = {s: [] for s in stages}
    for c in order:
        members[stage_of[c]].append(c)
    return [(s.key, cards) for s, cards in members.items()]


def stage_layout(graph, shapes: dict, folds: dict, view=VIEW) -> StageLayout:
    """Positions for every block of ``graph`` (a design or a motif): ``shapes`` maps block id → output
    Shape (or None), ``folds`` chip id → card id (see :mod:`layerloom.core.folding`), ``view`` the
    width and height (pixels at 100 %) the layout should fit best."""
    order, preds, stage_of, stages = _staged(graph, shapes, folds)
    index = {s: i for i, s in enumerate(stages)}
    column: dict[str, int] = {}
    for c in order:
        s = stage_of[c]
        column[c] = max((column[p] + 1 for p in preds[c] if p in column and stage_of[p] is s), default=0)
    slot = _slots(order, preds, stage_of, column, _main_path(order, preds))
    members: list[list[str]] = [[] for _ in stages]
    for c in order:
        members[index[stage_of[c]]].append(c)
    spans = []
    for cards in members:
        n = max(column[c] for c in cards) + 1
        lows, highs = [1 << 30] * n, [-(1 << 30)] * n  # each column gets a card (longest-path columns)
        for c in cards:
            i, s = column[c], slot[c]
            lows[i], highs[i] = min(lows[i], s), max(highs[i], s)
        spans.append((lows, highs, _cuts(cards, preds, column)))
    k = _wrap(spans, view)
    lay = StageLayout(stage_of={c: index[stage_of[c]] for c in order})
    y = 0.0
    for i, (cards, (lows, highs, cuts)) in enumerate(zip(members, spans)):
        lines = _breaks(len(lows), k, cuts)
        line_of = [0] * len(lows)
        for j, (a, b) in enumerate(lines):
            line_of[a:b] = [j] * (b - a)
        by_line: dict[int, list[str]] = {}
        for c in cards:
            by_line.setdefault(line_of[column[c]], []).append(c)
        for j, (start, end) in enumerate(lines):
            top = min(lows[start:end])
            line = sorted(by_line[j], key=lambda c: (column[c], slot[c]))
            for c in line:
                lay.positions[c] = ((column[c] - start) * COLUMN, y + (slot[c] - top) * STACK)
            height = (max(highs[start:end]) - top) * STACK + CARD_HEIGHT
            right = (end - start - 1) * COLUMN + CARD_WIDTH
            lay.rows.append(Row(i, stages[i].key, tuple(line), (0.0, y, right, y + height)))
            y += height + ROW_GAP
    for chip, card in folds.items():
        if card in lay.positions:
            lay.positions[chip] = lay.positions[card]
    return lay
