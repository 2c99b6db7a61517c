"""The ``.loom`` file format: JSON described by ``resources/loom.schema.json``.

Reading never evaluates anything; a broken file raises :class:`LoomFileError` whose message names
the file, the place inside it (``blocks[3] (conv_2) settings.stride``) and the offending value.
Writing is atomic (:mod:`layerloom.core.atomic_write`).
"""
from __future__ import annotations

import json
import os
from pathlib import Path
from typing import Any

from layerloom.core import edits
from layerloom.core.atomic_write import write_atomically
from layerloom.core.budget import check_budget
from layerloom.core.design import Design
from layerloom.core.graph import Block, Wire
from layerloom.core.json_text import layout
from layerloom.core.measurement import Measurement
from layerloom.core.schema_check import first_error
from layerloom.core.settings import SettingError
from layerloom.core.targets import Target
from layerloom.core.values import POSITION_LIMIT, JsonReader, bad_value, label, quote
from layerloom.core.layout import tidy_positions

FORMAT, VERSION = "layerloom-design", 1
_wire = tuple.__new__  # a Wire from checked values without NamedTuple's keyword handling (one per wire read)


class LoomFileError(ValueError):
    """A design file that cannot be read: the message names the file and the place inside it."""


def _reject_constant(name: str):
    raise ValueError(f"{name} is not allowed in a design file")


def parse(text: str, source: str = "<text>") -> Design:
    """Build a :class:`Design` from the text of a ``.loom`` file."""
    data = decode(text, source)
    validate(data, source)
    try:
        return _build(data)
    except (SettingError, edits.EditError, ValueError, KeyError) as e:
        raise LoomFileError(f"{source}: {e}") from None
    except OverflowError:  # a whole number too large for a float where one is needed
        raise LoomFileError(f"{source}: a number is too large to count with") from None


def decode(text: str, source: str = "<text>") -> dict:
    """The JSON object of a design file's text: refuses what is not JSON, values a design cannot
    hold (infinity, lone surrogates) and another format or version."""
    try:
        reader = JsonReader()
        data = reader.loads(text, parse_constant=_reject_constant)
    except json.JSONDecodeError as e:
        raise LoomFileError(f"{source}: not valid JSON at line {e.lineno}, column {e.colno}: {e.msg}") from None
    except (ValueError, RecursionError) as e:
        raise LoomFileError(f"{source}: not a design file: {e}") from None
    if not isinstance(data, dict):
        raise LoomFileError(f"{source}: a design file holds a JSON object, not {type(data).__name__}")
    bad = bad_value(data) if reader.suspect(text) else None
    if bad is not None:
        raise LoomFileError(f"{source}: {_place(data, bad[0])}: {bad[1]}")
    if data.get("format") != FORMAT:
        raise LoomFileError(f"{source}: not a Layerloom design (format is {quote(data.get('format'))}, "
                            f"expected {FORMAT!r})")
    if data.get("version") != VERSION:
        raise LoomFileError(f"{source}: design format version {quote(data.get('version'))} is not supported "
                            f"(this Layerloom reads version {VERSION})")
    return data


def validate(data: dict, source: str = "<text>") -> None:
    """Check decoded ``data`` against the format's JSON Schema; LoomFileError naming the first broken place."""
    try:
        error = first_error(data)
    except RecursionError:
        raise LoomFileError(f"{source}: nested too deeply to be a design file") from None
    if error is not None:
        raise LoomFileError(f"{source}: {_place(data, error[0])}: {_shorten(error[1], _at(data, error[0]))}")


def load(path: str | os.PathLike) -> Design:
    """Read a ``.loom`` file; raises :class:`LoomFileError` naming the place of any problem."""
    path = Path(path)
    try:
        text = path.read_bytes().decode("utf-8")
    except OSError as e:
        raise LoomFileError(f"{path}: cannot read: {e.strerror or e}") from None
    except UnicodeDecodeError as e:
        raise LoomFileError(f"{path}: not UTF-8 text (byte {e.start})") from None
    return parse(text, str(path))


def _shorten(message: str, instance: Any) -> str:
    """The validator's message, with the offending value quoted short (it may be megabytes long)."""
    if len(message) > 200:
        whole = repr(instance)
        message = message.replace(whole, quote(instance)) if whole in message else quote(message, 200)
    return message


def _at(data: Any, path: list) -> Any:
    """The value at ``path`` inside ``data``."""
    for step in path:
        data = data[step]
    return data


def _place(data: Any, path: list) -> str:
    """``['blocks', 3, 'settings', 'stride']`` → ``blocks[3] (conv_2) settings.stride``."""
    out, node = "", data
    for step in path:
        if isinstance(step, int):
            out += f"[{step}]"
            node = node[step] if isinstance(node, list) and step < len(node) else None
            if isinstance(node, dict) and isinstance(node.get("name"), str):
                out += f" ({label(node['name'])})"
        else:
            out += ("." if out and not out.endswith(")") else (" " if out else "")) + str(step)
            node = node.get(step) if isinstance(node, dict) else None
    return out or "the top level"


