"""Edits that turn blocks into a motif and back, and that expose settings as motif parameters.

- :func:`make_motif` moves a selection of blocks into a new motif and leaves one instance in their
  place; each distinct outside output feeding the selection becomes an input port, each inside
  output used outside becomes an output port.
- :func:`expand` dissolves one instance into plain blocks (``repeat`` copies in series), with
  parameter values written into the settings, in the instance's place in the block order (which
  breaks ties in depth order, so the figures stay the same).
- :func:`expose` turns one setting of a block inside a motif into a parameter (its current value
  becomes the default, so nothing changes until an instance sets it).

Each returns an :class:`~layerloom.core.edits.Edit`, so the editor can undo it in one step.
"""
from __future__ import annotations

from layerloom.core import edits
from layerloom.core.edits import AddBlock, AddMotif, AddWire, Edit, EditError, SetBlock, SetMotifParams
from layerloom.core.graph import Wire
from layerloom.core.values import quote

PORT_KINDS = ("Input", "Output")


def _fresh_motif_name(design, stem: str, taken=None) -> str:
    taken = design.motifs if taken is None else taken
    name, n = stem, 1
    while name in taken:
        n += 1
        name = f"{stem}_{n}"
    return name


def make_motif(design, block_ids, name: str | None = None, graph: str = "") -> tuple[Edit, str]:
    """An edit replacing ``block_ids`` of ``graph`` by one instance of a new motif; and the instance id."""
    g = design.graph(graph)
    chosen = [b for b in g.blocks if b in set(block_ids)]  # in the graph's order
    if not chosen:
        raise EditError("select the blocks to make a motif from")
    ports = [g.blocks[b].name for b in chosen if g.blocks[b].kind in PORT_KINDS]
    if ports:
        raise EditError(f"Input and Output blocks stay outside a motif: {', '.join(ports)}")
    inside = set(chosen)
    name = name or _fresh_motif_name(design, "motif")
    if name in design.motifs:
        raise EditError(f"there is already a motif named {quote(name)}")
    wires_in = [w for w in g.wires if w.dst in inside and w.src not in inside]
    wires_out = [w for w in g.wires if w.src in inside and w.dst not in inside]
    wires_within = [w for w in g.wires if w.src in inside and w.dst in inside]
    sources = list(dict.fromkeys((w.src, w.src_port) for w in wires_in))
    results = list(dict.fromkeys((w.src, w.src_port) for w in wires_out))
    feeding = {w.src for w in g.wires}
    results += [(b, 0) for b in chosen if b not in feeding]  # an end of the selection still hands its tensor on

    xs = [g.blocks[b].position[0] for b in chosen]
    ys = [g.blocks[b].position[1] for b in chosen]
    left, right, middle = min(xs), max(xs), (min(ys) + max(ys)) / 2
    used = _params_used(g.blocks[b] for b in chosen) if graph else []  # the new motif takes them over
    missing = [p for p in used if p not in g.params]
    if missing:
        raise EditError(f"the selection refers to {', '.join(map(repr, missing))}, which motif {quote(graph)} does not have")
    ops: list = [AddMotif(name, {p: g.params[p] for p in used})]
    taken = {b for b in chosen}
    port_ids = []
    for k, (kind, count, x) in enumerate((("Input", len(sources), left - 230.0), ("Output", len(results), right + 230.0))):
        for i in range(count):
            pid = f"{kind[:2].lower()}{i + 1}"
            while pid in taken:
                pid += "_"
            taken.add(pid)
            port_ids.append(pid)
            label = ("x" if kind == "Input" else "y") + (f"_{i + 1}" if count > 1 else "")
            ops.append(AddBlock(name, pid, kind, label, {} if kind == "Output" else _input_defaults(), (x, middle + i * 120.0)))
    in_ports, out_ports = port_ids[:len(sources)], port_ids[len(sources):]
    for b in chosen:
        blk = g.blocks[b]
        ops.append(AddBlock(name, b, blk.kind, blk.name, blk.settings, blk.position))
    ops += [AddWire(name, w) for w in wires_within]
    ops += [AddWire(name, Wire(in_ports[sources.index((w.src, w.src_port))], 0, w.dst, w.dst_port)) for w in wires_in]
    ops += [AddWire(name, Wire(src, port, out_ports[i], 0)) for i, (src, port) in enumerate(results)]

    passed = {p: {"param": p} for p in used}
    instance_edit, instance = edits.add_block(design, "Motif", {"motif": name, "repeat": 1, **passed}, graph=graph,
                                              name=g.fresh_name(name), position=(sum(xs) / len(xs), middle))
    first = list(g.blocks).index(chosen[0])  # the use takes the place of the first block in the block order
    placed = [instance_edit.ops[0]._replace(index=first), *instance_edit.ops[1:]]
    ops += list(edits.remove_blocks(g, chosen).ops) + placed
    ops += [AddWire(graph, Wire(src, port, instance, k)) for k, (src, port) in enumerate(sources)]
    ops += [AddWire(graph, Wire(instance, results.index((w.src, w.src_port)), w.dst, w.dst_port)) for w in wires_out]
    return Edit(f"Make motif {name}", tuple(ops)), instance


def _params_used(blocks) -> list[str]:
    """Motif parameters the settings of ``blocks`` refer to, in order of first use."""
    return list(dict.fromkeys(v["param"] for b in blocks for v in b.settings.values() if isinstance(v, dict)))


