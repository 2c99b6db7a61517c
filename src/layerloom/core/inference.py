"""Shape inference: every port's shape, each block's cost and receptive field, and the findings.

Reads like an interpreter: blocks in execution order (longest-path level, then a rank that
depends only on the wiring: :mod:`layerloom.core.wiring`), one step per block, an environment of
:class:`Result` keyed by block id. Problems the user can fix are
:class:`~layerloom.core.findings.Finding` data, never exceptions. After an edit only the changed
blocks and what lies downstream of them are computed again, and propagation stops where a
block's outputs come out unchanged. Kind rules are pure functions of (settings, input
shapes), so their answers for finding-free blocks are remembered and reused.

Receptive field and effective stride (jump) are in input pixels per axis: a window of extent k and
stride s gives rf' = rf + (k − 1)·jump and jump' = jump·s. Where branches join, the receptive
field is the larger and the jump the smaller (a broadcast gate does not coarsen the map).
Transposed convolution and upsampling divide the jump (a first-order convention). Both are
floats, which saturate to infinity in designs far beyond any real network instead of growing into
integers of millions of digits; shapes and costs stay exact integers.

Limits that keep every count printable: a block whose output holds more than :data:`MAX_ELEMENTS`
elements per sample stops with ``shape.too_large``, and motifs nest at most :data:`MAX_NESTING`
deep (``motif.too_deep``).
"""
from __future__ import annotations

import heapq
from math import prod
from typing import NamedTuple

from layerloom.core.findings import ERROR, WARNING, Finding, Report, Stop, sort_findings
from layerloom.core.kinds import KINDS, Cost
from layerloom.core.liveness import Plan, live_profile
from layerloom.core.schedule import opened_profile
from layerloom.core.settings import SettingError
from layerloom.core.shapes import Shape
from layerloom.core.values import quote
from layerloom.core.wiring import Wiring, wire_up

ONE = (1.0, 1.0)
MAX_ELEMENTS = 1 << 64
"""Most elements per sample a block's output may hold (far beyond any memory)."""
MAX_NESTING = 64
"""Deepest nesting of motifs inside motifs."""
_new = tuple.__new__  # builds a Result without NamedTuple's keyword handling (the hot path)
MEMO_LIMIT = 100_000


class Result(NamedTuple):
    """What inference knows of one block (costs are per sample; a motif's include its repeats)."""

    ins: tuple[Shape, ...]
    outs: tuple[Shape, ...]  # one per output port; an Output block repeats its input here
    cost: Cost
    rf: tuple[float, float]
    jump: tuple[float, float]
    extra: int = 0  # transient elements inside a motif instance beyond its inputs and outputs
    extra_freed: int = 0  # the same when the instance is the last reader of its inputs (may be < 0)
    executed: "Executed | None" = None  # a motif instance: its blocks as executed
    fields: tuple | None = None  # a motif instance: (rf, jump) of each output port (rf and jump: their join)


class Executed(NamedTuple):
    """The blocks a motif use runs, as executed: inner ports left out, nested uses opened, repeats
    counted. The ledger takes a use's latency, bytes moved and output memory from here, so they are
    the sums over these blocks, as if the use were expanded (per sample, elements)."""

    steps: int  # blocks executed
    elements: int  # activation elements they read and write (their inputs plus outputs)
    allocated: int  # elements of the tensors they allocate (views allocate none)
    work: tuple  # ((weights, MACs, elements), count) for the blocks that compute, for the roofline
    run: tuple = ()  # the motif run's key, to fetch one copy's inner inference (Analysis.motif_run)
    repeat: int = 1  # copies run in series

    def times(self, n: int) -> "Executed":
        return Executed(self.steps * n, self.elements * n, self.allocated * n,
                        tuple((sig, count * n) for sig, count in self.work), self.run, self.repeat * n)


class MotifRun(NamedTuple):
    """One motif inferred for given input shapes and parameter values."""

    outs: tuple  # per output port: Shape or None
    cost: Cost
    fields: tuple  # (rf, jump) per output port: from inputs with rf 1 and jump 1, or the run's ``given``
    extra: int  # inner peak beyond outputs, inputs kept alive by the caller
    extra_freed: int  # inner peak beyond inputs and outputs, inputs freed inside after their last use
    findings: tuple[Finding, ...]
    executed: Executed
    inner: GraphInference  # the motif's blocks inferred for this run


