"""Published architectures built with Layerloom's scripting API, used only as outside check values.

ResNet-50 follows torchvision's variant (stride 2 in the 3×3 convolution of each downsampling
bottleneck), as documented with torchvision's model weights: 25,557,032 parameters, 4.09 GFLOPS
(multiply-accumulates) at 3×224×224.
"""
from __future__ import annotations

from layerloom import Design


def conv_bn(d, x, out, k, stride=1, relu=True):
    x = d.add("Conv2d", x, out_channels=out, kernel=k, stride=stride, padding=k // 2, bias=False)
    x = d.add("BatchNorm2d", x)
    return d.add("ReLU", x) if relu else x


def bottleneck(d, x, in_ch, width, stride):
    out = width * 4
    y = conv_bn(d, x, width, 1)
    y = conv_bn(d, y, width, 3, stride)
    y = conv_bn(d, y, out, 1, relu=False)
    short = x
    if stride != 1 or in_ch != out:
        short = conv_bn(d, x, out, 1, stride, relu=False)
    return d.add("ReLU", d.add("Add", y, short)), out


def resnet50(size: int = 224) -> Design:
    d = Design("resnet50-reference")
    x = d.input(3, size, size)
    x = conv_bn(d, x, 64, 7, 2)
    x = d.add("MaxPool2d", x, kernel=3, stride=2, padding=1)
    ch = 64
    for width, blocks, stride in ((64, 3, 1), (128, 4, 2), (256, 6, 2), (512, 3, 2)):
        for i in range(blocks):
            x, ch = bottleneck(d, x, ch, width, stride if i == 0 else 1)
    x = d.add("AdaptiveAvgPool2d", x)
    x = d.add("Flatten", x)
    x = d.add("Linear", x, out_features=1000)
    d.add("Output", x)
    return d
