"""ResNet-50 written with the library's bottleneck motifs (torchvision's variant: stride 2 in the
3×3 convolution), an outside check that motifs and repeats count exactly like the flat design."""
from __future__ import annotations

from layerloom import Design
from layerloom.core.motif_library import define


def resnet50_with_motifs(size: int = 224) -> Design:
    d = Design("resnet50-motifs")
    define(d, "bottleneck_projection", "down")
    define(d, "bottleneck", "unit")
    x = d.input(3, size, size)
    x = d.add("Conv2d", x, out_channels=64, kernel=7, stride=2, padding=3, bias=False)
    x = d.add("ReLU", d.add("BatchNorm2d", x))
    x = d.add("MaxPool2d", x, kernel=3, stride=2, padding=1)
    for width, count, stride in ((64, 3, 1), (128, 4, 2), (256, 6, 2), (512, 3, 2)):
        x = d.use("down", x, width=width, out=4 * width, stride=stride)
        x = d.use("unit", x, repeat=count - 1, width=width, out=4 * width)
    x = d.add("Flatten", d.add("AdaptiveAvgPool2d", x))
    d.add("Output", d.add("Linear", x, out_features=1000))
    return d
