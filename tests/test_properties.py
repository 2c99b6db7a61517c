"""Properties of the core over random designs (hypothesis).

Designs are drawn through the public scripting API and are valid by construction: every choice
of kernel, padding, groups, join or motif use is made to fit the shapes already there. Random
edits then change them in every way the editor can. Broken files are valid files mutated at
random. What must hold:

- inference never raises, whatever the design (broken ones give findings, not exceptions);
- a design built valid has no error finding, every size ≥ 1 and all totals ≥ 0;
- applying an edit and then its inverse restores the saved file exactly and the same costs;
- results kept up to date incrementally equal those of a fresh load of the same file;
- loading any text gives a design or a :class:`LoomFileError`, nothing else.
"""
from __future__ import annotations

import json

import hypothesis.strategies as st
from hypothesis import HealthCheck, assume, given, settings

from layerloom import Design
from layerloom.core import edits, fileformat
from layerloom.core.design import DTYPES
from layerloom.core.findings import ERROR
from layerloom.core.graph import Wire
from layerloom.core.kinds import KINDS
from layerloom.core.shapes import Shape

ACTIVATIONS = ("ReLU", "ReLU6", "GELU", "SiLU", "Sigmoid", "Tanh", "Hardswish", "LeakyReLU")
MAX_SIDE = 48  # keep maps small so every example stays cheap


def examples(n: int) -> int:
    """``n`` examples under the ``ci`` profile (100 by default), proportionally more under ``long``."""
    return n * settings.default.max_examples // 100


def _shape(d: Design, x: str) -> Shape:
    return d.analysis().shape(x)


def _divisors(n: int) -> list[int]:
    return [g for g in range(1, n + 1) if n % g == 0]


# ----- valid designs ---------------------------------------------------------------------------


