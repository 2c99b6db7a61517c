"""Execution order of a graph, and its input wires in port order: worked out once per change of wiring.

Blocks run in depth order: by **level** (the longest path from a block without input wires), and
within a level by a **rank** that depends only on the wiring, never on the order blocks were
added, on their names or on how they are grouped into motifs:

- blocks from which an Output is reached come first, in the order a depth-first walk back from
  the Outputs (in output-port order) finishes them, visiting each block's inputs in input-port
  order: so of two blocks of one level, the one feeding the earlier input of the join where their
  paths meet runs first, as a hand-written forward pass would run them;
- then blocks that reach no Output, ordered by where their sources run (in input-port order),
  then by kind, then by what they feed;
- blocks on a loop of wires, or after one, run last (they have no shapes).

Several wires on one input port (an error) are walked in the order of their sources' rank by
their upstream wiring (level, kind, Input number, the wires into them). Blocks alike in all the
wiring shows are put in the order of their ids, which the file keeps: so the order never depends
on the order of blocks or wires in a file.

Ports are the one thing whose order is part of the design: a design's (or motif's) Output blocks
are its output ports in the order they were added (:mod:`layerloom.core.kinds.ends`).

So a design drawn flat, the same design with blocks grouped into motifs (whose uses are opened
up into the blocks they run, :mod:`layerloom.core.schedule`) and that design with its motifs
expanded run their blocks in the same order, and the figures that depend on the order (live
memory along depth, its peak) are the same.
"""
from __future__ import annotations


class Wiring:
    """A graph's blocks by index (insertion order) and their execution order.

    ``ids``, ``kinds``, ``levels``: each block's id, kind and level; ``feeds[k]``: block ``k``'s
    input wires in input-port order (several on one port: see above) and ``srcs[k]`` the indices
    of their sources; ``steps``: the indices in execution order, ``order`` their ids; ``stuck``: the ids of
    blocks on a loop or after one; ``unreached``: the ids of blocks from which no Output is reached.
    """

    __slots__ = ("ids", "kinds", "levels", "feeds", "srcs", "steps", "order", "stuck", "unreached", "_position",
                 "_level")

    def __init__(self, ids, kinds, levels, feeds, srcs, steps, stuck, unreached):
        self.ids, self.kinds, self.levels, self.feeds, self.srcs = ids, kinds, levels, feeds, srcs
        self.steps, self.order, self.stuck = steps, [ids[k] for k in steps], [ids[k] for k in stuck]
        self.unreached = [ids[k] for k in unreached]
        self._position = self._level = None

    @property
    def position(self) -> dict:
        """Block id → its step in the execution order."""
        if self._position is None:
            self._position = {b: i for i, b in enumerate(self.order)}
        return self._position

    @property
    def level(self) -> dict:
        """Block id → its level."""
        if self._level is None:
            self._level = dict(zip(self.ids, self.levels))
        return self._level

    def of_kind(self, kind: str) -> list:
        """Ids of the blocks of ``kind``, in insertion order."""
        return [b for b, k in zip(self.ids, self.kinds) if k == kind]

    def in_order(self):
        """(id, input wires) of each block, in execution order."""
        ids, feeds = self.ids, self.feeds
        return [(ids[k], feeds[k]) for k in self.steps]


def wire_up(blocks, in_wires, outputs: list | None = None) -> Wiring:
    """The :class:`Wiring` of a graph: ``blocks`` maps ids (in insertion order) to objects with a
    ``kind``, ``in_wires`` ids to their input wires; ``outputs`` lists its output ports (by default
    its Output blocks in insertion order, which numbers them)."""
    ids = list(blocks)
    index = dict(zip(ids, range(len(ids))))
    kinds = [blk.kind for blk in blocks.values()]
    feeds = [in_wires[b] for b in ids]
    srcs: list[tuple] = []
    levels: list[int] = []
    add_srcs, add_level, single = srcs.append, levels.append, _singles(len(ids))
    ordered = True  # every block after its sources in insertion order: levels in the same walk
    crowded: list[int] = []  # blocks with several wires on one input port
    for k, ws in enumerate(feeds):
        if len(ws) == 1:  # the usual block
            s = index[ws[0].src]
            add_srcs(single[s])
            if s < k:
                add_level(levels[s] + 1)
                continue
            ordered = False
            add_level(0)
            continue
        if not ws:
            add_srcs(())
            add_level(0)
            continue
        if not _one_per_port(ws):  # by port; several wires on one port (an error): ranked below
            ws = feeds[k] = sorted(ws, key=lambda w: (w.dst_port, w.src_port))
            if any(a.dst_port == b.dst_port for a, b in zip(ws, ws[1:])):
                crowded.append(k)
        ss = tuple([index[w.src] for w in ws])
        add_srcs(ss)
        m = 0
        for s in ss:
            if s >= k:
                ordered = False
                break
            if levels[s] >= m:
                m = levels[s] + 1
        add_level(m)
    stuck: list[int] = []
    if not ordered:
        levels, stuck = _levels(srcs)
    if crowded:
        _rank_crowded(crowded, ids, kinds, levels, set(stuck), feeds, srcs)
    roots = [k for k, kind in enumerate(kinds) if kind == "Output"] if outputs is None else [index[b] for b in outputs]
    post = _finish_order(srcs, roots)
    steps = sorted(post, key=levels.__getitem__)  # a stable sort: by rank within a level
    unreached: list[int] = []
    if len(steps) < len(ids):
        reached = set(post)
        unreached = [k for k in range(len(ids)) if k not in reached]
        steps = _with_unreached(steps, unreached, srcs, levels, kinds, feeds, ids)
    return Wiring(ids, kinds, levels, feeds, srcs, steps, stuck, unreached)