def _widen(rf: float, extent: float, jump: float) -> float:
    """Receptive field after a window of ``extent`` (an extent of 1 adds nothing, even at an
    infinite jump)."""
    return rf if extent == 1 else rf + (extent - 1) * jump


def _through(window: tuple, rf: tuple, jump: tuple) -> tuple:
    """(rf, jump) after a window (kh, kw, sh, sw); a window of 1 or a stride of 1 keeps the tuple
    it is given (fewer objects kept per block)."""
    kh, kw, sh, sw = window
    if kh != 1 or kw != 1:
        rf = (_widen(rf[0], kh, jump[0]), _widen(rf[1], kw, jump[1]))
    if sh != 1 or sw != 1:
        jump = (jump[0] * sh, jump[1] * sw)
    return rf, jump


def _short(shape: Shape) -> str:
    """A shape for a message, sizes beyond 10⁹ in powers of ten."""
    return "×".join(str(d) if d < 10 ** 9 else f"{d:.3g}" for d in shape)


def _add_costs(costs) -> Cost:
    w = b = m = o = 0
    for c in costs:
        w += c[0]
        b += c[1]
        m += c[2]
        o += c[3]
    return Cost(w, b, m, o)


class GraphInference:
    """Inference of one graph: the design, or a motif fed the shapes of one instance's inputs."""

    def __init__(self, graph, analysis: "Analysis", ports: tuple | None = None, params: dict | None = None,
                 stack: tuple[str, ...] = (), given: tuple | None = None):
        self.graph, self.analysis, self.ports, self.params, self.stack = graph, analysis, ports, params, stack
        self.given = given  # (rf, jump) of each input port when not rf 1 and jump 1
        self.order: list[str] = []
        self.results: dict[str, Result | None] = {}
        self.findings: dict[str, list[Finding]] = {}
        self.graph_findings: list[Finding] = []
        self.port_index: dict[str, int] = {}
        self.stuck: set[str] = set()  # blocks on a loop or after one: no results
        self.wiring: Wiring | None = None
        self.plan: Plan | None = None  # liveness plan of this order (wiring only), made on demand
        self.memo = analysis.memo if analysis is not None else {}

    # ----- passes
    def run(self) -> None:
        """Infer every block. The usual block (its wires one to each port, from blocks with one
        output, other than an Output, and its kind's answer known for these settings and inputs)
        is settled here; every other block goes through :meth:`_infer`."""
        self.reorder()
        results = self.results
        results.clear()
        self.findings.clear()
        wiring = self.wiring
        ids, feeds, kinds, srcs = wiring.ids, wiring.feeds, wiring.kinds, wiring.srcs
        blocks, memo, stuck, infer, get = self.graph.blocks, self.memo, self.stuck, self._infer, results.get
        plain = self.params is None  # settings hold no motif parameters
        for k in wiring.steps:
            bid, wires = ids[k], feeds[k]
            ins = None
            if plain and wires and bid not in stuck:
                if len(wires) == 1:
                    w = wires[0]
                    r = get(w.src)
                    if (r is not None and len(r.outs) == 1 and not w.dst_port and not w.src_port
                            and r.fields is None and kinds[srcs[k][0]] != "Output"):
                        ins, rf, jump = r.outs, r.rf, r.jump
                else:
                    ins, rf, jump = _plain_join(results, wires, kinds, srcs[k])
            if ins is not None:
                blk = blocks[bid]
                known = memo.get((blk.kind, tuple(blk.settings.values()), ins))
                if known is not None:  # kept only for finding-free blocks with as many inputs as ports
                    outs, cost, window = known
                    if window is not None:
                        rf, jump = _through(window, rf, jump)
                    results[bid] = _new(Result, (ins, outs, cost, rf, jump, 0, 0, None, None))
                    continue
            infer(bid, wires)

    def update(self, dirty: set[str], topology: bool) -> None:
        """Infer again the ``dirty`` blocks and whatever downstream changes because of them."""
        if topology:
            before = self.stuck
            self.reorder()
            dirty = set(dirty) | (before ^ self.stuck)  # blocks that joined or left a loop
        position, out_wires, wiring = self.position, self.graph.out_wires, self.wiring
        steps, feeds = wiring.steps, wiring.feeds
        heap = [(position[b], b) for b in dirty if b in position]
        heapq.heapify(heap)
        done = set()
        while heap:
            p, bid = heapq.heappop(heap)
            if bid in done:
                continue
            done.add(bid)
            if self._infer(bid, feeds[steps[p]]):
                for w in out_wires[bid]:
                    if w.dst not in done:
                        heapq.heappush(heap, (position[w.dst], w.dst))

    @property
    def position(self) -> dict[str, int]:
        """Block id → its step in :attr:`order`."""
        return self.wiring.position

    @property
    def level(self) -> dict[str, int]:
        """Block id → its level (longest path from a block without input wires)."""
        return self.wiring.level

    # ----- order, cycles, dead ends
    def reorder(self) -> None:
        """Execution order and levels (:mod:`layerloom.core.wiring`), loops named, and the
        graph-level findings (loops, dead ends)."""
        g = self.graph
        blocks = g.blocks
        wiring = self.wiring = wire_up(blocks, g.in_wires)
        stuck = wiring.stuck
        self.stuck = set(stuck)
        found: list[Finding] = self._cycles(stuck) if stuck else []
        self.order = wiring.order
        self.plan = None
        for gone in self.results.keys() - blocks.keys():
            del self.results[gone]
            self.findings.pop(gone, None)
        self.port_index = {b: i for i, b in enumerate(wiring.of_kind("Input"))}
        found += self._dead_ends()
        self.graph_findings = found

    def _cycles(self, stuck: list[str]) -> list[Finding]:
        """Name a loop through every block that is on one (each group of blocks that reach one
        another is a loop; a walk through each member is named, in linear time)."""
        g = self.graph
        members = set(stuck)
        rank = {b: i for i, b in enumerate(stuck)}  # wires in block order, not in the order they were drawn
        succ = {b: sorted({w.dst for w in g.out_wires[b] if w.dst in members}, key=rank.__getitem__) for b in stuck}
        pred = {b: sorted({w.src for w in g.in_wires[b] if w.src in members}, key=rank.__getitem__) for b in stuck}
        found = []
        for group in _strong_groups(stuck, succ):
            root = group[0]
            inside = set(group)
            if len(group) == 1 and root not in succ[root]:
                continue  # after a loop, not on one
            ahead = _paths(root, succ, inside)  # root → b
            back = _paths(root, pred, inside)  # b → root, read backwards
            for b in group:
                if b == root:
                    p = next(x for x in pred[root] if x in inside)
                    walk = _walk(ahead, p) + [root]
                else:
                    walk = list(reversed(_walk(back, b))) + _walk(ahead, b)[1:]
                names = " → ".join(g.blocks[x].name for x in walk)
                found.append(Finding("graph.cycle", ERROR, b, f"{g.blocks[b].name} is on a loop of wires: {names}"))
        return found

    def _dead_ends(self) -> list[Finding]:
        g = self.graph
        kinds = self.wiring.kinds
        if "Output" not in kinds:
            if not g.blocks:
                return []
            return [Finding("graph.no_output", WARNING, "", "there is no Output block, so nothing is produced")]
        out_wires, blocks = g.out_wires, g.blocks  # a block that reaches an Output is no dead end
        return [Finding("graph.dead_end", WARNING, b, f"nothing after {blocks[b].name} reaches an Output")
                for b in self.wiring.unreached if not out_wires[b]]

    # ----- one step
    def _store(self, bid: str, result: Result | None, found: list | None) -> bool:
        """Keep ``bid``'s result and findings; True when its outputs or receptive field changed."""
        results = self.results
        old = results.get(bid)
        results[bid] = result
        if found:
            self.findings[bid] = found
        elif bid in self.findings:
            del self.findings[bid]
        if old is None or result is None:
            return old is not result
        return old.outs != result.outs or old.rf != result.rf or old.jump != result.jump or old.fields != result.fields

    def _infer(self, bid: str, wires) -> bool:
        """Infer one block from its input ``wires`` (in port order): every rule applied and every
        fault named. Returns True when its outputs or receptive field changed."""
        blk = self.graph.blocks[bid]
        results = self.results
        if bid in self.stuck:
            return self._on_loop(blk, wires, results.get(bid))
        kind_name = blk.kind
        found: list[Finding] = []
        result = None
        try:
            s = blk.settings if self.params is None else self.resolved_settings(blk)
            if kind_name == "Motif":
                kind, motif = None, self._motif(blk)
                n_in = len(motif.ports()[0])
            else:
                kind, motif = KINDS[kind_name], None
                n_in = kind.input_count(s)
            if n_in == 1 and len(wires) == 1 and wires[0].dst_port == 0:  # the usual case
                w = wires[0]
                r = results.get(w.src)
                port = w.src_port
                if r is not None and port < len(r.outs) and self.graph.blocks[w.src].kind != "Output":
                    outs = r.outs  # one output: its tuple serves as the inputs (nothing new kept per block)
                    ins, (rf, jump), given = outs if len(outs) == 1 else (outs[port],), _field(r, port), None
                else:
                    ins = None
                    if r is not None:
                        found.append(self._no_such_output(blk, w, r))
            else:
                ins, rf, jump, given = self._gather(blk, n_in, wires, found)
            if kind_name == "Input":
                result = self._input(blk, s)
            elif ins is None:
                pass
            elif motif is not None:
                result = self._use(blk, s, motif, ins, rf, jump, given, found)
            elif kind_name == "Output":
                result = Result(ins, ins, Cost(), rf, jump)
            else:
                key = (kind_name, tuple(s.values()), ins)
                known = self.memo.get(key)
                if known is None:
                    known = self._rule(blk, kind, s, ins, found)
                    if not found and len(self.memo) < MEMO_LIMIT:
                        self.memo[key] = known
                outs, cost, window = known
                if window is not None:
                    rf, jump = _through(window, rf, jump)
                result = _new(Result, (ins, outs, cost, rf, jump, 0, 0, None, None))
        except Stop as e:
            found.append(Finding(e.code, ERROR, bid, e.message, e.port, e.numbers))
        return self._store(bid, result, found)

    @staticmethod
    def _rule(blk, kind, s, ins, found) -> tuple:
        """(outputs, cost, window) by ``kind``'s rules; their findings added to ``found``."""
        report = Report(blk.id, blk.name)
        out = kind.shape(s, ins, report)
        if out.elements > MAX_ELEMENTS:
            raise Stop("shape.too_large", f"{blk.name} would output {_short(out)} = {out.elements:.3g} elements "
                       f"per sample, beyond the {MAX_ELEMENTS:.3g} Layerloom counts")
        found += report.found
        return (out,), kind.cost(s, ins, out), kind.window(s, ins)

    def _on_loop(self, blk, wires, old) -> bool:
        """A block on a loop: no shapes, but its wiring faults are still named."""
        bid = blk.id
        self.results[bid] = None
        found: list[Finding] = []
        try:
            s = self.resolved_settings(blk) if self.params is not None else blk.settings
            n_in = len(self._motif(blk).ports()[0]) if blk.kind == "Motif" else KINDS[blk.kind].input_count(s)
            self._gather_with_faults(blk, n_in, wires, found)
        except Stop:
            pass
        if found:
            self.findings[bid] = found
        else:
            self.findings.pop(bid, None)
        return old is not None

    def _gather(self, blk, n_in, wires, found):
        """Input shapes, receptive field, jump and each input's (rf, jump) of a block with several
        ports (or odd wiring); Nones if any input is unknown."""
        results, blocks = self.results, self.graph.blocks
        if len(wires) == n_in:  # one wire on each port, from a known output: the usual join
            ins, given = [], []
            for port, w in enumerate(wires):
                r = results.get(w.src)
                if w.dst_port != port or r is None or w.src_port >= len(r.outs) or blocks[w.src].kind == "Output":
                    break
                ins.append(r.outs[w.src_port])
                given.append(_field(r, w.src_port))
            else:
                return _joined(ins, given)
        return self._gather_with_faults(blk, n_in, wires, found)

    def _gather_with_faults(self, blk, n_in, wires, found):
        """:meth:`_gather` naming what is wrong with the wiring (in ``found``)."""
        by_port: list[list] = [[] for _ in range(n_in)]
        for w in wires:
            if w.dst_port < n_in:
                by_port[w.dst_port].append(w)
            else:
                found.append(Finding("port.missing", ERROR, blk.id, f"{blk.name} has {n_in} input"
                                     f"{'s' if n_in != 1 else ''} but a wire goes to input {w.dst_port + 1}",
                                     w.dst_port, (w.dst_port + 1, n_in)))
        ins, known, given = [], True, []
        for port, ws in enumerate(by_port):
            if not ws:
                found.append(Finding("port.unwired", ERROR, blk.id,
                                     f"input {port + 1} of {blk.name} has no wire" if n_in > 1
                                     else f"{blk.name} has no input wire", port))
                known = False
            elif len(ws) > 1:
                names = ", ".join(sorted(self.graph.blocks[w.src].name for w in ws))
                found.append(Finding("port.multiple", ERROR, blk.id, f"input {port + 1} of {blk.name} has "
                                     f"{len(ws)} wires (from {names}); join them with an Add or Concat", port,
                                     (len(ws), 1)))
                known = False
            else:
                w = ws[0]
                r = self.results.get(w.src) if w.src not in self.stuck else None  # on a loop: none (even stale)
                if r is None or w.src_port >= len(r.outs) or self.graph.blocks[w.src].kind == "Output":
                    known = False
                    if r is not None:
                        found.append(self._no_such_output(blk, w, r))
                    continue
                ins.append(r.outs[w.src_port])
                given.append(_field(r, w.src_port))
        return _joined(ins, given) if known else (None, None, None, None)

    def _no_such_output(self, blk, w, r) -> Finding:
        src = self.graph.blocks[w.src]
        n = 0 if src.kind == "Output" else len(r.outs)
        return Finding("port.missing", ERROR, blk.id, f"{blk.name} is wired from output {w.src_port + 1} of "
                       f"{src.name}, which has {n} output{'s' if n != 1 else ''}", w.dst_port, (w.src_port + 1, n))

    def _input(self, blk, s) -> Result | None:
        if self.ports is None:
            shape = Shape.chw(s["channels"], s["height"], s["width"])
        else:
            k = self.port_index[blk.id]
            if k >= len(self.ports) or self.ports[k] is None:
                return None
            shape = self.ports[k]
        rf, jump = self.given[k] if self.given is not None else (ONE, ONE)
        return Result((), (shape,), Cost(), rf, jump)

    def resolved_settings(self, blk) -> dict:
        """``blk``'s settings with motif parameter references replaced by this run's values."""
        s = blk.settings
        if not any(type(v) is dict for v in s.values()):
            return s
        params = self.params
        resolved = {k: params[v["param"]] if type(v) is dict else v for k, v in s.items()}
        try:
            return KINDS[blk.kind].check_settings(resolved)
        except SettingError as e:
            raise Stop("motif.param", f"{blk.name}: {e}") from None

    # ----- motifs
    def _motif(self, blk):
        name = blk.settings["motif"]
        motif = self.analysis.design.motifs.get(name)
        if motif is None:
            raise Stop("motif.missing", f"{blk.name} uses motif {quote(name)}, which this design does not define")
        if name in self.stack:
            raise Stop("motif.recursive", f"motif {quote(name)} contains itself (through {' › '.join(self.stack)})")
        if len(self.stack) >= MAX_NESTING:
            raise Stop("motif.too_deep", f"{blk.name} uses motif {quote(name)} {len(self.stack) + 1} motifs deep; "
                       f"motifs nest at most {MAX_NESTING} deep", numbers=(len(self.stack) + 1, MAX_NESTING))
        return motif

    def _use(self, blk, s, motif, ins, rf, jump, given, found) -> Result | None:
        """One use of ``motif``. With one input the run is made from rf 1 and jump 1 (and shared by
        uses at any depth) and its fields are composed with the input's, copy after copy; with
        several inputs the run is given each input's (rf, jump), so branches keep their own."""
        params = {**motif.params, **{k: v for k, v in s.items() if k not in ("motif", "repeat")}}
        unknown = params.keys() - motif.params.keys()
        if unknown:
            raise Stop("motif.param", f"{blk.name} sets {', '.join(sorted(unknown))}, which motif {quote(motif.name)} "
                       f"does not have (it has: {', '.join(motif.params) or 'no parameters'})")
        given = given if len(ins) > 1 else None
        run = self.analysis.motif_run(motif, ins, params, self.stack, given)
        found += [f.inside(blk.id, blk.name) for f in run.findings]
        if any(o is None for o in run.outs):
            return None  # an error inside was reported; whether copies stack is unknown
        repeat = s["repeat"]
        if repeat > 1 and (len(ins) != 1 or len(run.outs) != 1 or run.outs[0] != ins[0]):
            came = ins[0] if len(ins) == 1 else f"{len(ins)} inputs"
            shown = run.outs[0] if len(run.outs) == 1 else f"{len(run.outs)} outputs"
            raise Stop("motif.repeat_shape", f"{blk.name} repeats motif {quote(motif.name)} ×{repeat}, but one use turns "
                       f"{came} into {shown}, so the copies cannot be stacked; use repeat 1 for the shape-changing use",
                       numbers=(str(shown), str(came)))
        fields = run.fields
        if given is None:
            for _ in range(repeat):  # each copy's fields composed onto what reaches it
                fields = tuple(((_widen(rf[0], f_rf[0], jump[0]), _widen(rf[1], f_rf[1], jump[1])),
                                (jump[0] * f_jump[0], jump[1] * f_jump[1])) for f_rf, f_jump in run.fields)
                if fields:
                    rf, jump = fields[0]
        rf = tuple(max(f[0][a] for f in fields) for a in (0, 1)) if fields else rf
        jump = tuple(min(f[1][a] for f in fields) for a in (0, 1)) if fields else jump
        cost = Cost(*(v * repeat for v in run.cost)) if repeat > 1 else run.cost
        executed = run.executed.times(repeat) if repeat > 1 else run.executed
        extra = run.extra
        if repeat > 1:  # copies after the first take an input made inside the use, freed inside it
            extra = max(extra, run.extra_freed + sum(x.elements for x in ins))
        return Result(ins, run.outs, cost, rf, jump, extra, run.extra_freed, executed, fields)


