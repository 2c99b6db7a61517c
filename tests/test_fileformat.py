"""The ``.loom`` file: exact round trips, atomic saves, and messages that name the broken place."""
from __future__ import annotations

import json
import os

import pytest

from layerloom import Design, LoomFileError, load, save
from layerloom.core import fileformat

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

    monkeypatch.setattr(fileformat.os, fail_at.split(".")[1], fail)
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