def _input_defaults() -> dict:
    from layerloom.core.kinds import KINDS

    return dict(KINDS["Input"].defaults)


def expand(design, instance_id: str, graph: str = "") -> Edit:
    """An edit dissolving one motif instance into plain blocks (its repeats chained in series)."""
    g = design.graph(graph)
    inst = g.blocks.get(instance_id)
    if inst is None or inst.kind != "Motif":
        raise EditError(f"{quote(instance_id)} is not a motif instance")
    motif = design.motifs.get(inst.settings["motif"])
    if motif is None:
        raise EditError(f"{inst.name} uses motif {quote(inst.settings['motif'])}, which this design does not define")
    params = {**motif.params, **{k: v for k, v in inst.settings.items() if k not in ("motif", "repeat")}}
    in_ids, out_ids = motif.ports()
    repeat = inst.settings["repeat"]
    if isinstance(repeat, dict):  # each use of the enclosing motif may give it another value
        raise EditError(f"{inst.name}'s repeat is motif parameter {quote(repeat['param'])}, so its number of copies "
                        f"is not known here; set repeat to a number to expand it")
    if repeat > 1 and len(in_ids) != len(out_ids):
        raise EditError(f"{inst.name} repeats motif {quote(motif.name)} ×{repeat} but the motif has {len(in_ids)} input "
                        f"and {len(out_ids)} output ports, so its copies cannot be chained; set repeat to 1 first")
    feeds = {w.dst_port: (w.src, w.src_port) for w in g.in_wires[instance_id]}
    current = [feeds.get(k) for k in range(len(in_ids))]
    x0, y0 = inst.position
    inner = [b for b in motif.blocks.values() if b.kind not in PORT_KINDS]
    span = (max((b.position[0] for b in inner), default=0) - min((b.position[0] for b in inner), default=0)) + 230.0
    left = min((b.position[0] for b in inner), default=0)
    ops: list = list(edits.remove_blocks(g, [instance_id]).ops)
    names = {b.name for b in g.blocks.values() if b.id != instance_id}
    place = list(g.blocks).index(instance_id)  # the blocks take the use's place in the block order
    for r in range(repeat):
        ids = {}
        for b in inner:
            bid = g.fresh_id()
            ids[b.id] = bid
            base = f"{inst.name}_{b.name}" + (f"_{r + 1}" if repeat > 1 else "")
            name = base if base not in names else g.fresh_name(base, names)
            names.add(name)
            pos = (x0 + (b.position[0] - left) + r * span, y0 + b.position[1])
            ops.append(AddBlock(graph, bid, b.kind, name, _written(design, motif, b, params, graph), pos, place))
            place += 1

        def outer(src: str, port: int, dst: str):
            if src in in_ids:
                return current[in_ids.index(src)]
            if src not in ids:
                raise EditError(f"cannot expand {inst.name}: inside motif {quote(motif.name)}, {motif.blocks[dst].name} "
                                f"is wired from the output port {motif.blocks[src].name}; remove that wire first")
            return ids[src], port

        for w in motif.wires:
            if w.dst in ids:
                src = outer(w.src, w.src_port, w.dst)
                if src is not None:
                    ops.append(AddWire(graph, Wire(src[0], src[1], ids[w.dst], w.dst_port)))
        current = [outer(motif.in_wires[o][0].src, motif.in_wires[o][0].src_port, o) if motif.in_wires[o] else None
                   for o in out_ids]
    for w in g.out_wires[instance_id]:
        src = current[w.src_port] if w.src_port < len(current) else None
        if src is not None:
            ops.append(AddWire(graph, Wire(src[0], src[1], w.dst, w.dst_port)))
    return Edit(f"Expand {inst.name}", tuple(ops))


def _written(design, motif, block, params: dict, graph: str) -> dict:
    """``block``'s settings with the instance's parameter values written in, checked for ``graph``."""
    try:
        settings = {k: params[v["param"]] if isinstance(v, dict) else v for k, v in block.settings.items()}
        return edits.check_settings(design, block.kind, settings, graph)
    except KeyError as e:
        raise EditError(f"{block.name} in motif {quote(motif.name)} refers to parameter {e}, which the motif does not have") from None
    except ValueError as e:
        raise EditError(f"{block.name} in motif {quote(motif.name)}: {e}") from None


def expose(design, motif_name: str, block_id: str, key: str, param: str) -> Edit:
    """An edit making setting ``key`` of ``block_id`` in motif ``motif_name`` the parameter ``param``."""
    motif = design.motifs[motif_name]
    blk = motif.blocks[block_id]
    value = blk.settings.get(key)
    if isinstance(value, dict):
        raise EditError(f"{blk.name}'s {key} is already the parameter {quote(value['param'])}")
    if not isinstance(value, int) or isinstance(value, bool):
        raise EditError(f"only whole-number settings can be motif parameters; {blk.name}'s {key} is {quote(value)}")
    if not param.isidentifier():
        raise EditError(f"a parameter name is a word of letters, digits and _, not {quote(param)}")
    if param in motif.params and motif.params[param] != value:
        raise EditError(f"parameter {quote(param)} already exists with default {motif.params[param]}, not {value}")
    settings = {**blk.settings, key: {"param": param}}
    return Edit(f"Expose {blk.name}'s {key} as {param}",
                (SetMotifParams(motif_name, {**motif.params, param: value}),
                 SetBlock(motif_name, block_id, "settings", settings)))

