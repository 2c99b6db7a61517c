"""The ``.loom`` file: exact round trips, atomic saves, and messages that name the broken place."""
from __future__ import annotations

import json
import os

import pytest

from layerloom import Design, LoomFileError, load, save
from layerloom.core import atomic_write, fileformat
from layerloom.core.fileformat import parse

NOTES = "Für die Türkamera — 夜間モード\nzweite Zeile\r\n\ttab, \"quotes\" and \\ backslash 🙂\n"


def _design() -> Design:
    d = Design("hallway-counter", batch=4, dtype="fp16", notes=NOTES)
    x = d.input(3, 96, 128, name="frame")
    y = d.add("Conv2d", x, out_channels=24, kernel=[3, 5], stride=2, padding=[1, 2], bias=False,
              position=(0.1 + 0.2, -1e-300), name="stem ✓")
    m = d.motif("squeeze", width=8)
    m.add("Output", m.add("Pointwise", m.input(), out_channels={"param": "width"}), position=(1 / 3, 2 / 3))
    y = d.use("squeeze", y, width=24, repeat=3)
    d.add("Output", y, position=(123456789.123456789, 7e-8))
    return d


def test_round_trip_keeps_everything(tmp_path):
    d = _design()
    path = tmp_path / "hall.loom"
    save(d, path)
    back = load(path)
    assert fileformat.dumps(back) == fileformat.dumps(d)
    assert back.notes == NOTES
    stem = back.block("stem ✓")
    assert stem.position == (0.1 + 0.2, -1e-300)  # 0.30000000000000004 survives exactly
    assert back.motifs["squeeze"].blocks[back.motifs["squeeze"].ports()[1][0]].position == (1 / 3, 2 / 3)
    assert back.ledger().totals == d.ledger().totals


def test_saved_file_is_json_with_the_notes_readable(tmp_path):
    path = tmp_path / "hall.loom"
    save(_design(), path)
    data = json.loads(path.read_text(encoding="utf-8"))
    assert data["notes"] == NOTES
    assert "夜間モード" in path.read_text(encoding="utf-8")  # written as text, not \u escapes


def _leftovers(folder, keep):
    return sorted(p.name for p in folder.iterdir() if p.name != keep)


