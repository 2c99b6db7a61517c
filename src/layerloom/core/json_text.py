"""JSON text laid out for reading and diffing: one field per line, and one line per item of the long
lists (a design's blocks and wires, a ledger's rows, findings). Each line is written by the C
encoder: an indented ``json.dumps`` runs in Python, four to eight times slower.

>>> print(layout({"name": "tiny", "blocks": [{"id": "b1"}, {"id": "b2"}]}, ("blocks",)))
{
 "name": "tiny",
 "blocks": [
  {"id": "b1"},
  {"id": "b2"}
 ]
}
"""
from __future__ import annotations

import json
from collections.abc import Collection

encode = json.JSONEncoder(ensure_ascii=False).encode
"""A value as one line of JSON (non-ASCII text kept as it is)."""


def layout(obj: dict, lists: Collection[str], nested: Collection[str] = (), pad: str = "") -> str:
    """``obj`` as JSON text: each field on its own line; a non-empty list under a key in ``lists``
    one item per line, where items under a key in ``nested`` are laid out the same way themselves."""
    inner = pad + " "
    fields = []
    for key, value in obj.items():
        if key in lists and isinstance(value, list) and value:
            items = (layout(v, lists, nested, inner + " ") if key in nested else encode(v) for v in value)
            text = "[\n" + ",\n".join(inner + " " + item for item in items) + f"\n{inner}]"
        else:
            text = encode(value)
        fields.append(f"{inner}{encode(key)}: {text}")
    return "{\n" + ",\n".join(fields) + f"\n{pad}}}"
