"""Properties of motifs over random designs and random edit sequences (hypothesis).

Designs are valid but extreme: towers of motifs several deep, each repeating the one inside,
large (legal) channel counts and map sizes, names in any script. Edit sequences use every edit
command the editor has — settings, add, wire, unwire, insert, rename, move, remove, paste, Tidy,
design fields, budget and target, library motifs, make motif (from random convex selections, in
the design or inside a motif), expand and expose parameter — and apply every mend offered for
every finding. What must hold after each step:

- nothing raises but the refusals the editor reports (EditError, SettingError, ClipboardError);
- no offered mend increases the number of error findings (and undoing it restores the file);
- saving and loading gives the same file and the same results as the design kept incrementally;
- an error-free design expands into an error-free flat design with the same figures: every total,
  and per block the same figures (a motif use: the sums over the blocks it became);
- grouping random selections into motifs keeps every total, peak live memory included;
- the order of blocks and wires in a file (Input and Output blocks aside: they number the ports)
  changes no figure and not the execution order.
"""
from __future__ import annotations

import json

import hypothesis.strategies as st
import pytest
from hypothesis import HealthCheck, given, settings

from layerloom import Design
from layerloom.core import edits, fileformat
from layerloom.core.clipboard import ClipboardError, copy_blocks, paste_edit
from layerloom.core.findings import ERROR
from layerloom.core.layout import tidy_positions
from layerloom.core.ledger import Ledger
from layerloom.core.mends import mends_for
from layerloom.core.motif_library import BY_KEY, library_edit
from layerloom.core.motif_ops import PORT_KINDS, expand, expose, make_motif
from layerloom.core.settings import SettingError
from layerloom.core.targets import PRESETS
from flatten import expanded_with_owners
from test_properties import KEEPING_ORDER, REMOVING, _check_sound, _snapshot, designs, draw_edit, examples