_SINGLES: list[tuple[int]] = []


def _singles(n: int) -> list[tuple[int]]:
    """``(k,)`` for every index k below ``n``: one-source tuples shared by every wiring, so a full
    pass keeps no new object per block for them (fewer cycle collections along the pass)."""
    if len(_SINGLES) < n:
        _SINGLES.extend((k,) for k in range(len(_SINGLES), n))
    return _SINGLES


def _one_per_port(ws: list) -> bool:
    """Whether ``ws`` are already in input-port order, one wire per port."""
    port = -1
    for w in ws:
        if w.dst_port <= port:
            return False
        port = w.dst_port
    return True


def _rank_crowded(crowded: list[int], ids: list, kinds: list, levels: list, stuck: set, feeds: list,
                  srcs: list) -> None:
    """Puts the input wires of each ``crowded`` block (several wires on one port, an error) in port
    order, and those on one port by their sources' ranks: level by level, the blocks upstream are
    ranked by kind, Input port number and their own wires (ports and sources' ranks), so by the
    wiring alone; sources alike in all of that by id (kept in the file, never renamed)."""
    cone: set[int] = set()
    stack = [s for k in crowded for s in srcs[k]]
    while stack:
        v = stack.pop()
        if v not in cone:
            cone.add(v)
            stack.extend(srcs[v])
    inputs = {k: n for n, k in enumerate(k for k, kind in enumerate(kinds) if kind == "Input")}
    by_level: dict[int, list[int]] = {}
    for v in cone:
        by_level.setdefault(levels[v], []).append(v)
    rank: dict[int, int] = {}
    for lv in sorted(by_level):
        keys = {v: (kinds[v], inputs.get(v, -1), () if v in stuck else  # a loop: its kind alone
                    tuple(sorted((w.dst_port, w.src_port, rank[s]) for s, w in zip(srcs[v], feeds[v]))))
                for v in by_level[lv]}
        place = {key: len(rank) + i for i, key in enumerate(sorted(set(keys.values())))}
        for v, key in keys.items():
            rank[v] = place[key]
    for k in crowded:
        pairs = sorted(zip(feeds[k], srcs[k]), key=lambda p: (p[0].dst_port, p[0].src_port, rank[p[1]], ids[p[1]]))
        feeds[k] = [w for w, _ in pairs]
        srcs[k] = tuple([s for _, s in pairs])


def _levels(srcs: list) -> tuple[list[int], list[int]]:
    """Each block's longest-path level from the blocks without input wires (Kahn's algorithm), and
    the blocks on a loop or after one (given one past the deepest level)."""
    n = len(srcs)
    succ: list[list[int]] = [[] for _ in range(n)]
    indeg = [len(ss) for ss in srcs]
    for i, ss in enumerate(srcs):
        for s in ss:
            succ[s].append(i)
    level = [0] * n
    queue = [i for i in range(n) if not indeg[i]]
    for i in queue:
        nxt = level[i] + 1
        for d in succ[i]:
            if level[d] < nxt:
                level[d] = nxt
            indeg[d] -= 1
            if not indeg[d]:
                queue.append(d)
    stuck = [i for i in range(n) if indeg[i]]
    top = max(level, default=-1) + 1
    for i in stuck:
        level[i] = top
    return level, stuck


def _finish_order(srcs: list, roots: list[int]) -> list[int]:
    """Blocks reached walking back from ``roots`` (depth first, inputs in port order), in the order
    the walk finishes them."""
    seen = bytearray(len(srcs))
    post: list[int] = []
    finish = post.append
    stack = roots[::-1]
    pop, push, extend = stack.pop, stack.append, stack.extend
    while stack:
        v = pop()
        if v < 0:
            finish(~v)
        elif not seen[v]:
            seen[v] = 1
            push(~v)
            ss = srcs[v]
            while len(ss) == 1:  # down a chain of one-input blocks without going round the loop
                v = ss[0]
                if seen[v]:
                    break
                seen[v] = 1
                push(~v)
                ss = srcs[v]
            else:
                extend(ss[::-1])
    return post


def _with_unreached(reached: list[int], unreached: list[int], srcs: list, levels: list, kinds: list,
                    feeds: list, ids: list) -> list[int]:
    """``reached`` (in order) with the ``unreached`` blocks (that reach no Output) put after those of
    their level, by their sources' places, kind, then what they feed (ports and kinds); blocks alike
    in all of that by id (kept in the file, never renamed)."""
    n = len(srcs)
    rest: dict[int, list[int]] = {}
    fed: dict[int, list[tuple]] = {}  # what each unreached block feeds (only unreached blocks)
    for i in unreached:
        rest.setdefault(levels[i], []).append(i)
        for s, w in zip(srcs[i], feeds[i]):
            fed.setdefault(s, []).append((w.src_port, w.dst_port, kinds[i]))
    step = [n] * n  # not placed yet
    order: list[int] = []
    k = 0
    for lv in sorted(set(rest) | {levels[i] for i in reached}):
        while k < len(reached) and levels[reached[k]] == lv:
            step[reached[k]] = len(order)
            order.append(reached[k])
            k += 1
        group = rest.get(lv, [])
        group.sort(key=lambda i: (tuple((step[s], w.src_port, w.dst_port) for s, w in zip(srcs[i], feeds[i])),
                                  kinds[i], sorted(fed.get(i, ())), ids[i]))
        for i in group:
            step[i] = len(order)
            order.append(i)
    return order
