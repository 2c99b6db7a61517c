"""Synthetic designs of a chosen size for the benchmarks: stages of residual bottlenecks with 1×1
squeeze and expand convolutions, strided projections between stages, and a classifier head."""
from __future__ import annotations

from layerloom import Design


def residual_stack(blocks: int, size: int = 64) -> Design:
    """A well-formed design of about ``blocks`` blocks (11 per bottleneck unit)."""
    d = Design(f"synthetic-{blocks}")
    x = d.input(3, size, size)
    x = d.add("Conv2d", x, out_channels=32, kernel=3, stride=2, padding=1)
    ch, unit = 32, 0
    while len(d.blocks) < blocks - 6:
        stride = 2 if unit % 40 == 39 and size > 8 else 1
        if stride == 2:
            size //= 2
        width = ch // 4 or 8
        y = d.add("Pointwise", x, out_channels=width, bias=False)
        y = d.add("BatchNorm2d", y)
        y = d.add("ReLU", y)
        y = d.add("Conv2d", y, out_channels=width, kernel=3, stride=stride, padding=1, bias=False)
        y = d.add("BatchNorm2d", y)
        y = d.add("ReLU", y)
        out = ch * 2 if stride == 2 else ch
        y = d.add("Pointwise", y, out_channels=out, bias=False)
        y = d.add("BatchNorm2d", y)
        short = d.add("Pointwise", x, out_channels=out, stride=stride, bias=False) if stride == 2 else x
        x = d.add("ReLU", d.add("Add", y, short))
        ch, unit = out, unit + 1
    x = d.add("AdaptiveAvgPool2d", x)
    x = d.add("Flatten", x)
    x = d.add("Linear", x, out_features=10)
    d.add("Output", x)
    return d
