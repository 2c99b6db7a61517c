"""Chains at typing speed: a 12-block residual network built in the editor window from the keyboard
alone, every key sent to whichever widget has the keyboard focus, as a user's keys would be.

The network (our own example): input 3×224×224 → conv (stride 2) → bn → relu_1 → conv → bn → relu →
conv → bn → add (+ relu_1, the skip wire) → relu → output. Outside references: PyTorch builds the
same layers (shapes and ``sum(p.numel())``), and Conv2d's size formula (common practice).
"""
from __future__ import annotations

import pytest
import torch
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QApplication

from layerloom.core.graph import Wire
from test_flows import shoot
from test_window_files import open_window

WORDS = (
    "conv⏎", "⏎", "⇥", "⇥", "2⏎",  # the stem conv; Enter opens its settings, Tab twice to Stride, 2, Enter
    "bn⏎", "relu⏎",
    "conv⏎", "bn⏎", "relu⏎",
    "conv⏎", "bn⏎",
    "add⏎", "^I", "relu_1⏎",  # the join, and Ctrl+I wires the skip from relu_1 into its free input
    "relu⏎", "out⏎",
)
"""The network typed with the words a designer would use."""
SHORTEST = (
    "c⏎", "⏎", "⇥", "⇥", "2⏎",
    "b⏎", "r⏎",
    "c⏎", "b⏎", "r⏎",
    "c⏎", "b⏎",
    "a⏎", "^I", "r⏎",  # relu_1 is the first block whose name starts with r
    "r⏎", "o⏎",
)
"""The same with one letter each: Quick add's ranking puts the wanted kind first."""
SPECIAL = {"⏎": Qt.Key.Key_Return, "⇥": Qt.Key.Key_Tab}


class Keyboard:
    """Sends keys to the widget that has the focus and counts every key press."""

    def __init__(self, qtbot):
        self.qtbot, self.presses = qtbot, 0

    def type(self, text: str) -> None:
        if text.startswith("^"):
            self._press(getattr(Qt.Key, f"Key_{text[1]}"), Qt.KeyboardModifier.ControlModifier)
            return
        for ch in text:
            self._press(SPECIAL.get(ch, ch), Qt.KeyboardModifier.NoModifier)

    def _press(self, key, modifier) -> None:
        target = QApplication.focusWidget()
        assert target is not None, "no widget has the keyboard focus"
        self.qtbot.keyClick(target, key, modifier)
        QApplication.processEvents()  # deferred hand-backs of the focus run as between real key presses
        self.presses += 1


def active_window(qtbot, tmp_path):
    """A new design's window at 1280×800, active, with its document, canvas and design."""
    window, _ = open_window(qtbot, tmp_path)
    window.resize(1280, 800)
    with qtbot.waitActive(window):
        window.activateWindow()
    return window, window.document, window.canvas, window.document.design


@pytest.mark.parametrize("script, expected_presses", [(WORDS, 60), (SHORTEST, 30)], ids=["words", "shortest"])
def test_a_12_block_residual_network_from_the_keyboard_alone(qtbot, tmp_path, request, script, expected_presses):
    window, doc, canvas, d = active_window(qtbot, tmp_path)
    assert [d.blocks[b].kind for b in doc.selection] == ["Input"]  # a new design starts with its Input selected
    assert QApplication.focusWidget() is canvas  # and the keys are on the canvas: no click needed
    keys = Keyboard(qtbot)
    for step in script:
        keys.type(step)
        if step.endswith("⏎") and step not in ("⏎", "2⏎") and step != script[14]:
            # each new block is selected, in view, and the keys are back on the canvas
            (new,) = doc.selection
            card = canvas.canvas_scene.blocks[new].sceneBoundingRect()
            assert canvas.viewport().rect().contains(canvas.mapFromScene(card).boundingRect()), step
            qtbot.waitUntil(lambda: QApplication.focusWidget() is canvas, timeout=1000)
    by_name = {b.name: b for b in d.blocks.values()}
    assert len(d.blocks) == 12 and len(d.wires) == 12
    assert by_name["conv_1"].settings["stride"] == 2
    assert Wire(by_name["relu_1"].id, 0, by_name["add_1"].id, 1) in d.wires  # the skip wire
    assert Wire(by_name["bn_3"].id, 0, by_name["add_1"].id, 0) in d.wires
    assert not d.findings()
    # the same layers in PyTorch: shapes and weights agree (PyTorch as the outside reference)
    stem = torch.nn.Sequential(torch.nn.Conv2d(3, 64, 3, 2, 1), torch.nn.BatchNorm2d(64), torch.nn.ReLU())
    body = torch.nn.Sequential(torch.nn.Conv2d(64, 64, 3, 1, 1), torch.nn.BatchNorm2d(64), torch.nn.ReLU(),
                               torch.nn.Conv2d(64, 64, 3, 1, 1), torch.nn.BatchNorm2d(64))
    x = stem(torch.zeros(1, 3, 224, 224))
    y = torch.relu(body(x) + x)
    assert str(d.analysis().shape(by_name["output_1"].id)) == "×".join(map(str, y.shape[1:]))  # 64×112×112
    torch_weights = sum(p.numel() for m in (stem, body) for p in m.parameters())
    assert d.ledger().totals.weights == torch_weights
    # the count reported in the closing note (before: about 60 actions, many of them with the mouse)
    print(f"\nkey presses for the 12-block residual network: {keys.presses}")
    assert keys.presses == expected_presses
    shoot(window, f"keyboard_chain_{request.node.callspec.id}")