def _strong_groups(nodes: list[str], succ: dict) -> list[list[str]]:
    """Groups of nodes that all reach one another (Tarjan's algorithm, without recursion), each in
    the order of ``nodes``."""
    order = {v: i for i, v in enumerate(nodes)}
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    groups = []
    for start in nodes:
        if start in index:
            continue
        work = [(start, 0)]
        while work:
            v, i = work.pop()
            if i == 0:
                index[v] = low[v] = len(index)
                stack.append(v)
                on.add(v)
            if i < len(succ[v]):
                work.append((v, i + 1))
                w = succ[v][i]
                if w not in index:
                    work.append((w, 0))
                elif w in on:
                    low[v] = min(low[v], index[w])
                continue
            if low[v] == index[v]:
                group = []
                while True:
                    w = stack.pop()
                    on.discard(w)
                    group.append(w)
                    if w == v:
                        break
                groups.append(sorted(group, key=order.__getitem__))
            if work:
                parent = work[-1][0]
                low[parent] = min(low[parent], low[v])
    return groups


def _paths(root: str, step: dict, inside: set) -> dict:
    """Breadth-first parents from ``root`` following ``step`` within ``inside``."""
    parent, todo = {root: None}, [root]
    for v in todo:
        for w in step[v]:
            if w in inside and w not in parent:
                parent[w] = v
                todo.append(w)
    return parent