def _build(data: dict) -> Design:
    # JSON Schema counts 2.0 as an integer; whole numbers are stored as int from here on
    design = Design(data.get("name", "untitled"), int(data.get("batch", 1)), data.get("dtype", "fp32"),
                    data.get("notes", ""))
    design.budget = check_budget(data.get("budget", {}))
    if "target" in data:
        try:
            design.target = Target.from_data(data["target"])
        except ValueError as e:
            raise LoomFileError(f"target: {e}") from None
    design.baseline = data.get("baseline")
    if "measurement" in data:
        design.measurement = Measurement.from_data(data["measurement"])
    lengths = {k: len(v) for k, v in (design.baseline or {}).get("blocks", {}).items()}
    if len(set(lengths.values())) > 1:
        raise LoomFileError(f"baseline.blocks: the lists differ in length ({lengths})")
    motifs = data.get("motifs", [])
    ops: list = []
    seen = set()
    for i, m in enumerate(motifs):
        if m["name"] in seen:
            raise LoomFileError(f"motifs[{i}]: motif name {quote(m['name'])} is used twice")
        seen.add(m["name"])
        ops.append(edits.AddMotif(m["name"], {k: int(v) for k, v in m.get("params", {}).items()}))
    design.apply(edits.Edit("Load", tuple(ops)))
    with design.bulk():
        for i, m in enumerate(motifs):
            _fill(design, m["name"], m["blocks"], m["wires"], f"motifs[{i}] ({label(m['name'])}) ")
        _fill(design, "", data["blocks"], data["wires"], "")
    for m in motifs:
        _place_unplaced(design, design.motifs[m["name"]], m["blocks"])
    _place_unplaced(design, design, data["blocks"])
    return design


def _place_unplaced(design: Design, graph, blocks: list) -> None:
    """A graph none of whose blocks has a saved position is laid out by Tidy (stage rows, folded)."""
    if blocks and not any("position" in b for b in blocks):
        design.apply(edits.move(graph, tidy_positions(graph)))


def _fill(design: Design, graph: str, blocks: list, wires: list, where: str) -> None:
    def place(i: int) -> str:
        name = blocks[i].get("name")
        return f"{where}blocks[{i}]" + (f" ({label(name)})" if name else "")

    made: dict[str, Block] = {}
    checked: dict[tuple, dict] = {}  # (kind, settings as written) → checked settings: most repeat
    for i, b in enumerate(blocks):
        bid, kind, written = b["id"], b["kind"], b.get("settings", {})
        if bid in made:
            raise LoomFileError(f"{place(i)}: block id {quote(bid)} is used twice")
        try:
            key = (kind, tuple(written.items()))
            settings = checked.get(key)
        except TypeError:  # a pair written [h, w] or a parameter reference: not hashable
            key = settings = None
        if settings is None:
            try:
                settings = edits.check_settings(design, kind, written, graph)
            except (SettingError, edits.EditError) as e:
                raise LoomFileError(f"{place(i)}: {e}") from None
            if key is not None:
                checked[key] = settings
        x, y = position = b.get("position", (0.0, 0.0))
        if not (-POSITION_LIMIT <= x <= POSITION_LIMIT and -POSITION_LIMIT <= y <= POSITION_LIMIT):
            raise LoomFileError(f"{place(i)}: position {quote(position)} lies beyond ±{POSITION_LIMIT:g} on the canvas")
        made[bid] = Block(bid, kind, b.get("name", bid), dict(settings), (x, y))
    seen: dict[Wire, None] = {}
    for i, w in enumerate(wires):
        (src, sp), (dst, dp) = w["from"], w["to"]
        if src not in made or dst not in made:
            end, bid = ("from", src) if src not in made else ("to", dst)
            raise LoomFileError(f"{where}wires[{i}].{end}: there is no block with id {quote(bid)}")
        wire = _wire(Wire, (src, sp if type(sp) is int else int(sp), dst, dp if type(dp) is int else int(dp)))
        if wire in seen:
            raise LoomFileError(f"{where}wires[{i}]: the same wire appears twice")
        seen[wire] = None
    design.fill(graph, made, seen)


def to_data(design: Design) -> dict:
    """The JSON-ready dictionary of a design (what :func:`save` writes)."""
    def blocks(g):
        return [{"id": b.id, "kind": b.kind, "name": b.name, "settings": b.settings, "position": list(b.position)}
                for b in g.blocks.values()]

    def wires(g):
        rank = {b: i for i, b in enumerate(g.blocks)}
        ordered = sorted(g.wires, key=lambda w: (rank[w.dst], w.dst_port, rank[w.src], w.src_port))
        return [{"from": [w.src, w.src_port], "to": [w.dst, w.dst_port]} for w in ordered]

    data: dict[str, Any] = {"format": FORMAT, "version": VERSION, "name": design.name, "batch": design.batch,
                            "dtype": design.dtype, "notes": design.notes}
    if design.budget:
        data["budget"] = check_budget(design.budget)  # written as it reads back (a latency limit as a float)
    if design.target is not None:
        data["target"] = design.target.to_data()
    if design.baseline is not None:
        data["baseline"] = design.baseline
    if design.measurement is not None:
        data["measurement"] = design.measurement.to_data()
    if design.motifs:
        data["motifs"] = [{"name": m.name, "params": m.params, "blocks": blocks(m), "wires": wires(m)}
                          for m in design.motifs.values()]
    data["blocks"] = blocks(design)
    data["wires"] = wires(design)
    return data


def copy(design: Design) -> Design:
    """An independent copy of ``design`` (everything the file holds)."""
    return _build(to_data(design))


def dumps(design: Design) -> str:
    """The text of a ``.loom`` file: one field per line, and one line per block, wire and motif field,
    so a change to a block is a change to its line (:mod:`layerloom.core.json_text`)."""
    return layout(to_data(design), ("blocks", "wires", "motifs"), nested=("motifs",)) + "\n"


def save(design: Design, path: str | os.PathLike) -> None:
    """Write ``design`` to ``path`` atomically (:mod:`layerloom.core.atomic_write`: an interrupted
    save leaves the old file intact; mode and symbolic links are kept). Raises OSError, or
    UnicodeEncodeError for text that is not valid (before anything is written)."""
    write_atomically(path, dumps(design).encode("utf-8"))
