"""Values that come from outside (a file, a typed name) and values shown in messages.

- Text must be valid Unicode: a lone surrogate (``"\\ud800"`` in JSON) cannot be printed or
  saved as UTF-8, so it is refused where it enters (:func:`check_text`, :func:`bad_value`).
- Numbers in a file must be finite (``1e400`` reads as infinity, which a file cannot hold);
  positions lie within :data:`POSITION_LIMIT`. (Integers of over 4,300 digits Python's reader
  refuses itself.)
- :func:`quote` shows a value in a one-line message: quoted, control characters escaped, shortened
  to :data:`QUOTE_LIMIT` characters.
- :func:`few_marks` keeps a drawn name within its line: at most :data:`MARKS_KEPT` combining marks
  stacked on one letter.
"""
from __future__ import annotations

import json
import math
import re
import unicodedata
from typing import Any

import orjson

POSITION_LIMIT = 1e9
"""Farthest a block may lie from the canvas origin, in scene units."""
QUOTE_LIMIT = 60
"""Most characters of a value quoted in a message."""
MARKS_KEPT = 2
"""Most combining marks drawn on one letter (written languages stack two at most, e.g. Vietnamese ệ)."""

_SURROGATE = re.compile("[\ud800-\udfff]")
_SURROGATE_ESCAPE = re.compile(r"\\u[dD][89a-fA-F]")  # how a lone surrogate is written in JSON


def check_text(value: str, what: str) -> str:
    """Return ``value``; ValueError naming ``what`` when it holds a lone surrogate (not valid text)."""
    m = _SURROGATE.search(value)
    if m:
        raise ValueError(f"{what} {quote(value)} is not valid text: it holds a lone surrogate "
                         f"U+{ord(m.group()):04X} at character {m.start() + 1}")
    return value


_DIGITS = str.maketrans({chr(c): "0" if chr(c).isdigit() else " " for c in range(128)})
_LONG_NUMBER = "0" * 19  # orjson reads an integer beyond 64 bits as a float: such text goes to json


class JsonReader:
    """Reads JSON text. orjson reads what it accepts (it refuses infinite numbers, lone
    surrogates and NaN: nothing :func:`bad_value` would refuse); the rest, and text with a run of
    19 digits or more (orjson reads integers beyond 64 bits as floats), is read by ``json.loads``,
    whose messages give the line and column, noting whether any number read as infinity
    (``1e400``), so that the walk of :func:`bad_value` runs only when the text may hold something
    to refuse."""

    def __init__(self):
        self.infinite = False
        self.checked = False  # read by orjson: nothing to refuse

    def _float(self, text: str) -> float:
        value = float(text)
        if value in (math.inf, -math.inf):
            self.infinite = True
        return value

    def loads(self, text: str, **options):
        if _LONG_NUMBER not in text.translate(_DIGITS):
            try:
                value = orjson.loads(text)
            except orjson.JSONDecodeError:
                pass
            else:
                self.checked = True
                return value
        return json.loads(text, parse_float=self._float, **options)

    def suspect(self, text: str) -> bool:
        """True when the text just read may hold an infinite number or a lone surrogate."""
        return not self.checked and (self.infinite or ("\\u" in text and _SURROGATE_ESCAPE.search(text) is not None))


def bad_value(data: Any) -> tuple[list, str] | None:
    """The first value of parsed JSON ``data`` a design file may not hold, as (path, reason), or None."""
    stack: list[tuple[list, Any]] = [([], data)]
    while stack:
        path, node = stack.pop()
        if isinstance(node, dict):
            for key, value in reversed(node.items()):
                if _SURROGATE.search(key):
                    return path, f"the key {quote(key)} is not valid text (it holds a lone surrogate)"
                stack.append((path + [key], value))
        elif isinstance(node, list):
            stack.extend((path + [i], v) for i, v in reversed(list(enumerate(node))))
        elif isinstance(node, str):
            if _SURROGATE.search(node):
                return path, f"{quote(node)} is not valid text (it holds a lone surrogate)"
        elif isinstance(node, float) and not math.isfinite(node):
            return path, "the number is too large (it reads as infinity)"
    return None


def quote(value: Any, limit: int = QUOTE_LIMIT) -> str:
    """``value`` for a one-line message: ``repr`` (quotes, newlines as ``\\n``), shortened with
    ``…`` and the full length when longer than ``limit`` characters.

    >>> quote("conv\\n2"), quote("x" * 100, 10)
    ("'conv\\\\n2'", "'xxxxxxxxx…' (100 characters)")
    """
    if isinstance(value, str):
        if len(value) <= limit:
            return repr(value)
        return repr(value[:limit - 1] + "…") + f" ({len(value):,} characters)"
    if isinstance(value, (list, tuple, dict)) and len(value) > limit:
        return f"a {type(value).__name__} of {len(value):,} items"
    try:
        text = repr(value)
    except ValueError:  # an integer beyond Python's limit for printing
        return "a number of thousands of digits"
    return text if len(text) <= limit else text[:limit - 1] + "…"


def label(name: str, limit: int = QUOTE_LIMIT) -> str:
    """A name as it is when short and printable (``conv_2``), else quoted and shortened."""
    return name if len(name) <= limit and name.isprintable() else quote(name, limit)


_DIRECTION = re.compile("[\u202a-\u202e\u2066-\u2069]")  # embeddings, overrides, isolates


def few_marks(text: str, most: int = MARKS_KEPT) -> str:
    """``text`` with the combining marks beyond the first ``most`` on each letter left out, so
    that marks stacked on one letter (``'a'`` and forty accents) are not drawn far above its line.

    >>> few_marks("a" + "\u0301" * 40) == "a\u0301\u0301"
    True
    """
    if text.isascii():
        return text
    kept, run = [], 0
    for ch in text:
        run = run + 1 if unicodedata.category(ch) in ("Mn", "Me") else 0
        if run <= most:
            kept.append(ch)
    return "".join(kept)


def one_line(message: str, limit: int = 2000) -> str:
    """A message on one line: line breaks shown as ``⏎``, direction controls as ``\\u202e`` (a name
    holding an unclosed right-to-left override would turn the rest of the message around),
    shortened to ``limit`` characters."""
    message = re.sub(r"\r\n|[\r\n\v\f\x1c-\x1e\x85\u2028\u2029]", "⏎", message)
    message = _DIRECTION.sub(lambda m: f"\\u{ord(m.group()):04x}", message)
    return message if len(message) <= limit else message[:limit - 1] + "…"