def _walk(parent: dict, b: str) -> list[str]:
    """The path from the root to ``b`` in a parent map."""
    path = [b]
    while parent[path[-1]] is not None:
        path.append(parent[path[-1]])
    return path[::-1]


def _joined(ins: list, given: list) -> tuple:
    """(input shapes, rf, jump, each input's (rf, jump)) where inputs join: the larger receptive
    field and the smaller jump."""
    (rf0, rf1), j0, j1 = ONE, float("inf"), float("inf")
    for (a, b), (c, e) in given:
        rf0, rf1, j0, j1 = max(rf0, a), max(rf1, b), min(j0, c), min(j1, e)
    return tuple(ins), (rf0, rf1), (j0, j1), tuple(given)


def _plain_join(results: dict, wires: list, kinds: list, srcs: tuple) -> tuple:
    """(input shapes, rf, jump) of a join whose wires go one to each port in order, each from the
    one output of a block other than an Output with a known result; Nones otherwise."""
    ins = []
    rf0 = rf1 = 1.0
    j0 = j1 = float("inf")
    for port, w in enumerate(wires):
        r = results.get(w.src)
        if (r is None or w.dst_port != port or w.src_port or len(r.outs) != 1 or r.fields is not None
                or kinds[srcs[port]] == "Output"):
            return None, None, None
        ins.append(r.outs[0])
        (a, b), (c, e) = r.rf, r.jump
        if a > rf0:
            rf0 = a
        if b > rf1:
            rf1 = b
        if c < j0:
            j0 = c
        if e < j1:
            j1 = e
    return tuple(ins), (rf0, rf1), (j0, j1)