REFUSALS = (edits.EditError, SettingError, ClipboardError)
NAMES = st.text(st.characters(blacklist_categories=("Cs",)), min_size=1, max_size=10)  # any script, no lone surrogates
SLOW = dict(deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


# ----- valid but extreme designs ------------------------------------------------------------------


def _tower(draw, d: Design, depth: int) -> str:
    """Motifs ``tower_0`` … ``tower_{depth-1}``, each repeating the one below; all keep the shape
    when their parameter ``c`` is the incoming channel count. Returns the top motif's name."""
    m = d.motif("tower_0", c=8)
    y = m.add("Pointwise", m.input(), out_channels={"param": "c"}, bias=draw(st.booleans()))
    m.add("Output", m.add(draw(st.sampled_from(["ReLU", "GELU", "Identity"])), m.add("BatchNorm2d", y)))
    for level in range(1, depth):
        m = d.motif(f"tower_{level}", c=8)
        i = m.input()
        y = m.add("Motif", i, motif=f"tower_{level - 1}", repeat=draw(st.integers(1, 3)), c={"param": "c"})
        if draw(st.booleans()):
            y = m.add("Add", y, i)  # a residual around the level below
        m.add("Output", y)
    return m.name


@st.composite
def extreme_designs(draw) -> Design:
    """A valid design with a motif tower, big-but-legal sizes and odd names."""
    d = Design(draw(NAMES), batch=draw(st.integers(1, 64)))
    top = _tower(draw, d, draw(st.integers(1, 4)))
    c = draw(st.sampled_from([1, 3, 64, 512, 1024]))
    x = d.input(c, draw(st.sampled_from([1, 7, 224, 1024])), draw(st.sampled_from([1, 5, 224, 1024])))
    for _ in range(draw(st.integers(1, 3))):
        step = draw(st.sampled_from(["tower", "conv", "pool", "norm"]))
        if step == "tower":
            x = d.use(top, x, repeat=draw(st.integers(1, 3)), c=d.analysis().shape(x)[0])
        elif step == "conv":
            x = d.add("Conv2d", x, out_channels=d.analysis().shape(x)[0], kernel=draw(st.sampled_from([1, 3])),
                      padding="same", groups=draw(st.sampled_from([1, d.analysis().shape(x)[0]])))
        elif step == "pool":
            x = d.add("MaxPool2d", x, kernel=1)
        else:
            x = d.add("BatchNorm2d", x)
    d.add("Output", x)
    for bid in draw(st.lists(st.sampled_from(sorted(d.blocks)), max_size=3, unique=True)):
        d.apply(edits.rename(d, bid, draw(NAMES)))
    return d


any_design = st.one_of(extreme_designs(), designs(max_steps=6))


# ----- every edit command -------------------------------------------------------------------------


def _graphs_with(d: Design, keep) -> list[str]:
    return [key for key in [""] + sorted(d.motifs) if any(keep(b) for b in d.graph(key).blocks.values())]


def _reach(start: str, step) -> set[str]:
    """``start`` and every block reached from it by following ``step`` (block → next blocks)."""
    seen, todo = {start}, [start]
    while todo:
        for nxt in step(todo.pop()):
            if nxt not in seen:
                seen.add(nxt)
                todo.append(nxt)
    return seen


def _convex(draw, g) -> list[str]:
    """Blocks on every path from one block to another (or to itself): a selection with no path that
    leaves it and comes back."""
    start = draw(st.sampled_from(sorted(b.id for b in g.blocks.values() if b.kind not in PORT_KINDS)))
    after = _reach(start, lambda b: [w.dst for w in g.out_wires[b]])
    end = draw(st.sampled_from(sorted(b for b in after if g.blocks[b].kind not in PORT_KINDS)))
    return sorted(after & _reach(end, lambda b: [w.src for w in g.in_wires[b]]))


def make_motif_edit(draw, d: Design) -> edits.Edit:
    graph = draw(st.sampled_from(_graphs_with(d, lambda b: b.kind not in PORT_KINDS)))
    chosen = _convex(draw, d.graph(graph))
    return make_motif(d, chosen, name=draw(st.one_of(st.none(), NAMES)), graph=graph)[0]


def expand_edit(draw, d: Design) -> edits.Edit:
    graph = draw(st.sampled_from(_graphs_with(d, lambda b: b.kind == "Motif")))
    return expand(d, draw(st.sampled_from(sorted(b.id for b in d.graph(graph).of_kind("Motif")))), graph)


def expose_edit(draw, d: Design) -> edits.Edit:
    name = draw(st.sampled_from(_graphs_with(d, lambda b: b.kind not in PORT_KINDS and b.settings)[1:] or sorted(d.motifs)))
    block = d.motifs[name].blocks[draw(st.sampled_from(sorted(d.motifs[name].blocks)))]
    key = draw(st.sampled_from(sorted(block.settings) or ["out_channels"]))
    param = draw(st.one_of(st.from_regex(r"[a-z][a-z0-9_]{0,6}", fullmatch=True), NAMES))
    return expose(d, name, block.id, key, param)


def paste_into(draw, d: Design) -> edits.Edit:
    source = draw(st.sampled_from(_graphs_with(d, lambda b: True)))
    g = d.graph(source)
    data = copy_blocks(g, draw(st.lists(st.sampled_from(sorted(g.blocks)), min_size=1, max_size=4, unique=True)))
    return paste_edit(d, data, graph=draw(st.sampled_from([""] + sorted(d.motifs))))[0]


def tidy_edit(draw, d: Design) -> edits.Edit:
    g = d.graph(draw(st.sampled_from(_graphs_with(d, lambda b: True))))
    return edits.move(g, tidy_positions(g))


def library_motif_edit(draw, d: Design) -> edits.Edit:
    return library_edit(d, draw(st.sampled_from(sorted(BY_KEY))))[0]


def budget_edit(draw, d: Design) -> edits.Edit:
    budget = draw(st.dictionaries(st.sampled_from(["weights", "macs", "memory", "latency_ms"]),
                                  st.integers(1, 10 ** 9), max_size=3))
    target = draw(st.sampled_from((None,) + PRESETS))
    return edits.Edit("Budget and target", (edits.SetField("budget", budget), edits.SetField("target", target)))


MOTIF_EDITS = {make_motif_edit: lambda d: bool(_graphs_with(d, lambda b: b.kind not in PORT_KINDS)),
               expand_edit: lambda d: bool(_graphs_with(d, lambda b: b.kind == "Motif")),
               expose_edit: lambda d: bool(d.motifs), paste_into: lambda d: bool(_graphs_with(d, lambda b: True)),
               tidy_edit: lambda d: bool(_graphs_with(d, lambda b: True)), library_motif_edit: lambda d: True,
               budget_edit: lambda d: True}


def any_edit(draw, d: Design) -> edits.Edit:
    """An edit from any command of the editor that can act on ``d`` as it is now."""
    usable = [m for m, ok in MOTIF_EDITS.items() if ok(d)]
    maker = draw(st.sampled_from(usable + ["plain"] * 3))  # make motif, expand, … as often as all the rest
    if maker == "plain":
        return draw_edit(draw, d, KEEPING_ORDER + REMOVING)
    return maker(draw, d)


# ----- what must hold --------------------------------------------------------------------------------


def _errors(d: Design) -> int:
    return sum(f.severity == ERROR for f in d.findings())


def check_mends(d: Design) -> None:
    """Every mend of every finding: offered without raising, adds no error, undone exactly."""
    text = fileformat.dumps(d)
    before = _errors(d)
    for f in d.findings():
        for i, mend in enumerate(mends_for(d, f)):
            undo = d.apply(mend.edit)
            assert _errors(d) <= before, (mend.label, [x.message for x in d.findings() if x.severity == ERROR])
            d.apply(undo)
            assert fileformat.dumps(d) == text, mend.label


def check_round_trip(d: Design) -> None:
    text = fileformat.dumps(d)
    again = fileformat.parse(text)
    assert fileformat.dumps(again) == text
    assert _snapshot(again) == _snapshot(d)


PER_BLOCK = ("weights", "buffers", "macs", "other", "memory", "moved")


def check_same_figures_expanded(d: Design) -> None:
    """An error-free design and its expanded form: same totals, same figures per block."""
    if _errors(d):
        return
    flat, groups = expanded_with_owners(d)
    assert _errors(flat) == 0, [f.message for f in flat.findings()]
    grouped, expanded = Ledger(d.analysis()), Ledger(flat.analysis())
    g, e = grouped.totals, expanded.totals
    assert g._replace(peak_block=None, latency=None) == e._replace(peak_block=None, latency=None)
    if g.latency is not None:
        assert g.latency == pytest.approx(e.latency, rel=1e-9, abs=1e-15)
    assert int(grouped.steps[-1]) == len(flat.blocks) if len(grouped.order) else len(flat.blocks) == 0
    rows = {r.block: r for r in expanded.rows}
    for row in grouped.rows:
        if row.block in groups or d.blocks[row.block].kind == "Motif":
            parts = [rows[b] for b in groups.get(row.block, [])]
            for key in PER_BLOCK:
                assert getattr(row, key) == sum(getattr(p, key) for p in parts), (row.name, key)
            if row.latency is not None:
                assert row.latency == pytest.approx(sum(p.latency for p in parts), rel=1e-9, abs=1e-15)
        else:
            flat_row = rows[row.block]
            assert row._replace(depth=0, latency=0) == flat_row._replace(depth=0, latency=0), row.name
            if row.latency is not None:
                assert row.latency == pytest.approx(flat_row.latency, rel=1e-9, abs=1e-15)


def check_all(d: Design) -> None:
    _check_sound(d)
    check_round_trip(d)
    check_same_figures_expanded(d)
    check_mends(d)


@settings(max_examples=examples(60), **SLOW)
@given(extreme_designs())
def test_extreme_valid_designs_are_sound_and_flatten_to_the_same_figures(d):
    assert _errors(d) == 0, [f.message for f in d.findings()]
    check_all(d)


@settings(max_examples=examples(80), **SLOW)
@given(any_design, st.data())
def test_random_edit_sequences_with_motifs_hold_every_invariant(d, data):
    for _ in range(data.draw(st.integers(1, 5))):
        try:
            edit = any_edit(data.draw, d)
            d.apply(edit)
        except REFUSALS:
            continue  # refused with a message, as the editor shows it; nothing changed
        check_all(d)


def _grouping_free_totals(d: Design):
    """Every total but where the peak is reached (a motif use stands for the blocks it runs), and
    the latency apart (a float sum, in another order when grouped)."""
    t = Ledger(d.analysis()).totals
    return t._replace(peak_block=None, latency=None), t.latency


@settings(max_examples=examples(80), **SLOW)
@given(any_design, st.data())
def test_grouping_random_convex_selections_keeps_every_figure(d, data):
    """Make motifs of random convex selections (also inside motifs): the totals stay those of the
    design before (peak live memory included), and the grouped design has exactly the figures of
    its expanded form."""
    before, latency = _grouping_free_totals(d)
    for _ in range(data.draw(st.integers(1, 3))):
        try:
            d.apply(make_motif_edit(data.draw, d))
        except REFUSALS:
            continue
        now, now_latency = _grouping_free_totals(d)
        assert now == before
        assert now_latency == pytest.approx(latency, rel=1e-9, abs=1e-15) if latency is not None else now_latency is None
        check_same_figures_expanded(d)


def test_grouping_a_run_of_blocks_keeps_the_peak():
    """The peak depends on the execution order, which depends on the wiring alone: the same
    grouped, expanded and as first drawn."""
    d = Design()
    x = d.input(8, 16, 16)
    side = d.add("Flatten", x)
    a = d.add("Conv2d", x, out_channels=8, kernel=3, padding=1)
    b = d.add("Pointwise", a, out_channels=8)
    d.add("Output", d.add("Linear", side, out_features=4))
    d.add("Output", b)
    peak = Ledger(d.analysis()).totals.peak_memory
    edit, inst = make_motif(d, [a, b])
    d.apply(edit)
    assert Ledger(d.analysis()).totals.peak_memory == peak
    d.apply(expand(d, inst))
    assert Ledger(d.analysis()).totals.peak_memory == peak


def _shuffled(draw, d: Design) -> Design:
    """``d`` saved, the lists of blocks and of wires in the file (of the design and of each motif)
    put in a random order, and loaded. Input and Output blocks keep their order among themselves:
    it numbers the ports."""
    data = json.loads(fileformat.dumps(d))
    for graph in [data, *data.get("motifs", [])]:
        blocks = draw(st.permutations(graph["blocks"]))
        ports = [b for b in graph["blocks"] if b["kind"] in PORT_KINDS]
        slots = [i for i, b in enumerate(blocks) if b["kind"] in PORT_KINDS]
        for i, b in zip(slots, ports):
            blocks[i] = b
        graph["blocks"] = blocks
        graph["wires"] = draw(st.permutations(graph["wires"]))
    return fileformat.parse(json.dumps(data))


def _figures_by_block(d: Design):
    """Order, totals, rows, live memory and findings. Left out of the order: blocks on a loop of
    wires (no shapes, run last); from the findings, which walk names a loop. Blocks that reach no
    Output and designs with two wires into one port (an error, port.multiple) are compared too."""
    L = Ledger(d.analysis())
    rows = {r.block: r for r in L.rows}
    live = dict(zip(L.order, L.live))
    stuck = d.analysis().top.stuck
    findings = sorted((f.code, f.block, "" if f.code == "graph.cycle" else f.message) for f in d.findings())
    return [b for b in L.order if b not in stuck], L.totals, rows, live, findings


@settings(max_examples=examples(60), **SLOW)
@given(any_design, st.data())
def test_the_order_of_blocks_and_wires_in_a_file_changes_no_figure(d, data):
    """Shuffled in the file, the same design runs its blocks in the same order and has the same
    totals (peak and latency included), the same row and live memory per block, the same findings
    (a loop of wires may be named from another block)."""
    for _ in range(data.draw(st.integers(0, 3))):  # edits leave blocks in any order
        try:
            d.apply(any_edit(data.draw, d))
        except REFUSALS:
            continue
    assert _figures_by_block(_shuffled(data.draw, d)) == _figures_by_block(d)
