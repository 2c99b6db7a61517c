"""A Concat of 64 branches in the editor: its Inputs field takes up to 64 (the ports a file holds)
and names the limit above it, its card has a notch per input, and wiring into it by name
(Ctrl+I) takes the first free port."""
from __future__ import annotations

from layerloom import Design
from layerloom.core.fileformat import save
from test_flows import shoot
from test_window_files import open_window
from test_window_panels import type_into


def test_a_concat_takes_64_inputs_in_block_settings_and_on_its_card(qtbot, tmp_path):
    d = Design("fan-in")
    x = d.input(3, 8, 8)
    branches = [d.add("Pointwise", x, out_channels=2) for _ in range(3)]
    cat = d.add("Concat", branches[0], branches[1])
    d.add("Output", cat)
    save(d, tmp_path / "fan_in.loom")
    window, _ = open_window(qtbot, tmp_path, [tmp_path / "fan_in.loom"])
    window.resize(1280, 800)
    doc, panel, canvas = window.document, window.block_settings, window.canvas
    doc.select([cat])
    field = panel.fields["inputs"].widget
    type_into(qtbot, field, "65")
    assert "Inputs 65 is above the maximum 64" in panel.message.text()
    assert doc.design.blocks[cat].settings["inputs"] == 2
    type_into(qtbot, field, "64")
    assert doc.design.blocks[cat].settings["inputs"] == 64
    assert canvas.canvas_scene.blocks[cat].state.n_in == 64
    doc.select([cat])
    canvas._wire_from(branches[2])  # what choosing a name after Ctrl+I does
    assert {w.dst_port: w.src for w in doc.design.in_wires[cat]} == {0: branches[0], 1: branches[1], 2: branches[2]}
    shoot(window, "concat_64_inputs")
