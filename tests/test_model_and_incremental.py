"""The design model: reversible edits, change notifications, and incremental re-inference."""
from __future__ import annotations

import doctest
import importlib

import pytest

from layerloom import Design
from layerloom.core import edits
from layerloom.core.fileformat import dumps, parse
from layerloom.core.graph import Wire
from layerloom.core.inference import GraphInference
from layerloom.core.settings import SettingError


def chain(n: int) -> tuple[Design, list[str]]:
    d = Design()
    ids = [d.input(8, 32, 32)]
    for i in range(n):
        settings = {"out_channels": 8, "kernel": 3, "padding": 1} if i % 2 == 0 else {}
        ids.append(d.add("Conv2d" if i % 2 == 0 else "ReLU", ids[-1], **settings))
    d.add("Output", ids[-1])
    return d, ids


@pytest.fixture
def counted(monkeypatch):
    """Count how many blocks inference computes (after the memo, which would hide repeats)."""
    calls = []
    real = GraphInference._infer

    def spy(self, bid, wires):
        calls.append(bid)
        return real(self, bid, wires)
    monkeypatch.setattr(GraphInference, "_infer", spy)
    return calls


def test_an_edit_recomputes_only_downstream_and_stops_when_shapes_settle(counted):
    d, ids = chain(60)
    d.analysis().refresh()
    counted.clear()
    d.set(ids[41], out_channels=16)  # changes this conv and the ReLU after it; the next conv restores 8
    d.analysis().refresh()
    assert counted == [ids[41], ids[42], ids[43]]
    counted.clear()
    d.set(ids[41], bias=False)  # same shape: nothing downstream is touched
    d.analysis().refresh()
    assert counted == [ids[41]]


def test_moves_do_not_reinfer_and_renames_touch_only_the_block_and_its_readers(counted):
    d, ids = chain(4)
    a = d.analysis().refresh()
    before = a.revision
    d.apply(edits.move(d, {ids[1]: (5.0, 7.5)}))
    assert a.refresh().revision == before
    counted.clear()
    d.apply(edits.rename(d, ids[1], "first_conv"))
    a.refresh()
    assert counted == [ids[1], ids[2]]


def test_bulk_edits_notify_once():
    d, ids = chain(2)
    heard = []
    d.subscribe(heard.append)
    with d.bulk():
        d.set(ids[1], out_channels=4)
        d.apply(edits.move(d, {ids[2]: (1.0, 1.0)}))
    assert len(heard) == 1
    assert heard[0].dirty[""] == {ids[1]} and heard[0].moved[""] == {ids[2]}


def test_undo_restores_the_file_exactly_after_a_delete():
    d, ids = chain(6)
    before = dumps(d)
    undo = d.apply(edits.remove_blocks(d, [ids[2], ids[3]]))
    assert len(d.blocks) == len(ids) - 1
    d.apply(undo)
    assert dumps(d) == before


def test_a_refused_setting_changes_nothing():
    d, ids = chain(2)
    before = dumps(d)
    with pytest.raises(SettingError, match="conv_1: Kernel 0 is below the minimum 1"):
        d.set(ids[1], kernel=0)
    with pytest.raises(SettingError, match="has no setting 'colour'"):
        d.set(ids[1], colour=3)
    assert dumps(d) == before


def test_a_failing_edit_is_rolled_back_whole():
    d, ids = chain(2)
    before = dumps(d)
    bad = edits.Edit("two things", (edits.SetBlock("", ids[1], "name", "renamed"),
                                    edits.AddWire("", edits.Wire(ids[1], 0, "nope", 0))))
    with pytest.raises(edits.EditError, match="'nope'"):
        d.apply(bad)
    assert dumps(d) == before


def test_incremental_results_equal_a_fresh_pass():
    d, ids = chain(30)
    d.analysis().refresh()
    for i, width in ((5, 12), (9, 3), (5, 8), (21, 40)):
        d.set(ids[i], out_channels=width)
    d.apply(edits.remove_blocks(d, [ids[14]]))
    d.connect(ids[13], ids[15])
    fresh = parse(dumps(d))
    a, b = d.analysis(), fresh.analysis()
    assert a.order == b.order
    assert {k: a.result(k) for k in a.order} == {k: b.result(k) for k in b.order}
    assert a.all_findings() == b.all_findings()
    assert d.ledger().totals == fresh.ledger().totals


@pytest.mark.parametrize("module", ["layerloom", "layerloom.core.design", "layerloom.core.shapes",
                                    "layerloom.core.inference", "layerloom.core.units"])
def test_docstring_examples_run(module):
    result = doctest.testmod(importlib.import_module(module))
    assert result.attempted > 0 and result.failed == 0


def test_renaming_away_from_a_name_ending_in_a_non_ascii_digit():
    """'²' and 'stem_²' are digits to str.isdigit but not to int(): freeing such a name must not
    fail (found by the long property profile: renaming input_1 to '²', then away from it)."""
    d = Design()
    x = d.input(3, 8, 8)
    for name in ("²", "stem_²", "stem_٣", "input_1"):
        d.apply(edits.rename(d, x, name))
    assert d.blocks[x].name == "input_1"


def test_closing_a_loop_names_the_same_faults_as_a_fresh_load():
    """A wire from a ReLU back into the Input closes input → pointwise → output → ReLU → input. The
    blocks on the loop lose their shapes; a result kept from before the loop must not make the
    ReLU report a wire from an Output that a fresh load of the same file does not report."""
    d = Design()
    x = d.input(2, 4, 4)
    relu = d.add("ReLU", d.add("Output", d.add("Pointwise", x, out_channels=2)))
    d.ledger()  # results exist before the loop closes
    d.apply(edits.connect(d, Wire(relu, 0, x, 0)))
    fresh = parse(dumps(d))
    found = [(f.code, f.block, f.message) for f in d.analysis().all_findings()]
    assert found == [(f.code, f.block, f.message) for f in fresh.analysis().all_findings()]
    assert [c for c, b, _ in found if b == relu] == ["graph.cycle"]


def test_closing_a_loop_through_an_output_gives_the_findings_of_a_fresh_load():
    """Found by the editor's property test (tests/gui/test_properties_editor.py): blocks that join a
    loop kept their results from before it, so a block on the loop read its source's stale shapes
    and named a fault a fresh load of the same file does not name."""
    d = Design("loop")
    x = d.input(3, 8, 8)
    norm = d.add("BatchNorm2d", x)
    out = d.add("Output", d.add("ReLU", norm))
    d.findings()  # results exist before the edit, so what follows is incremental
    d.apply(edits.replace_wire(d, Wire(out, 0, norm, 0)))
    assert d.findings() == parse(dumps(d)).findings()
    assert "graph.cycle" in {f.code for f in d.findings()}
