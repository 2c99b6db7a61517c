"""Where data enters and leaves: Input (carries the input shape C×H×W) and Output.

Inside a motif an Input stands for one of the motif's input ports (its shape comes from the
instance's wire, its own size settings are not used) and an Output for an output port; ports are
numbered in the order the blocks were added.
"""
from __future__ import annotations

from layerloom.core.kinds.base import Kind, register
from layerloom.core.settings import int_setting
from layerloom.core.shapes import Shape


@register
class Input(Kind):
    name, title, family = "Input", "Input", "Ends"
    settings = (int_setting("channels", 3, "Channels", maximum=1 << 16),
                int_setting("height", 224, "Height", maximum=1 << 16),
                int_setting("width", 224, "Width", maximum=1 << 16))

    def input_count(self, s):
        return 0

    def shape(self, s, ins, report):
        return Shape.chw(s["channels"], s["height"], s["width"])

    def summary(self, s):
        return f"{s['channels']}×{s['height']}×{s['width']}"


@register
class Output(Kind):
    name, title, family = "Output", "Output", "Ends"
    view = True

    def output_count(self, s):
        return 0