def _field(r: Result, port: int) -> tuple:
    """(rf, jump) of output ``port`` of a block's result."""
    return r.fields[port] if r.fields is not None else (r.rf, r.jump)


def _executed(graph, inference: GraphInference) -> Executed:
    """The blocks of one motif run as executed (see :class:`Executed`)."""
    steps = elements = allocated = 0
    work: dict[tuple, int] = {}
    blocks, results = graph.blocks, inference.results
    for bid in inference.order:
        kind = blocks[bid].kind
        if kind in ("Input", "Output"):
            continue  # ports: they vanish when the use is expanded
        r = results.get(bid)
        if r is not None and r.executed is not None:
            inner = r.executed
            steps, elements, allocated = steps + inner.steps, elements + inner.elements, allocated + inner.allocated
            for sig, count in inner.work:
                work[sig] = work.get(sig, 0) + count
            continue
        steps += 1
        if r is None:
            continue
        e = sum(map(prod, r.ins)) + sum(map(prod, r.outs))
        elements += e
        if not KINDS[kind].view:
            allocated += sum(map(prod, r.outs))
            sig = (r.cost[0], r.cost[2], e)
            work[sig] = work.get(sig, 0) + 1
    return Executed(steps, elements, allocated, tuple(sorted(work.items())))


class Analysis:
    """Live results for a design: shapes, costs and findings, brought up to date on access.

    >>> from layerloom import Design
    >>> d = Design(); x = d.input(3, 64, 64); y = d.add("MaxPool2d", x, kernel=2, stride=2)
    >>> str(d.analysis().shape(y))
    '3×32×32'
    """

    def __init__(self, design):
        self.design = design
        self.motif_runs: dict[tuple, MotifRun] = {}
        self.memo: dict[tuple, tuple] = {}  # (kind, settings, input shapes) → (shape, cost, window) of clean blocks
        self.top = GraphInference(design, self)
        self._dirty: set[str] = set()
        self._topology = True
        self._stale = True
        self._profile = None  # live elements per step, made on demand
        self._budget: tuple = (None, [])
        self.revision = 0  # counts refreshes that may have changed results
        design.subscribe(self._on_change)

    def _on_change(self, change) -> None:
        if not change.reinfers:
            return
        if change.motifs or (change.dirty.keys() | change.renamed.keys() | change.topology) - {""}:
            self.motif_runs.clear()
            self._dirty.update(b.id for b in self.design.of_kind("Motif"))
        self._dirty |= change.dirty.get("", set())
        renamed = change.renamed.get("", set()) & self.design.blocks.keys()
        if renamed:  # finding messages name blocks: the renamed ones and the blocks they feed
            self._dirty |= renamed | {w.dst for b in renamed for w in self.design.out_wires[b]}
        self._topology = self._topology or "" in change.topology or bool(renamed)
        self._stale = True

    def refresh(self) -> "Analysis":
        """Bring results up to date with the design (cheap when nothing changed)."""
        if self._stale:
            top = self.top
            if self._topology and (not top.results or len(self._dirty) * 2 > len(self.design.blocks)):
                top.run()
            else:
                top.update(self._dirty, self._topology)
            self._dirty, self._topology, self._stale, self._profile = set(), False, False, None
            self.revision += 1
        return self

    def motif_run(self, motif, ins: tuple, params: dict, stack: tuple, given: tuple | None = None) -> MotifRun:
        """``motif`` inferred for input shapes ``ins`` and parameter values ``params`` (and, when
        given, each input's (rf, jump)); remembered until a motif changes."""
        key = (motif.name, ins, tuple(sorted(params.items())), given)
        run = self.motif_runs.get(key)
        if run is None:
            inner = GraphInference(motif, self, ins, params, stack + (motif.name,), given)
            inner.run()
            in_ids, out_ids = motif.ports()
            outs = tuple(inner.results[b].outs[0] if inner.results.get(b) else None for b in out_ids)
            fields = tuple((r.rf, r.jump) if r is not None else (ONE, ONE)
                           for r in (inner.results.get(b) for b in out_ids))
            kept = max(live_profile(inner.wiring, inner.results, inputs_outside=True), default=0)
            freed = max(live_profile(inner.wiring, inner.results), default=0)
            ends = sum(o.elements for o in outs if o is not None)
            ins_size = sum(x.elements for x in ins)
            findings = tuple(f for fs in inner.findings.values() for f in fs) + tuple(inner.graph_findings)
            cost = _add_costs(r.cost for r in inner.results.values() if r is not None)
            run = MotifRun(outs, cost, fields, max(kept - ends, 0), freed - ends - ins_size, findings,
                           _executed(motif, inner)._replace(run=key), inner)
            self.motif_runs[key] = run
        return run

    # ----- reading results
    @property
    def order(self) -> list[str]:
        """Block ids in execution order (longest-path level, then rank: :mod:`layerloom.core.wiring`)."""
        return self.refresh().top.order

    @property
    def level(self) -> dict[str, int]:
        return self.refresh().top.level

    def result(self, block_id: str) -> Result | None:
        return self.refresh().top.results.get(block_id)

    def shape(self, block_id: str, port: int = 0) -> Shape | None:
        """Output shape of ``block_id`` at output ``port`` (for an Output block: what it receives)."""
        r = self.result(block_id)
        return r.outs[port] if r is not None and port < len(r.outs) else None

    def findings_of(self, block_id: str) -> list[Finding]:
        top = self.refresh().top
        return (top.findings.get(block_id, []) + [f for f in top.graph_findings if f.block == block_id]
                + [f for f in self.budget_findings() if f.block == block_id])

    def all_findings(self) -> list[Finding]:
        """Every finding, errors first, then warnings, then notes (each in depth order), including
        the budget findings (:mod:`layerloom.core.budget`)."""
        top = self.refresh().top
        pos = top.position
        found = [f for fs in top.findings.values() for f in fs] + top.graph_findings + self.budget_findings()
        found.sort(key=lambda f: pos.get(f.block, -1))
        return sort_findings(found)

    def budget_findings(self) -> list[Finding]:
        """Where the design passes its budget (cached until the design or its budget changes)."""
        d = self.design
        if not d.budget:
            return []
        key = (self.revision, tuple(sorted(d.budget.items())), d.target, d.batch, d.dtype)
        if self._budget[0] != key:
            from layerloom.core.budget import budget_findings
            from layerloom.core.ledger import Ledger

            self._budget = (key, budget_findings(Ledger(self), d.budget))
        return self._budget[1]

    def live_profile(self):
        """Live activation elements per sample at each step of :attr:`order`, a list (for a motif
        use, the largest over the blocks it runs: see :mod:`layerloom.core.schedule`)."""
        top = self.refresh().top
        if self._profile is None:
            self._profile = opened_profile(self.design, top)
        if self._profile is None:
            if top.plan is None:
                top.plan = Plan(top.wiring)
            self._profile = live_profile(top.wiring, top.results, plan=top.plan)
        return self._profile