def _window(draw, n: int, max_k: int = 5) -> tuple[int, int, int]:
    """Kernel, padding and dilation along one axis of length ``n`` whose extent fits n + 2p."""
    p, dil, k = draw(st.integers(0, 2)), draw(st.integers(1, 2)), draw(st.integers(1, max_k))
    return min(k, (n + 2 * p - 1) // dil + 1), p, dil


def _pair(a: int, b: int):
    return a if a == b else [a, b]


def _conv(draw, d, x):
    c, h, w = _shape(d, x)
    (kh, ph, dh), (kw, pw, dw) = _window(draw, h), _window(draw, w)
    out = draw(st.integers(1, 16))
    groups = draw(st.sampled_from([g for g in _divisors(c) if out % g == 0]))
    if draw(st.booleans()):
        padding, stride = "same", 1
    else:
        padding, stride = _pair(ph, pw), _pair(draw(st.integers(1, 3)), draw(st.integers(1, 3)))
    return d.add("Conv2d", x, out_channels=out, kernel=_pair(kh, kw), stride=stride, padding=padding,
                 dilation=_pair(dh, dw), groups=groups, bias=draw(st.booleans()))


def _depthwise(draw, d, x):
    c, h, w = _shape(d, x)
    (kh, ph, dh), (kw, pw, dw) = _window(draw, h), _window(draw, w)
    same = draw(st.booleans())
    return d.add("Depthwise", x, kernel=_pair(kh, kw), padding="same" if same else _pair(ph, pw),
                 stride=1 if same else draw(st.integers(1, 2)), dilation=_pair(dh, dw),
                 multiplier=draw(st.integers(1, 3)), bias=draw(st.booleans()))


def _pointwise(draw, d, x):
    c = _shape(d, x)[0]
    out = draw(st.integers(1, 32))
    return d.add("Pointwise", x, out_channels=out, stride=draw(st.integers(1, 2)),
                 groups=draw(st.sampled_from([g for g in _divisors(c) if out % g == 0])))


def _transposed(draw, d, x):
    c, h, w = _shape(d, x)
    out = draw(st.integers(1, 12))
    axes = []
    for n in (h, w):
        k, dil = draw(st.integers(1, 4)), draw(st.integers(1, 2))
        s = draw(st.integers(1, 3)) if n * 3 <= MAX_SIDE else 1
        op = draw(st.integers(0, max(s, dil) - 1))
        p = draw(st.integers(0, ((n - 1) * s + dil * (k - 1) + op) // 2))  # keeps the output size ≥ 1
        axes.append((k, s, p, op, dil))
    (kh, sh, ph, oph, dh), (kw, sw, pw, opw, dw) = axes
    return d.add("ConvTranspose2d", x, out_channels=out, kernel=_pair(kh, kw), stride=_pair(sh, sw),
                 padding=_pair(ph, pw), output_padding=_pair(oph, opw), dilation=_pair(dh, dw),
                 groups=draw(st.sampled_from([g for g in _divisors(c) if out % g == 0])))


def _pool(draw, d, x):
    _, h, w = _shape(d, x)
    axes = []
    for n in (h, w):
        p = draw(st.integers(0, 2))
        k = draw(st.integers(max(1, 2 * p), max(max(1, 2 * p), min(4, n + 2 * p))))
        axes.append((k, p, draw(st.integers(1, 3))))
    (kh, ph, sh), (kw, pw, sw) = axes
    return d.add(draw(st.sampled_from(["MaxPool2d", "AvgPool2d"])), x, kernel=_pair(kh, kw),
                 padding=_pair(ph, pw), stride=_pair(sh, sw), ceil_mode=draw(st.booleans()))


def _adaptive(draw, d, x):
    return d.add("AdaptiveAvgPool2d", x, output=_pair(draw(st.integers(1, 3)), draw(st.integers(1, 3))))


def _upsample(draw, d, x):
    _, h, w = _shape(d, x)
    top = max(1, min(3, MAX_SIDE // max(h, w)))
    return d.add("Upsample", x, scale=draw(st.integers(1, top)), mode=draw(st.sampled_from(["nearest", "bilinear"])))


def _norm(draw, d, x):
    return d.add("BatchNorm2d", x, affine=draw(st.booleans()))


def _elementwise(draw, d, x):
    kind = draw(st.sampled_from(ACTIVATIONS + ("Dropout", "Identity", "Softmax")))
    return d.add(kind, x)


def _gate(draw, d, x):
    """A squeeze-and-excite gate: global pool → 1×1 → sigmoid, multiplied back onto ``x``."""
    c = _shape(d, x)[0]
    g = d.add("Sigmoid", d.add("Pointwise", d.add("AdaptiveAvgPool2d", x), out_channels=c))
    return d.add("Multiply", *((x, g) if draw(st.booleans()) else (g, x)))


def _head(draw, d, x):
    if draw(st.booleans()):
        x = d.add("AdaptiveAvgPool2d", x)
    x = d.add("Flatten", x)
    return _linear(draw, d, x)


def _linear(draw, d, x):
    features = _shape(d, x)[0]
    return d.add("Linear", x, out_features=draw(st.integers(1, 32)), bias=draw(st.booleans()),
                 in_features=draw(st.sampled_from([0, features])))


def _add(draw, d, x, pool):
    same = [y for y in pool if _shape(d, y) == _shape(d, x)]
    n = draw(st.integers(2, 3))
    return d.add("Add", x, *draw(st.lists(st.sampled_from(same), min_size=n - 1, max_size=n - 1)), inputs=n)


def _concat(draw, d, x, pool):
    sx = _shape(d, x)
    fits = [y for y in pool if len(_shape(d, y)) == len(sx) and _shape(d, y)[1:] == sx[1:]]
    n = draw(st.integers(2, 3))
    return d.add("Concat", x, *draw(st.lists(st.sampled_from(fits), min_size=n - 1, max_size=n - 1)), inputs=n)


def _use_motif(draw, d, x):
    names = sorted(d.motifs)
    if not names:
        return _elementwise(draw, d, x)
    name = draw(st.sampled_from(names))
    if name == "residual":  # keeps the shape when its ``out`` is the input's channels, so it may repeat
        return d.use(name, x, repeat=draw(st.integers(1, 3)), width=draw(st.integers(1, 8)), out=_shape(d, x)[0])
    return d.use(name, x, width=draw(st.integers(1, 8)))


def _define_motifs(draw, d: Design) -> None:
    if draw(st.booleans()):
        m = d.motif("residual", width=draw(st.integers(1, 8)), out=draw(st.integers(1, 8)))
        i = m.input()
        y = m.add("ReLU", m.add("Pointwise", i, out_channels={"param": "width"}, bias=False))
        y = m.add("Conv2d", y, out_channels={"param": "width"}, kernel=3, padding=1)
        y = m.add("Pointwise", y, out_channels={"param": "out"})
        m.add("Output", m.add("Add", y, i))
    if draw(st.booleans()):
        m = d.motif("down", width=draw(st.integers(1, 8)))
        y = m.add("Conv2d", m.input(), out_channels={"param": "width"}, kernel=3, stride=2, padding=1, bias=False)
        m.add("Output", m.add("ReLU", m.add("BatchNorm2d", y)))


MAP_STEPS = (_conv, _depthwise, _pointwise, _transposed, _pool, _adaptive, _upsample, _norm, _gate, _head, _use_motif)
ANY_STEPS = (_elementwise,)
JOIN_STEPS = (_add, _concat)


@st.composite
def designs(draw, max_steps: int = 10) -> Design:
    """A random design, valid by construction, ending every loose branch in an Output."""
    d = Design("random", batch=draw(st.integers(1, 4)), dtype=draw(st.sampled_from(sorted(DTYPES))))
    _define_motifs(draw, d)
    pool = [d.input(draw(st.integers(1, 16)), draw(st.integers(1, 24)), draw(st.integers(1, 24)))]
    for _ in range(draw(st.integers(1, max_steps))):
        x = draw(st.sampled_from(pool))
        is_map = len(_shape(d, x)) == 3
        step = draw(st.sampled_from((MAP_STEPS if is_map else (_linear,)) + ANY_STEPS + JOIN_STEPS))
        pool.append(step(draw, d, x, pool) if step in JOIN_STEPS else step(draw, d, x))
    for x in pool:
        if not d.out_wires[x]:
            d.add("Output", x)
    return d


def _check_sound(d: Design) -> list:
    """Inference runs; an error-free design has every result, sizes ≥ 1 and totals ≥ 0."""
    found = d.findings()
    t = d.ledger().totals
    if not any(f.severity == ERROR for f in found):
        for bid in d.blocks:
            r = d.analysis().result(bid)
            assert r is not None, d.blocks[bid]
            assert all(size >= 1 for shape in r.outs for size in shape), (d.blocks[bid], r.outs)
        assert min(t.weights, t.buffers, t.macs, t.other, t.peak_memory, t.weight_bytes) >= 0
    return found


@settings(max_examples=examples(150))
@given(designs())
def test_valid_designs_have_no_errors(d):
    found = _check_sound(d)
    assert [f for f in found if f.severity == ERROR] == []


# ----- random edits ---------------------------------------------------------------------------


def _value(draw, spec, motif_names):
    t, lo = spec.type, int(spec.minimum or 0)
    if t == "bool":
        return draw(st.booleans())
    if t == "float":
        return draw(st.floats(spec.minimum, spec.maximum, allow_nan=False))
    if t == "choice":
        return draw(st.sampled_from(spec.choices))
    if t == "text":
        return draw(st.sampled_from(motif_names + ["not-defined"]))
    if t == "int":
        return draw(st.integers(lo, min(int(spec.maximum), lo + 16)))
    single = st.integers(lo, 4)
    options = [single, st.lists(single, min_size=2, max_size=2)] + ([st.just("same")] if t == "padding" else [])
    return draw(st.one_of(options))


def _keys(b) -> list[str]:
    """The settings of block ``b`` an edit may change (for a motif instance, also its parameters)."""
    kind = KINDS[b.kind]
    return list(kind.settings_by_key) + [k for k in b.settings if k not in kind.settings_by_key]


def _settable(d: Design) -> dict[str, list[str]]:
    """Graph key → ids of its blocks that have settings (graphs with none left out)."""
    found = {key: sorted(b.id for b in d.graph(key).blocks.values() if _keys(b)) for key in [""] + sorted(d.motifs)}
    return {key: ids for key, ids in found.items() if ids}


def _settings_change(draw, d: Design, graph: str) -> tuple[str, dict]:
    b = d.graph(graph).blocks[draw(st.sampled_from(_settable(d)[graph]))]
    kind = KINDS[b.kind]
    keys = _keys(b)
    changes = {}
    for key in draw(st.lists(st.sampled_from(keys), min_size=1, max_size=2, unique=True)):
        spec = kind.settings_by_key.get(key)
        changes[key] = _value(draw, spec, sorted(d.motifs)) if spec else draw(st.integers(0, 8))
    return b.id, changes


def settings_edit(draw, d: Design) -> edits.Edit:
    graph = draw(st.sampled_from(sorted(_settable(d))))
    bid, changes = _settings_change(draw, d, graph)
    return edits.set_settings(d, bid, changes, graph=graph)


def _any_block(draw, g) -> str:
    return draw(st.sampled_from(sorted(g.blocks)))


def add_edit(draw, d: Design) -> edits.Edit:
    # Unmapped comes only from import, its traced shapes and input count set together
    kind = draw(st.sampled_from(sorted(set(KINDS) - {"Input", "Motif", "Unmapped"})))
    edit, _ = edits.add_block(d, kind, {}, inputs=[(_any_block(draw, d), 0)])
    return edit


def connect_edit(draw, d: Design) -> edits.Edit:
    wire = Wire(_any_block(draw, d), draw(st.integers(0, 1)), _any_block(draw, d), draw(st.integers(0, 2)))
    assume(wire not in d.wires)
    return edits.connect(d, wire)  # may close a loop: that is a finding, not a failure


def rename_edit(draw, d: Design) -> edits.Edit:
    return edits.rename(d, _any_block(draw, d), draw(st.text(min_size=1, max_size=8)))


def move_edit(draw, d: Design) -> edits.Edit:
    coords = st.floats(-1e4, 1e4, allow_nan=False)
    ids = draw(st.lists(st.sampled_from(sorted(d.blocks)), min_size=1, max_size=3, unique=True))
    return edits.move(d, {b: (draw(coords), draw(coords)) for b in ids})


def field_edit(draw, d: Design) -> edits.Edit:
    name = draw(st.sampled_from(["batch", "dtype", "notes", "name"]))
    value = {"batch": st.integers(1, 64), "dtype": st.sampled_from(sorted(DTYPES))}.get(name, st.text(max_size=12))
    return edits.Edit(f"Set {name}", (edits.SetField(name, draw(value)),))


def remove_edit(draw, d: Design) -> edits.Edit:
    return edits.remove_blocks(d, draw(st.lists(st.sampled_from(sorted(d.blocks)), min_size=1, max_size=3)))


def disconnect_edit(draw, d: Design) -> edits.Edit:
    return edits.disconnect(d, draw(st.sampled_from(list(d.wires))))


def insert_edit(draw, d: Design) -> edits.Edit:
    kind = draw(st.sampled_from(ACTIVATIONS + ("BatchNorm2d", "Identity", "Pointwise")))
    return edits.insert_on_wire(d, draw(st.sampled_from(list(d.wires))), [(kind, {})])


def _has_blocks(d: Design) -> bool:
    return bool(d.blocks)


USABLE = {settings_edit: lambda d: bool(_settable(d)), add_edit: _has_blocks, connect_edit: _has_blocks,
          rename_edit: _has_blocks, move_edit: _has_blocks, field_edit: lambda d: True, remove_edit: _has_blocks,
          disconnect_edit: lambda d: bool(d.wires), insert_edit: lambda d: bool(d.wires)}
"""When each edit maker can draw an edit: none samples from an empty collection."""


def draw_edit(draw, d: Design, makers) -> edits.Edit:
    """An edit from one of ``makers`` that can act on ``d`` as it is now (``field_edit`` always can)."""
    return draw(st.sampled_from([m for m in makers if USABLE[m](d)] or [field_edit]))(draw, d)


KEEPING_ORDER = (settings_edit, add_edit, connect_edit, rename_edit, move_edit, field_edit)
REMOVING = (remove_edit, disconnect_edit, insert_edit)
RESHAPING = (add_edit, connect_edit, move_edit, field_edit) + REMOVING  # every edit but renames


def _totals(d: Design):
    return d.ledger().totals, d.findings()


def _edit_and_undo(data, d: Design, makers) -> None:
    before_text, before_costs = fileformat.dumps(d), _totals(d)
    edit = draw_edit(data.draw, d, makers)
    inverse = d.apply(edit)
    _check_sound(d)
    d.apply(inverse)
    assert _totals(d) == before_costs
    assert fileformat.dumps(d) == before_text


@settings(max_examples=examples(150))
@given(designs(max_steps=6), st.data())
def test_edit_then_inverse_restores_file(d, data):
    _edit_and_undo(data, d, KEEPING_ORDER)


@settings(max_examples=examples(100))
@given(designs(max_steps=6), st.data())
def test_removal_then_inverse_restores_file(d, data):
    """Undoing a removal puts blocks and wires back where they were, so the file is the same."""
    _edit_and_undo(data, d, REMOVING)


def _snapshot(d: Design):
    a = d.analysis()
    ledger = d.ledger()
    return (list(a.order), {bid: a.result(bid) for bid in d.blocks}, a.all_findings(), ledger.totals,
            ledger.rows, list(ledger.live))


@settings(max_examples=examples(150))
@given(designs(max_steps=8), st.data())
def test_incremental_equals_fresh_load(d, data):
    d.ledger()  # results exist before the edits, so what follows is incremental
    for _ in range(data.draw(st.integers(1, 6))):
        d.apply(draw_edit(data.draw, d, (settings_edit,) * 4 + RESHAPING))
        if data.draw(st.booleans()):
            _check_sound(d)
    fresh = fileformat.parse(fileformat.dumps(d))
    assert _snapshot(d) == _snapshot(fresh)


@settings(max_examples=examples(50))
@given(designs(max_steps=6), st.data())
def test_findings_follow_renames(d, data):
    """Finding messages name blocks; after a rename they name the new name, as a fresh load does."""
    d.apply(connect_edit(data.draw, d))  # often adds a finding (a loop, a second wire on a port)
    d.findings()
    named = sorted({f.block for f in d.findings() if f.block in d.blocks}) or sorted(d.blocks)
    d.apply(edits.rename(d, data.draw(st.sampled_from(named)), data.draw(st.text(min_size=1, max_size=8))))
    assert d.findings() == fileformat.parse(fileformat.dumps(d)).findings()


# ----- broken files ----------------------------------------------------------------------------


def _base_designs() -> list[dict]:
    plain = Design("base-plain", batch=2)
    x = plain.input(3, 16, 16)
    y = plain.add("Conv2d", x, out_channels=8, kernel=3, stride=2, padding=1, name="conv_1")
    y = plain.add("Add", y, plain.add("Depthwise", y, kernel=[3, 1], padding=[1, 0]))
    plain.add("Output", plain.add("Linear", plain.add("Flatten", plain.add("AdaptiveAvgPool2d", y)), out_features=5))
    with_motif = Design("base-motif", dtype="fp16", notes="two\nlines")
    m = with_motif.motif("pair", width=4)
    m.add("Output", m.add("Pointwise", m.input(), out_channels={"param": "width"}))
    x = with_motif.input(4, 8, 8)
    with_motif.add("Output", with_motif.use("pair", x, repeat=2, width=4))
    return [json.loads(fileformat.dumps(d)) for d in (plain, with_motif)]


BASES = _base_designs()
DEEP = "\u2063deep\u2063"  # a marker string replaced by deep nesting after json.dumps


def _paths(node, prefix=()):
    yield prefix
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from _paths(v, prefix + (i,))


PATHS = [list(_paths(b))[1:] for b in BASES]

junk = st.one_of(st.none(), st.booleans(), st.integers(-(2 ** 70), 2 ** 70), st.integers(-3, 3),
                 st.floats(allow_nan=True, allow_infinity=True), st.text(max_size=6),
                 st.lists(st.integers(-2, 5), max_size=3), st.dictionaries(st.text(max_size=3), st.integers(), max_size=2),
                 st.just({"param": "width"}), st.just(DEEP))


def _get(data, path):
    for step in path:
        data = data[step]
    return data


@st.composite
def broken_texts(draw) -> str:
    i = draw(st.integers(0, len(BASES) - 1))
    data = json.loads(json.dumps(BASES[i]))
    how = draw(st.sampled_from(["delete", "replace", "replace", "integral_float", "version", "kind", "setting",
                                "wire", "duplicate_id", "extra_key", "truncate", "bytes"]))
    if how == "bytes":
        return draw(st.binary(max_size=64)).decode("latin-1")
    path = draw(st.sampled_from(PATHS[i]))
    parent, key = _get(data, path[:-1]), path[-1]
    blocks = data["blocks"]
    if how == "delete":
        del parent[key]
    elif how == "replace":
        parent[key] = draw(junk)
    elif how == "integral_float":
        ints = [p for p in PATHS[i] if type(_get(data, p)) is int]
        p = draw(st.sampled_from(ints))
        _get(data, p[:-1])[p[-1]] = float(_get(data, p))
    elif how == "version":
        data["version"] = draw(st.one_of(st.integers(-1, 3), junk))
    elif how == "kind":
        draw(st.sampled_from(blocks))["kind"] = draw(st.one_of(st.text(max_size=8), st.sampled_from(sorted(KINDS))))
    elif how == "setting":
        b = draw(st.sampled_from(blocks))
        spec = draw(st.sampled_from(list(KINDS[b["kind"]].settings) or [None]))
        if spec is not None:
            b["settings"][spec.key] = draw(st.one_of(st.integers(-5, 2 ** 40), junk))
    elif how == "wire":
        wire = draw(st.sampled_from(data["wires"]))
        end = wire[draw(st.sampled_from(["from", "to"]))]
        end[draw(st.integers(0, 1))] = draw(st.one_of(st.text(max_size=4), st.integers(-1, 70), junk))
    elif how == "duplicate_id":
        draw(st.sampled_from(blocks))["id"] = draw(st.sampled_from(blocks))["id"]
    elif how == "extra_key":
        draw(st.sampled_from([data] + blocks))[draw(st.text(max_size=5))] = draw(junk)
    text = json.dumps(data, ensure_ascii=draw(st.booleans()))
    if DEEP in text:
        depth = draw(st.sampled_from([3, 500, 5000]))
        text = text.replace(json.dumps(DEEP), "[" * depth + "]" * depth, 1)
    if how == "truncate":
        text = text[: draw(st.integers(0, len(text) - 1))]
    return text


@settings(max_examples=max(2000, examples(2000)), suppress_health_check=[HealthCheck.too_slow])
@given(broken_texts())
def test_broken_files_raise_loom_file_error_only(text):
    try:
        d = fileformat.parse(text, "fuzz.loom")
    except fileformat.LoomFileError as e:
        assert str(e).startswith("fuzz.loom: ")
        return
    # it loaded: then it is a sound design that saves and loads again to the same file
    _check_sound(d)
    saved = fileformat.dumps(d)
    assert fileformat.dumps(fileformat.parse(saved)) == saved
