"""Property tests of reading hostile files: any text or number put anywhere a design file holds one
either reads into a design that saves and prints as UTF-8 again, or is refused with one line."""
from __future__ import annotations

import json

from hypothesis import given
from hypothesis import strategies as st

from layerloom.core import fileformat
from layerloom.core.design import Design
from layerloom.core.fileformat import LoomFileError

# every code point, lone surrogates included (hypothesis leaves them out by default)
ANY_TEXT = st.text(alphabet=st.characters(min_codepoint=0, max_codepoint=0x10FFFF, blacklist_categories=()),
                   max_size=30) | st.just("x" * 100_000)
NUMBERS = (st.floats(allow_nan=False) | st.integers(min_value=-10 ** 400, max_value=10 ** 400)
           | st.sampled_from([1e308, 1.7976931348623157e308, 10 ** 309, -(10 ** 309)]))


def _base() -> dict:
    d = Design("hostile", notes="n")
    x = d.input(3, 16, 16, name="cam")
    m = d.motif("unit", width=8)
    y = m.add("Conv2d", m.input(), out_channels={"param": "width"}, kernel=3, padding=1)
    m.add("Output", y)
    x = d.use("unit", x)
    d.add("Output", d.add("ReLU", x, name="act"))
    d.set_field("budget", {"macs": 10 ** 6, "latency_ms": 2.0})
    return fileformat.to_data(d)


def _text_places(data):
    """Paths to every string value and every object key of the data."""
    found = []

    def walk(node, path):
        if isinstance(node, dict):
            for k, v in node.items():
                found.append(("key", path, k))
                walk(v, path + [k])
        elif isinstance(node, list):
            for i, v in enumerate(node):
                walk(v, path + [i])
        elif isinstance(node, str):
            found.append(("value", path, None))
        elif isinstance(node, (int, float)) and not isinstance(node, bool):
            found.append(("number", path, None))

    walk(data, [])
    return found


def _set(data, path, value):
    for step in path[:-1]:
        data = data[step]
    data[path[-1]] = value


def _check(text: str) -> None:
    try:
        design = fileformat.parse(text, "hostile.loom")
    except LoomFileError as e:
        message = str(e)
        assert "\n" not in message and len(message) < 2_000, message[:300]
        message.encode("utf-8")  # printable
        return
    again = fileformat.dumps(design).encode("utf-8")  # saves as UTF-8 without error
    fileformat.parse(again.decode("utf-8"))  # and reads back
    for f in design.findings():
        f.message.encode("utf-8")
    design.ledger()


@given(st.data(), ANY_TEXT)
def test_any_text_anywhere_reads_and_saves_or_is_refused_in_one_line(data, text):
    base = _base()
    places = [p for p in _text_places(base) if p[0] != "number"]
    kind, path, key = data.draw(st.sampled_from(places))
    if kind == "key":
        node = base
        for step in path:
            node = node[step]
        node[text] = node.pop(key)
    else:
        _set(base, path, text)
    _check(json.dumps(base))  # ensure_ascii: a lone surrogate is written as \udXXX, as a hostile file would


@given(st.data(), NUMBERS)
def test_any_number_anywhere_reads_and_saves_or_is_refused_in_one_line(data, number):
    base = _base()
    places = [p for p in _text_places(base) if p[0] == "number"]
    _, path, _ = data.draw(st.sampled_from(places))
    _set(base, path, number)
    text = json.dumps(base).replace("Infinity", "1e400")  # json writes infinity as a word; a file as 1e400
    _check(text)