@pytest.mark.parametrize("fail_at", ["os.replace", "os.fsync"])
def test_interrupted_save_keeps_the_old_file(tmp_path, monkeypatch, fail_at):
    path = tmp_path / "hall.loom"
    save(_design(), path)
    old = path.read_bytes()
    changed = _design()
    changed.set_field("notes", "a newer version that must not land half-written")

    def fail(*args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(atomic_write.os, fail_at.split(".")[1], fail)
    with pytest.raises(OSError):
        save(changed, path)
    monkeypatch.undo()
    assert path.read_bytes() == old
    assert _leftovers(tmp_path, path.name) == []  # no temporary file left behind
    assert load(path).notes == NOTES


def test_save_replaces_the_old_file(tmp_path):
    path = tmp_path / "hall.loom"
    save(_design(), path)
    d = _design()
    d.set_field("batch", 9)
    save(d, path)
    assert load(path).batch == 9
    assert _leftovers(tmp_path, path.name) == []


def _data() -> dict:
    return json.loads(fileformat.dumps(_design()))


def _message(data: dict) -> str:
    with pytest.raises(LoomFileError) as e:
        fileformat.parse(json.dumps(data), "hall.loom")
    return str(e.value)


def test_message_names_block_setting_and_value():
    data = _data()
    data["blocks"][1]["name"] = "conv_1"
    data["blocks"][1]["settings"]["stride"] = 0
    msg = _message(data)
    assert msg.startswith("hall.loom: ")
    assert "blocks[1] (conv_1)" in msg
    assert "stride" in msg.lower()
    assert " 0 " in msg and "minimum 1" in msg


def test_message_names_wrong_type_place():
    data = _data()
    data["blocks"][1]["name"] = "conv_1"
    data["blocks"][1]["settings"]["stride"] = [1, 2, 3]
    msg = _message(data)
    assert "blocks[1] (conv_1) settings.stride" in msg
    assert "[1, 2, 3]" in msg


def test_message_names_missing_wire_end():
    data = _data()
    data["wires"][0]["to"] = ["b99", 0]
    msg = _message(data)
    assert "wires[0].to" in msg and "'b99'" in msg


def test_message_names_missing_wire_start_and_a_repeated_wire():
    data = _data()
    data["motifs"][0]["wires"][0]["from"] = ["ghost", 0]
    assert "motifs[0] (squeeze) wires[0].from: there is no block with id 'ghost'" in _message(data)
    data = _data()
    data["wires"].append(dict(data["wires"][1]))
    assert f"wires[{len(data['wires']) - 1}]: the same wire appears twice" in _message(data)


def test_a_loaded_graph_has_the_indexes_edits_keep():
    """Reading fills each graph at once; its wire lists and name counts are those that adding the same
    blocks and wires one edit at a time gives (the next fresh name, wires in and out of each block)."""
    made = _design()
    back = fileformat.parse(fileformat.dumps(made))
    for mine, theirs in ((made, back), (made.motifs["squeeze"], back.motifs["squeeze"])):
        assert mine.in_wires == theirs.in_wires and mine.out_wires == theirs.out_wires
        assert mine._names == theirs._names and list(mine.wires) == list(theirs.wires)
        assert mine.fresh_name("conv") == theirs.fresh_name("conv")
        assert mine.layout_position() == theirs.layout_position()


def test_message_names_unknown_kind():
    data = _data()
    data["blocks"][2]["kind"] = "Conv3d"
    msg = _message(data)
    assert "blocks[2]" in msg and "'Conv3d'" in msg


def test_message_names_motif_block():
    data = _data()
    data["motifs"][0]["blocks"][1]["settings"]["out_channels"] = -4
    msg = _message(data)
    assert "motifs[0] (squeeze) blocks[1]" in msg and "-4" in msg


def test_message_names_version():
    data = _data()
    data["version"] = 7
    msg = _message(data)
    assert "version 7" in msg and "1" in msg


def test_duplicate_block_id_is_named():
    data = _data()
    data["blocks"][2]["id"] = data["blocks"][1]["id"]
    msg = _message(data)
    assert "blocks[2]" in msg and repr(data["blocks"][1]["id"]) in msg


def test_missing_file(tmp_path):
    with pytest.raises(LoomFileError) as e:
        load(tmp_path / "absent.loom")
    assert "absent.loom" in str(e.value)


def test_not_utf8(tmp_path):
    path = tmp_path / "latin.loom"
    path.write_bytes(b'{"notes": "caf\xe9"}')
    with pytest.raises(LoomFileError) as e:
        load(path)
    assert "UTF-8" in str(e.value) and "byte 14" in str(e.value)


def test_not_json_names_line_and_column():
    with pytest.raises(LoomFileError) as e:
        fileformat.parse('{\n  "format": "layerloom-design",\n  "version": 1,,\n}', "x.loom")
    assert "line 3" in str(e.value) and "column" in str(e.value)


def test_nan_is_refused():
    data = _data()
    text = json.dumps(data).replace('"position": [0.0, 0.0]', '"position": [NaN, 0.0]', 1)
    assert "NaN" in text
    with pytest.raises(LoomFileError, match="NaN"):
        fileformat.parse(text)


def test_saving_leaves_no_stray_files_in_the_folder(tmp_path):
    save(_design(), tmp_path / "a.loom")
    save(_design(), tmp_path / "b.loom")
    assert sorted(os.listdir(tmp_path)) == ["a.loom", "b.loom"]


# ----- values a file may not hold, and how messages show values


def _sample_data():
    from layerloom.core.fileformat import to_data
    from layerloom.core.design import Design

    d = Design("values")
    x = d.input(3, 32, 32, name="camera")
    d.add("Output", d.add("ReLU", x, name="act"))
    return to_data(d)


@pytest.mark.parametrize("where, set_value", [
    ("blocks[0] (camera) position[0]", lambda data: data["blocks"][0].__setitem__("position", ["1e400", 0])),
    ("budget.latency_ms", lambda data: data.__setitem__("budget", {"latency_ms": "1e400"})),
    ("target.gmacs_per_second", lambda data: data.__setitem__(
        "target", {"name": "t", "gmacs_per_second": "1e400", "gbytes_per_second": 1})),
    ("baseline.totals.macs", lambda data: data.__setitem__(
        "baseline", {"name": "b", "totals": {"macs": "-1e400"}, "blocks": {}})),
])
def test_a_number_that_reads_as_infinity_is_refused_naming_its_place(where, set_value):
    data = _sample_data()
    set_value(data)
    text = json.dumps(data).replace('"1e400"', "1e400").replace('"-1e400"', "-1e400")
    with pytest.raises(LoomFileError) as e:
        parse(text, "inf.loom")
    assert f"inf.loom: {where}: the number is too large" in str(e.value)


def test_a_position_too_far_out_or_a_budget_integer_too_large_is_refused():
    data = _sample_data()
    data["blocks"][1]["position"] = [1e300, 0]
    with pytest.raises(LoomFileError, match=r"blocks\[1\] \(act\): position .* beyond"):
        parse(json.dumps(data))
    data = _sample_data()
    data["budget"] = {"latency_ms": 10 ** 400}
    with pytest.raises(LoomFileError, match="budget latency_ms is too large"):
        parse(json.dumps(data))


@pytest.mark.parametrize("place", ["name", "block", "motif", "notes"])
def test_a_lone_surrogate_in_any_text_is_refused_on_load(place):
    data = _sample_data()
    if place == "name":
        data["name"] = "cam\ud800"
    elif place == "block":
        data["blocks"][1]["name"] = "act\udfff"
    elif place == "motif":
        data["motifs"] = [{"name": "m\ud83d", "blocks": [], "wires": []}]
    else:
        data["notes"] = "\udc80"
    text = json.dumps(data)  # writes the lone surrogate as a \uXXXX escape, as a hostile file would
    with pytest.raises(LoomFileError, match="not valid text"):
        parse(text, "s.loom")


def test_a_joined_surrogate_pair_is_valid_text():
    data = _sample_data()
    data["blocks"][1]["name"] = "act 😀"
    assert parse(json.dumps(data)).blocks[data["blocks"][1]["id"]].name == "act 😀"


def test_rename_and_set_field_refuse_a_lone_surrogate():
    from layerloom.core import edits
    from layerloom.core.design import Design

    d = Design()
    x = d.input(3, 8, 8)
    with pytest.raises(edits.EditError, match="input_1: block name 'a\\\\ud800' is not valid text"):
        edits.rename(d, x, "a\ud800")
    with pytest.raises(edits.EditError, match="not valid text"):
        d.set_field("name", "\ud800")
    with pytest.raises(edits.EditError, match="not valid text"):
        d.add("ReLU", x, name="r\udc00")
    assert d.name == "untitled" and len(d.blocks) == 1


def test_messages_quote_and_shorten_values():
    data = _sample_data()
    data["blocks"][1]["settings"] = {"p": "x" * 50_000_000}
    data["blocks"][1]["kind"] = "Dropout"
    with pytest.raises(LoomFileError) as e:
        parse(json.dumps(data), "big.loom")
    message = str(e.value)
    assert len(message) < 300 and "(50,000,000 characters)" in message
    data = _sample_data()
    data["batch"] = "y" * 10_000_000
    with pytest.raises(LoomFileError) as e:
        parse(json.dumps(data), "big.loom")
    assert len(str(e.value)) < 300 and "batch" in str(e.value)
    data = _sample_data()
    data["blocks"][1]["name"] = "two\nlines"
    data["blocks"][1]["settings"] = {"negative_slope": 2}
    data["blocks"][1]["kind"] = "LeakyReLU"
    with pytest.raises(LoomFileError) as e:
        parse(json.dumps(data), "n.loom")
    assert "\n" not in str(e.value) and "'two\\nlines'" in str(e.value)


@pytest.mark.parametrize("limit", [2 ** 64 - 1, 2 ** 64 + 1, 2 ** 70 + 3, -(2 ** 63) - 1])
def test_integers_beyond_64_bits_are_read_exactly(limit):
    """A reader that keeps integers in 64 bits turns 2**70 + 3 into a float; Python's json (the
    reference) keeps every integer exact. A budget limit is a whole number of any size."""
    data = _sample_data()
    data["budget"] = {"weights": limit}
    text = json.dumps(data)
    assert json.loads(text)["budget"]["weights"] == limit
    if limit > 0:
        assert parse(text).budget["weights"] == limit
    else:
        with pytest.raises(LoomFileError, match=f"budget.weights: {limit} is less than the minimum of 1"):
            parse(text)


def test_the_fast_reader_and_json_agree_on_every_sample():
    """Every sample read by the reader used on open equals what Python's json reads."""
    from pathlib import Path

    from layerloom.core.values import JsonReader

    for path in sorted(Path(__file__).parent.parent.joinpath("samples").glob("*.loom")):
        text = path.read_text("utf-8")
        reader = JsonReader()
        assert reader.loads(text) == json.loads(text), path.name
        assert reader.checked  # read by the fast reader, not the fallback
