"""Execution order of a graph, and its input wires in port order: worked out once per change of wiring.

Blocks run in depth order: by **level** (the longest path from a block without input wires), and
within a level by a **rank** that depends only on the wiring, never on the order blocks were
added, on their names or on how they are grouped into motifs:

- blocks from which an Output is reached come first, in the order a depth-first walk back from
  the Outputs (in output-port order) finishes them, visiting each block's inputs in input-port
  order: so of two blocks of one level, the one feeding the earlier input of the join where their
  paths meet runs first, as a hand-written forward pass would run them;
- then blocks that reach no Output, ordered by where their sources run (in input-port order),
  then by kind; blocks alike in all of these (same kind, same sources, feeding no output) keep
  the order they were added;
- blocks on a loop of wires, or after one, run last (they have no shapes).

Ports are the one thing whose order is part of the design: a design's (or motif's) Output blocks
are its output ports in the order they were added (:mod:`layerloom.core.kinds.ends`).

So a design drawn flat, the same design with blocks grouped into motifs (whose uses are opened
up into the blocks they run, :mod:`layerloom.core.schedule`) and that design with its motifs
expanded run their blocks in the same order, and the figures that depend on the order (live
memory along depth, its peak) are the same.
"""
from __future__ import annotations


class Wiring:
    """A graph's execution order, with each step's input wires and their sources' steps.

    ``wires[i]`` are the input wires of step ``i`` by (input port, output port, source block's
    insertion), and
    ``sources[i]`` the steps of their sources; ``stuck`` the blocks on a loop or after one.
    """

    __slots__ = ("order", "position", "level", "wires", "sources", "stuck")

    def __init__(self, order: list, position: dict, level: dict, wires: list, sources: list, stuck: list):
        self.order, self.position, self.level = order, position, level
        self.wires, self.sources, self.stuck = wires, sources, stuck


def wire_up(blocks, in_wires, outputs) -> Wiring:
    """The :class:`Wiring` of a graph: ``blocks`` maps ids (in insertion order) to objects with a
    ``kind``, ``in_wires`` ids to their input wires, ``outputs`` lists the Output ids in port order."""
    ids = list(blocks)
    n = len(ids)
    index = {b: i for i, b in enumerate(ids)}
    feeds, srcs = [], []
    for b in ids:
        ws = in_wires[b]
        if len(ws) > 1:  # several wires on one port (an error): by their sources' insertion, not as drawn
            ws = sorted(ws, key=lambda w: (w.dst_port, w.src_port, index[w.src]))
        feeds.append(ws)
        srcs.append([index[w.src] for w in ws])
    level, stuck = _levels(srcs)
    post = _finish_order(srcs, [index[b] for b in outputs])
    order = sorted(post, key=level.__getitem__)  # a stable sort: by rank within a level
    if len(order) < n:
        order = _with_unreached(order, srcs, level, blocks, ids, feeds)
    position = {ids[i]: p for p, i in enumerate(order)}
    step = [0] * n
    for p, i in enumerate(order):
        step[i] = p
    return Wiring([ids[i] for i in order], position, {ids[i]: level[i] for i in range(n)}, [feeds[i] for i in order],
                  [[step[s] for s in srcs[i]] for i in order], [ids[i] for i in stuck])


def _levels(srcs: list) -> tuple[list[int], list[int]]:
    """Each block's longest-path level from the blocks without input wires, and the blocks on a
    loop or after one (given one past the deepest level). One walk when every block comes after its
    sources in insertion order (the usual case), else Kahn's algorithm."""
    n = len(srcs)
    level = [0] * n
    for i, ss in enumerate(srcs):
        m = 0
        for s in ss:
            if s >= i:
                break
            if level[s] >= m:
                m = level[s] + 1
        else:
            level[i] = m
            continue
        break
    else:
        return level, []
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
    post = []
    stack = roots[::-1]
    pop, push, extend = stack.pop, stack.append, stack.extend
    while stack:
        v = pop()
        if v < 0:
            post.append(~v)
        elif not seen[v]:
            seen[v] = 1
            push(~v)
            ss = srcs[v]
            if ss:
                extend(ss[::-1])
    return post


def _with_unreached(reached: list[int], srcs: list, level: list, blocks, ids: list, feeds: list) -> list[int]:
    """``reached`` (in order) with the blocks that reach no Output put after those of their level,
    by their sources' places and then kind."""
    n = len(srcs)
    seen = set(reached)
    rest: dict[int, list[int]] = {}
    for i in range(n):
        if i not in seen:
            rest.setdefault(level[i], []).append(i)
    step = [n] * n  # not placed yet
    order: list[int] = []
    k = 0
    for lv in sorted(set(rest) | {level[i] for i in reached}):
        while k < len(reached) and level[reached[k]] == lv:
            step[reached[k]] = len(order)
            order.append(reached[k])
            k += 1
        group = rest.get(lv, [])
        group.sort(key=lambda i: (tuple((step[s], w.src_port, w.dst_port) for s, w in zip(srcs[i], feeds[i])),
                                  blocks[ids[i]].kind))
        for i in group:
            step[i] = len(order)
            order.append(i)
    return order
