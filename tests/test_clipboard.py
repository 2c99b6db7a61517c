"""Copy and paste of blocks (layerloom.core.clipboard): no Qt needed."""
import json
import re

import pytest

from layerloom.core.clipboard import ClipboardError, copy_blocks, from_text, paste_edit, to_text
from layerloom.core.design import Design
from layerloom.core.fileformat import dumps
from layerloom.core.graph import Wire
from layerloom.core.values import quote


def bottleneck():
    """He et al. 2016 §4.1 bottleneck shape (256 → 1×1,64 → 3×3,64 → 1×1,256) with its shortcut Add."""
    d = Design("clip")
    x = d.input(256, 14, 14, name="x")
    a = d.add("Pointwise", x, out_channels=64, bias=False, name="reduce")
    b = d.add("Conv2d", a, out_channels=64, kernel=3, padding=1, bias=False, name="mix")
    c = d.add("Pointwise", b, out_channels=256, bias=False, name="expand")
    j = d.add("Add", c, x, name="join")
    d.add("Output", j, name="y")
    return d, (x, a, b, c, j)


def test_paste_keeps_inner_wires_drops_outer_ones_and_gives_fresh_ids_and_names():
    d, (x, a, b, c, j) = bottleneck()
    data = json.loads(to_text(copy_blocks(d, [a, b, c])))  # through text, as the clipboard carries it
    assert [w for w in data["wires"]] == [[a, 0, b, 0], [b, 0, c, 0]]
    edit, ids = paste_edit(d, data, offset=(10.0, 20.0))
    before = dumps(d)
    inverse = d.apply(edit)
    assert len(ids) == 3 and not set(ids) & {x, a, b, c, j}
    assert [d.blocks[i].name for i in ids] == ["reduce_1", "mix_1", "expand_1"]
    assert Wire(ids[0], 0, ids[1], 0) in d.wires and Wire(ids[1], 0, ids[2], 0) in d.wires
    assert not any(w.dst == ids[0] for w in d.wires)  # the wire from x was outside the copy
    assert d.blocks[ids[1]].position == (d.blocks[b].position[0] + 10.0, d.blocks[b].position[1] + 20.0)
    # 3×3 conv 64 → 64 without bias: 64·64·9 = 36,864 weights (He et al. 2016, Fig. 5 right)
    assert d.analysis().result(b).cost.weights == 36864
    assert d.blocks[ids[1]].settings == d.blocks[b].settings
    d.apply(inverse)
    assert dumps(d) == before


def test_a_free_name_is_kept_and_pasting_into_another_design_works():
    d, (x, a, b, c, j) = bottleneck()
    data = copy_blocks(d, [b])
    other = Design("other")
    edit, ids = paste_edit(other, data, offset=(0, 0))
    other.apply(edit)
    assert other.blocks[ids[0]].name == "mix" and other.blocks[ids[0]].position == d.blocks[b].position


@pytest.mark.parametrize("text, words", [
    ("not json", "not JSON"),
    ('{"format": "something-else"}', "does not hold Layerloom blocks"),
    ('{"format": "layerloom-blocks", "version": 7}', "version 7"),
])
def test_clipboard_text_that_is_not_blocks_is_refused_clearly(text, words):
    with pytest.raises(ClipboardError, match=words):
        from_text(text)


def test_bad_copied_blocks_name_the_place_and_value():
    d, _ = bottleneck()
    data = {"format": "layerloom-blocks", "version": 1,
            "blocks": [{"id": "q", "kind": "Conv2d", "name": "c", "settings": {"stride": 0}, "position": [0, 0]}],
            "wires": []}
    with pytest.raises(ClipboardError, match=r"copied block 1 \(c\): Stride 0 is below the minimum 1"):
        paste_edit(d, data)
    data["blocks"][0]["settings"] = {}
    data["wires"] = [["q", 0, "elsewhere", 0]]
    with pytest.raises(ClipboardError, match="copied wire 1"):
        paste_edit(d, data)
    data["blocks"][0]["kind"] = "Teleporter"
    with pytest.raises(ClipboardError, match="unknown block kind 'Teleporter'"):
        paste_edit(d, data)
    data["blocks"][0]["kind"] = {"out_channels": -5}  # not text at all (found by LAYERLOOM_LONG=1)
    with pytest.raises(ClipboardError, match="unknown block kind"):
        paste_edit(d, data)
    data["blocks"][0]["kind"] = "Input"
    for settings in ("NoSuchKind", [3, 1]):  # settings that are not named values (found by LAYERLOOM_LONG=1)
        data["blocks"][0]["settings"] = settings
        with pytest.raises(ClipboardError, match=r"copied block 1 \(c\): settings must be named values .*, not "
                                                 + re.escape(quote(settings))):
            paste_edit(d, data)


def test_pasted_text_with_an_infinite_position_or_invalid_text_is_refused():
    d, _ = bottleneck()
    block = {"id": "q", "kind": "ReLU", "name": "r", "settings": {}, "position": [0, 0]}
    text = to_text({"format": "layerloom-blocks", "version": 1, "blocks": [block], "wires": []})
    with pytest.raises(ClipboardError, match="blocks.0.position.0: the number is too large"):
        from_text(text.replace('"position": [0, 0]', '"position": [1e400, 0]'))
    with pytest.raises(ClipboardError, match="blocks.0.name: .* not valid text"):
        from_text(text.replace('"name": "r"', '"name": "r\\ud800"'))
    block["position"] = [3e9, 0]
    with pytest.raises(ClipboardError, match=r"copied block 1 \(r\): position .* beyond"):
        paste_edit(d, {"format": "layerloom-blocks", "version": 1, "blocks": [block], "wires": []})


@pytest.mark.parametrize("port", [-1, 64])
def test_pasted_text_with_a_port_no_file_can_hold_is_refused(port):
    """A pasted wire to input -1 or 64 would be kept, and the saved file could not be read again."""
    d, (x, a, *_rest) = bottleneck()
    data = copy_blocks(d, [x, a])
    data["wires"][0][3] = port
    with pytest.raises(ClipboardError, match=rf"copied wire 1: .* to input {port}: ports are numbered 0 to 63"):
        paste_edit(d, from_text(to_text(data)))
