"""Copy and paste of blocks: a selection as a JSON-ready dict, and the edit that pastes one back.

The copied dict holds the chosen blocks (kind, name, settings, position) and the wires among them;
wires to blocks left out are dropped. Pasting gives every block a fresh id, keeps its name when
free (else ``stem_n`` with the smallest free n), shifts positions by an offset, and is one edit::

    >>> from layerloom import Design
    >>> d = Design(); a = d.input(3, 32, 32); b = d.add("Pointwise", a, out_channels=8)
    >>> data = copy_blocks(d, [a, b])
    >>> edit, ids = paste_edit(d, data)
    >>> _ = d.apply(edit)
    >>> [d.blocks[i].name for i in ids], len(d.wires)
    (['input_2', 'pw_2'], 2)
"""
from __future__ import annotations

import json
import re

from layerloom.core import edits
from layerloom.core.graph import Wire
from layerloom.core.settings import SettingError
from layerloom.core.values import POSITION_LIMIT, JsonReader, bad_value, label, quote

FORMAT, VERSION = "layerloom-blocks", 1


class ClipboardError(ValueError):
    """Clipboard content that cannot be pasted; the message names the place and the value."""


def copy_blocks(graph, block_ids) -> dict:
    """The blocks ``block_ids`` of ``graph`` and the wires among them, ready for ``json.dumps``."""
    ids = [b for b in dict.fromkeys(block_ids) if b in graph.blocks]
    chosen = set(ids)
    blocks = [{"id": b.id, "kind": b.kind, "name": b.name, "settings": dict(b.settings),
               "position": [float(b.position[0]), float(b.position[1])]} for b in map(graph.blocks.get, ids)]
    wires = [list(w) for w in graph.wires if w.src in chosen and w.dst in chosen]
    return {"format": FORMAT, "version": VERSION, "blocks": blocks, "wires": wires}


def to_text(data: dict) -> str:
    return json.dumps(data, ensure_ascii=False)


def from_text(text: str) -> dict:
    """Parse clipboard text; raises :class:`ClipboardError` unless it holds copied blocks."""
    try:
        reader = JsonReader()
        data = reader.loads(text)
    except (json.JSONDecodeError, RecursionError) as e:
        raise ClipboardError(f"the clipboard does not hold Layerloom blocks (not JSON: {e})") from None
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise ClipboardError("the clipboard does not hold Layerloom blocks")
    if data.get("version") != VERSION:
        raise ClipboardError(f"copied blocks of version {quote(data.get('version'))} cannot be pasted (this reads {VERSION})")
    bad = bad_value(data) if reader.suspect(text) else None
    if bad is not None:
        raise ClipboardError(f"copied blocks: {'.'.join(map(str, bad[0]))}: {bad[1]}")
    return data


def _stem(name: str) -> str:
    return re.sub(r"_\d+$", "", name) or "block"


def paste_edit(design, data: dict, offset=(40.0, 40.0), graph: str = "") -> tuple[edits.Edit, list[str]]:
    """One edit adding the copied blocks (fresh ids, free names, shifted by ``offset``) and their
    wires to ``graph``; also returns the new block ids in the copied order."""
    g = design.graph(graph)
    blocks, wires = data.get("blocks"), data.get("wires", [])
    if not isinstance(blocks, list) or not isinstance(wires, list):
        raise ClipboardError("copied blocks: 'blocks' and 'wires' must be lists")
    taken = {b.name for b in g.blocks.values()}
    fresh: dict[str, str] = {}
    ops: list = []
    dx, dy = offset
    for i, item in enumerate(blocks):
        where = f"copied block {i + 1}"
        try:
            old_id, kind, name = str(item["id"]), item["kind"], str(item["name"])
            x, y = (float(v) for v in item["position"])
            settings = item.get("settings", {})
        except (KeyError, TypeError, ValueError, OverflowError) as e:
            raise ClipboardError(f"{where}: missing or malformed field ({e})") from None
        if not (abs(x) <= POSITION_LIMIT and abs(y) <= POSITION_LIMIT):  # also refuses infinity and NaN
            raise ClipboardError(f"{where} ({label(name)}): position {quote([x, y])} lies beyond "
                                 f"±{POSITION_LIMIT:g} on the canvas")
        if old_id in fresh:
            raise ClipboardError(f"{where} ({name}): id {quote(old_id)} appears twice")
        if not name or name in taken:
            name = g.fresh_name(_stem(name), taken)
        taken.add(name)
        try:
            edit, new_id = edits.add_block(design, kind, settings, name=name, position=(x + dx, y + dy), graph=graph)
        except (edits.EditError, SettingError) as e:
            raise ClipboardError(f"{where} ({name}): {e}") from None
        fresh[old_id] = new_id
        ops += edit.ops
    for i, w in enumerate(wires):
        try:
            src, sp, dst, dp = w
            wire = Wire(fresh[str(src)], int(sp), fresh[str(dst)], int(dp))
        except (KeyError, TypeError, ValueError):
            raise ClipboardError(f"copied wire {i + 1} ({quote(w)}) does not join two copied blocks") from None
        try:
            edits.check_ports(wire, f"copied block {quote(src)} to {quote(dst)}")
        except edits.EditError as e:
            raise ClipboardError(f"copied wire {i + 1}: {e}") from None
        ops.append(edits.AddWire(graph, wire))
    count = len(fresh)
    return edits.Edit(f"Paste {count} block{'s' if count != 1 else ''}", tuple(ops)), list(fresh.values())
