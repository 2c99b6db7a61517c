"""Mends for a finding inside a motif, turned into edits that act on the one use the finding is in.

A mend is built inside the motif (:mod:`layerloom.core.mends`), which would change every use of
it. For the use at hand it becomes, in order of preference:

- a change of settings that are motif parameters: set those parameters on this instance;
- a change of other whole-number settings: expose each as a new parameter of the motif (its
  current value the default, so no other use changes) and set it on this instance;
- anything else: give this use its own copy of the motif (and of every motif on the way to it),
  and mend the copy.

When the motif has more than one use, the mend as built is offered too, with a text that says it
changes every use, but only when that makes no error where there was none (tried on a copy of the design).

    >>> from layerloom import Design
    >>> from layerloom.core.mends import mends_for
    >>> d = Design(); m = d.motif("unit")
    >>> i = m.input(); _ = m.add("Output", m.add("Add", m.add("Pointwise", i, out_channels=8), i))
    >>> a = d.use("unit", d.input(8, 4, 4), name="a")
    >>> _ = d.add("Output", d.use("unit", d.add("Pointwise", a, out_channels=16), name="b"))
    >>> for m in mends_for(d, d.findings()[0]): print(m.label)
    Insert a 1×1 projection to 16 channels after pw_1 (in an own copy of motif 'unit' for b)
    Set pw_1's out channels to 16 (for b only, as parameter out_channels)
"""
from __future__ import annotations

from collections import Counter

from layerloom.core import edits
from layerloom.core.findings import ERROR
from layerloom.core.settings import SettingError
from layerloom.core.values import quote


def _chain(design, finding) -> list[tuple[str, str, str]]:
    """(graph key holding the instance, instance id, motif name) from the design down to the finding."""
    out, graph, bid = [], design, finding.block
    for inner in finding.path:
        motif = design.motifs[graph.blocks[bid].settings["motif"]]
        out.append((graph.key, bid, motif.name))
        graph, bid = motif, inner
    return out


def _uses(design) -> Counter:
    """Instances of each motif, counted in the design and in every motif."""
    count: Counter = Counter()
    for g in (design, *design.motifs.values()):
        count.update(b.settings["motif"] for b in g.of_kind("Motif"))
    return count


def for_this_use(design, finding, found: list) -> list:
    """``found`` (mends built inside the motif) as mends for the use ``finding`` is in; see the module."""
    from layerloom.core.mends import Mend

    chain = _chain(design, finding)
    uses = _uses(design)
    shared = any(uses[name] > 1 for _, _, name in chain)
    outer_shared = any(uses[name] > 1 for _, _, name in chain[:-1])
    inst_names = " › ".join(design.graph(g).blocks[b].name for g, b, _ in chain)
    out = []
    for m in found:
        routed = None if outer_shared else _by_parameters(design, chain, m.edit, expose=shared)
        if routed is not None:
            edit, names = routed
            out.append(Mend(f"{m.label} (for {inst_names} only, as parameter {', '.join(names)})", edit))
        elif shared:
            out.append(Mend(f"{m.label} (in an own copy of motif {quote(chain[-1][2])} for {inst_names})",
                            _own_copy(design, chain, m.edit)))
        else:
            out.append(m)
        if shared and _no_new_errors(design, m.edit):
            out.append(Mend(f"{m.label} (changes motif {quote(chain[-1][2])} for all its {uses[chain[-1][2]]} uses)",
                            m.edit))
    return out


def _by_parameters(design, chain, edit, expose: bool):
    """The edit as parameter values set on the innermost instance (exposing plain settings as new
    parameters when ``expose``), or None when it is not such a change of whole-number settings."""
    parent, inst_id, name = chain[-1]
    if not edit.ops or not all(isinstance(op, edits.SetBlock) and op.graph == name
                                               and op.attribute == "settings" for op in edit.ops):
        return None
    motif = design.motifs[name]
    params = dict(motif.params)
    ops, values = [], {}
    for op in edit.ops:
        old = motif.blocks[op.id].settings
        settings = dict(old)
        for key, value in op.value.items():
            if old.get(key) == value:
                continue
            if not isinstance(value, int) or isinstance(value, bool) or value < 0:
                return None
            ref = old.get(key)
            if isinstance(ref, dict):
                values[ref["param"]] = value
                continue
            if not expose or not isinstance(ref, int) or isinstance(ref, bool):
                return None
            param = _fresh_param(key, params)
            params[param] = ref
            settings[key] = {"param": param}
            values[param] = value
        if settings != old:
            ops.append(edits.SetBlock(name, op.id, "settings", settings))
    if not values:
        return None
    inst = design.graph(parent).blocks[inst_id]
    if params != motif.params:
        ops.insert(0, edits.SetMotifParams(name, params))
    ops.append(edits.SetBlock(parent, inst_id, "settings", {**inst.settings, **values}))
    return edits.Edit(edit.label, tuple(ops)), sorted(values)


def _fresh_param(key: str, params: dict) -> str:
    name, n = key, 1
    while name in params:
        n += 1
        name = f"{key}_{n}"
    return name


def _own_copy(design, chain, edit) -> edits.Edit:
    """Copies of the motifs along ``chain`` for this use only, then ``edit`` applied to the innermost copy."""
    from layerloom.core.motif_ops import _fresh_motif_name

    ops: list = []
    taken = set(design.motifs)
    renamed = {}
    for graph_key, inst_id, name in chain:
        motif = design.motifs[name]
        copy = _fresh_motif_name(design, name, taken)
        taken.add(copy)
        ops.append(edits.AddMotif(copy, dict(motif.params)))
        ops += [edits.AddBlock(copy, b.id, b.kind, b.name, b.settings, b.position) for b in motif.blocks.values()]
        ops += [edits.AddWire(copy, w) for w in motif.wires]
        inst = design.graph(graph_key).blocks[inst_id]
        ops.append(edits.SetBlock(renamed.get(graph_key, graph_key), inst_id, "settings", {**inst.settings, "motif": copy}))
        renamed[name] = copy
    inner = chain[-1][2]
    ops += [op._replace(graph=renamed[inner]) if getattr(op, "graph", None) == inner else op for op in edit.ops]
    return edits.Edit(edit.label, tuple(ops))


def _no_new_errors(design, edit) -> bool:
    """True when applying ``edit`` (tried on a copy of the design) makes no error where there was none."""
    from layerloom.core import fileformat

    trial = fileformat.parse(fileformat.dumps(design))
    before = _errors(trial)
    try:
        trial.apply(edit)
    except (edits.EditError, SettingError):
        return False
    return _errors(trial) <= before


def _errors(design) -> set:
    return {(f.block, f.path, f.code) for f in design.findings() if f.severity == ERROR}
