"""Stage-row Tidy, Fold groups and wire routes, without a window."""
from __future__ import annotations

import json
from pathlib import Path

import pytest

from layerloom import Design, load
from layerloom.core.fileformat import to_data
from layerloom.core.folding import chip_label, fold_groups
from layerloom.core.layout import graph_shapes, tidy_layout
from layerloom.core.stage_rows import CARD_HEIGHT, CARD_WIDTH, resolution
from layerloom.core.wire_route import Obstacles, polyline_crosses, route
from reference_nets import resnet50

SAMPLES = sorted((Path(__file__).resolve().parents[1] / "samples").glob("*.loom"))


def designs():
    return [*((p.stem, load(p)) for p in SAMPLES), ("resnet50", resnet50())]


def card_rects(lay, folds):
    return {b: (x, y, x + CARD_WIDTH, y + CARD_HEIGHT) for b, (x, y) in lay.positions.items() if b not in folds}


def overlaps(a, b) -> bool:
    return a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]


@pytest.mark.parametrize("fold", [True, False], ids=["folded", "unfolded"])
@pytest.mark.parametrize("name,design", designs(), ids=lambda v: v if isinstance(v, str) else "")
def test_stage_rows_have_no_overlaps_and_break_where_the_resolution_changes(name, design, fold):
    lay = tidy_layout(design, fold=fold)
    folds = fold_groups(design) if fold else {}
    assert set(lay.positions) == set(design.blocks)
    rects = card_rects(lay, folds)
    ids = list(rects)
    assert not [(a, b) for i, a in enumerate(ids) for b in ids[i + 1:] if overlaps(rects[a], rects[b])]
    shapes = graph_shapes(design)
    line_of = {c: i for i, row in enumerate(lay.rows) for c in row.cards}
    assert set(line_of) == set(rects)
    for row in lay.rows:  # every card of a line has the line's resolution (no squeeze-and-excite here)
        assert {resolution(shapes[c]) for c in row.cards if shapes[c] is not None} <= {row.key}
        assert all(rects[c][1] >= row.rect[1] and rects[c][3] <= row.rect[3] for c in row.cards)
    for a, b in zip(lay.rows, lay.rows[1:]):  # rows top → bottom, lines of one stage together
        assert a.rect[3] < b.rect[1] and a.stage <= b.stage
    for w in design.wires:  # data never flows up a stage
        s, d = folds.get(w.src, w.src), folds.get(w.dst, w.dst)
        if s != d:
            assert lay.rows[line_of[s]].stage <= lay.rows[line_of[d]].stage
            if resolution(shapes[s]) != resolution(shapes[d]) and None not in (shapes[s], shapes[d]):
                assert lay.rows[line_of[s]].stage < lay.rows[line_of[d]].stage  # a new row where H×W changes


def test_resnet50_has_one_stage_per_resolution_and_keeps_each_projection_in_its_row():
    d = resnet50()  # torchvision's ResNet-50: 224 → 112 → 56 → 28 → 14 → 7 → pooled (torchvision documentation)
    lay = tidy_layout(d)
    keys = []
    for row in lay.rows:
        if row.key not in keys:
            keys.append(row.key)
    assert keys == [(224, 224), (112, 112), (56, 56), (28, 28), (14, 14), (7, 7), "point"]
    shapes = graph_shapes(d)
    for b in d.blocks.values():  # projections (1×1 with stride 2 on the shortcut) sit in the stage they feed
        if b.kind == "Conv2d" and b.settings["kernel"] == 1 and b.settings["stride"] == 2:
            stage = lay.stage_of[b.id]
            assert lay.rows[[r.stage for r in lay.rows].index(stage)].key == resolution(shapes[b.id])


def test_a_squeeze_and_excite_gate_stays_in_the_row_of_its_join():
    d = Design("gate")
    x = d.input(16, 32, 32)
    x = d.add("Conv2d", x, out_channels=32, kernel=3, padding=1)
    g = d.add("AdaptiveAvgPool2d", x)
    g = d.add("Pointwise", g, out_channels=8)
    g = d.add("Pointwise", d.add("ReLU", g), out_channels=32)
    gate = d.add("Multiply", x, d.add("Sigmoid", g))
    out = d.add("MaxPool2d", gate, kernel=2, stride=2)
    d.add("Output", out)
    lay = tidy_layout(d)
    assert lay.stage_of[g] == lay.stage_of[gate] == lay.stage_of[x]
    assert lay.stage_of[out] == lay.stage_of[gate] + 1