@pytest.mark.parametrize("route", ["after the selection", "on a wire"])
def test_a_linear_after_a_feature_map_gets_a_flatten_in_the_same_undo_step(qtbot, tmp_path, route):
    """`gap ⏎ fc ⏎` (or fc put on the wire out of the pool): a Flatten goes first, the status bar
    says so, one undo takes both away, and the result matches PyTorch's nn.Flatten + nn.Linear."""
    window, doc, canvas, d = active_window(qtbot, tmp_path)
    keys = Keyboard(qtbot)
    for step in ("conv⏎", "gap⏎") if route == "after the selection" else ("conv⏎", "gap⏎", "out⏎"):
        keys.type(step)
    if route == "on a wire":
        (out,) = doc.selection
        (wire,) = d.in_wires[out]
        canvas.quick_add(wire=wire)
    before = doc.undo_stack.count()
    keys.type("fc⏎")
    by_kind = {b.kind: b for b in d.blocks.values()}
    assert {"Flatten", "Linear"} <= by_kind.keys()
    assert not [f for f in d.findings() if f.severity == "error"]  # no linear.rank
    flatten, fc, pool = by_kind["Flatten"], by_kind["Linear"], by_kind["AdaptiveAvgPool2d"]
    assert Wire(pool.id, 0, flatten.id, 0) in d.wires and Wire(flatten.id, 0, fc.id, 0) in d.wires
    assert doc.selection == [fc.id] and doc.undo_stack.count() == before + 1  # one undo step
    assert "Flatten added before fc_1" in window.statusBar().currentMessage()
    # PyTorch as the outside reference: the same layers give the same shapes and weights
    conv = by_kind["Conv2d"]
    layers = torch.nn.Sequential(torch.nn.Conv2d(3, conv.settings["out_channels"], conv.settings["kernel"],
                                                 conv.settings["stride"], conv.settings["padding"]),
                                 torch.nn.AdaptiveAvgPool2d(1), torch.nn.Flatten(),
                                 torch.nn.Linear(conv.settings["out_channels"], fc.settings["out_features"]))
    x = torch.zeros(1, *d.analysis().shape(d.of_kind("Input")[0].id))
    assert tuple(d.analysis().shape(fc.id)) == tuple(layers(x).shape[1:])
    assert tuple(d.analysis().shape(flatten.id)) == tuple(layers[:3](x).shape[1:])
    assert d.ledger().totals.weights == sum(p.numel() for p in layers.parameters())
    if route == "on a wire":
        assert Wire(fc.id, 0, d.of_kind("Output")[0].id, 0) in d.wires
    cards = [canvas.canvas_scene.blocks[b.id].sceneBoundingRect() for b in d.blocks.values()]
    assert not any(a.intersects(b) for i, a in enumerate(cards) for b in cards[i + 1:])  # side by side
    shoot(window, f"flatten_before_linear_{route.replace(' ', '_')}")
    doc.undo_stack.undo()
    assert not {"Flatten", "Linear"} & {b.kind for b in d.blocks.values()}
    doc.undo_stack.redo()
    assert {"Flatten", "Linear"} <= {b.kind for b in d.blocks.values()}