def test_a_long_stage_wraps_to_fit_the_view_and_a_short_one_does_not():
    d = Design("chain")
    x = d.input(8, 32, 32)
    for _ in range(40):
        x = d.add("Identity", x)
    lay = tidy_layout(d, view=(1200.0, 800.0))
    assert len(lay.rows) > 1 and all(r.key == (32, 32) for r in lay.rows)
    assert max(r.rect[2] for r in lay.rows) <= 40 * 250
    short = Design("short")
    short.add("Identity", short.input(8, 32, 32))
    assert len(tidy_layout(short, view=(1200.0, 800.0)).rows) == 1


def test_fold_groups_take_a_norm_and_an_activation_after_a_single_consumer_convolution():
    d = Design()
    x = d.input(3, 32, 32)
    c = d.add("Conv2d", x, out_channels=8, kernel=3)
    b = d.add("BatchNorm2d", c)
    r = d.add("ReLU6", b)
    c2 = d.add("Conv2d", r, out_channels=8, kernel=3)
    r2 = d.add("ReLU", c2)
    side = d.add("Identity", c2)  # c2 has two consumers: nothing folds into it
    f = d.add("Linear", d.add("Flatten", d.add("Add", r2, side)), out_features=4)
    a = d.add("GELU", f)
    assert fold_groups(d) == {b: c, r: c, a: f}
    assert [chip_label(d.blocks[i].kind) for i in (b, r, a)] == ["BN", "ReLU6", "GELU"]


def test_a_route_goes_around_every_card_in_its_way_and_a_return_wire_between_rows():
    cards = {f"c{i}": (i * 250.0, 0.0, i * 250.0 + 180, 54.0) for i in range(5)}
    cards["up"] = (500.0, -84.0, 680.0, -30.0)  # a branch stacked above the middle card
    cards["next"] = (0.0, 118.0, 180.0, 172.0)  # the next row's first card
    obstacles = Obstacles(cards)
    skip = route((181.0, 27.0), (999.0, 27.0), obstacles, ("c0", "c4"))
    assert skip is not None
    back = route((1181.0, 27.0), (-1.0, 145.0), Obstacles({**cards, "c4b": (1000.0, 0, 1180.0, 54.0)}),
                 ("c4b", "next"))
    assert 54.0 < back[2][1] < 118.0  # the return wire's lane lies between the rows
    for points, ends in ((skip, ("c0", "c4")), (back, ("c4b", "next"))):
        assert not [k for k, r in cards.items() if k not in ends and polyline_crosses(points, r)]
    assert route((181.0, 27.0), (249.0, 27.0), obstacles, ("c0", "c1")) is None  # neighbours: straight


def test_a_file_without_positions_opens_laid_out_in_stage_rows(tmp_path):
    data = to_data(resnet50())
    for b in data["blocks"]:
        del b["position"]
    path = tmp_path / "bare.loom"
    path.write_text(json.dumps(data))
    d = load(path)
    folds = fold_groups(d)
    places = {tuple(b.position) for b in d.blocks.values()}
    assert len(places) == len(d.blocks) - len(folds)  # one place per card; a chip shares its card's
    assert {tuple(d.blocks[c].position) for c in folds} <= {tuple(d.blocks[h].position) for h in folds.values()}
    kept = load(SAMPLES[0])  # a file with positions keeps them
    saved = json.loads(SAMPLES[0].read_text())["blocks"]
    assert [tuple(b["position"]) for b in saved] == [tuple(b.position) for b in kept.blocks.values()]


def test_the_branches_of_a_multi_branch_unit_stack_above_and_below_the_main_line_in_one_row():
    d = Design("branches")
    x = d.add("Conv2d", d.input(16, 32, 32), out_channels=32, kernel=3, padding=1)
    a = d.add("Pointwise", x, out_channels=8)
    b = d.add("Conv2d", d.add("Pointwise", x, out_channels=8), out_channels=8, kernel=3, padding=1)
    c = d.add("Pointwise", d.add("MaxPool2d", x, kernel=3, stride=1, padding=1), out_channels=8)
    join = d.add("Concat", a, b, c)
    d.add("Output", join)
    lay = tidy_layout(d, fold=False, view=(2400.0, 700.0))  # wide enough for one line
    row = next(r for r in lay.rows if join in r.cards)
    assert {a, b, c, x} <= set(row.cards) and len(lay.rows) == 1  # every branch keeps the stage's 32×32
    main_y = lay.positions[join][1]
    assert lay.positions[x][1] == lay.positions[b][1] == main_y  # the longest branch is the main line
    assert lay.positions[a][1] < main_y < lay.positions[c][1]  # the others above and below it
