"""Costs and shapes of published layers and networks, against the figures their sources print.

Each assertion names its source in a comment beside it.
"""
from __future__ import annotations

import random
from fractions import Fraction

import pytest
import torch

from layerloom import Design
from reference_nets import resnet50


def _totals(d: Design):
    assert [f.code for f in d.findings()] == []
    return d.ledger().totals


def test_resnet50_weights_and_macs():
    totals = _totals(resnet50(224))
    # torchvision model documentation, ResNet50_Weights.IMAGENET1K_V1: num_params 25,557,032
    assert totals.weights == 25_557_032
    # torchvision model documentation: 4.09 GFLOPS (multiply-accumulates of convolutions and linear layers)
    assert totals.macs == pytest.approx(4.09e9, rel=0.005)


def test_resnet50_output_is_1000_classes():
    d = resnet50(224)
    out = d.of_kind("Output")[0].id
    # torchvision model documentation: ImageNet-1k classifier, 1000 outputs
    assert tuple(d.analysis().shape(out)) == (1000,)


def test_bottleneck_block_weights():
    d = Design("bottleneck")
    x = d.input(256, 56, 56)
    y = d.add("Pointwise", x, out_channels=64, bias=False)
    y = d.add("Conv2d", y, out_channels=64, kernel=3, padding=1, bias=False)
    y = d.add("Pointwise", y, out_channels=256, bias=False)
    d.add("Output", y)
    # He et al. 2016, "Deep Residual Learning", Fig. 5 / §4.1: 256-d → 1×1,64 → 3×3,64 → 1×1,256;
    # 256·64 + 3·3·64·64 + 64·256 = 69,632 weights without bias or norm
    assert _totals(d).weights == 69_632
    # He et al. 2016, Fig. 5: the bottleneck returns a 256-d map of the same size
    assert tuple(d.analysis().shape(y)) == (256, 56, 56)


def _mobilenet_layer(separable: bool) -> Design:
    d = Design("mobilenets-table3-layer")
    x = d.input(512, 14, 14)
    if separable:
        x = d.add("Depthwise", x, kernel=3, padding=1, bias=False)
        x = d.add("Pointwise", x, out_channels=512, bias=False)
    else:
        x = d.add("Conv2d", x, out_channels=512, kernel=3, padding=1, bias=False)
    d.add("Output", x)
    return d


def test_mobilenets_table3_full_convolution():
    totals = _totals(_mobilenet_layer(separable=False))
    # Howard et al. 2017, "MobileNets", Eq. (2) and Table 3 (D_K=3, M=N=512, D_F=14): 462M MACs, 2.36M weights
    assert totals.macs == 462_422_016
    assert totals.weights == 2_359_296


def test_mobilenets_table3_depthwise_separable():
    totals = _totals(_mobilenet_layer(separable=True))
    # Howard et al. 2017, "MobileNets", Eq. (5) and Table 3: 52.3M MACs, 0.27M weights
    assert totals.macs == 52_283_392
    assert totals.weights == 266_752


def test_mobilenets_reduction_ratio():
    full = _totals(_mobilenet_layer(separable=False)).macs
    separable = _totals(_mobilenet_layer(separable=True)).macs
    # Howard et al. 2017, §3.1 after Eq. (5): separable / full = 1/N + 1/D_K², with N = 512, D_K = 3
    assert Fraction(separable, full) == Fraction(1, 512) + Fraction(1, 9)


@pytest.mark.parametrize("c, h, w, filters, groups", [(256, 56, 56, 64, 1), (3, 7, 5, 16, 1), (64, 1, 1, 1000, 1),
                                                      (32, 9, 13, 48, 4)])
def test_pointwise_keeps_height_and_width(c, h, w, filters, groups):
    d = Design()
    x = d.input(c, h, w)
    pw = d.add("Pointwise", x, out_channels=filters, groups=groups)
    conv = d.add("Conv2d", x, out_channels=filters, kernel=1, padding=0, groups=groups)
    d.add("Output", pw)
    d.add("Output", conv)
    # common practice: a 1×1 convolution keeps H×W and sets the channel count to its number of filters
    assert tuple(d.analysis().shape(pw)) == tuple(d.analysis().shape(conv)) == (filters, h, w)


@pytest.mark.parametrize("kind, settings", [("MaxPool2d", {"kernel": 2, "stride": 2}),
                                            ("MaxPool2d", {"kernel": 3, "stride": 2, "padding": 1}),
                                            ("AvgPool2d", {"kernel": [3, 2], "stride": [1, 2], "ceil_mode": True}),
                                            ("AdaptiveAvgPool2d", {"output": 1}),
                                            ("AdaptiveAvgPool2d", {"output": [2, 3]})])
@pytest.mark.parametrize("channels", [1, 3, 512])
def test_pooling_keeps_channels(kind, settings, channels):
    d = Design()
    y = d.add(kind, d.input(channels, 17, 12), **settings)
    d.add("Output", y)
    # common practice: pooling keeps the channel count
    assert d.analysis().shape(y).channels == channels


def _conv_grid(n: int):
    rng = random.Random(2016)
    grid = []
    while len(grid) < n:
        h, k, s, p, d = rng.randint(1, 20), rng.randint(1, 7), rng.randint(1, 4), rng.randint(0, 3), rng.randint(1, 3)
        if h + 2 * p - d * (k - 1) - 1 >= 0:
            grid.append((h, k, s, p, d))
    return grid


@pytest.mark.parametrize("h, k, s, p, d", _conv_grid(40))
def test_conv2d_output_size_formula(h, k, s, p, d):
    formula = (h + 2 * p - d * (k - 1) - 1) // s + 1  # PyTorch documentation of nn.Conv2d, "Shape" section
    design = Design()
    y = design.add("Conv2d", design.input(2, h, 9), out_channels=3, kernel=[k, 1], stride=[s, 1], padding=[p, 0],
                   dilation=[d, 1])
    design.add("Output", y)
    ours = design.analysis().shape(y)[1]
    # PyTorch itself as reference: the height of nn.Conv2d's output on a zero input
    theirs = torch.nn.Conv2d(2, 3, (k, 1), (s, 1), (p, 0), (d, 1))(torch.zeros(1, 2, h, 9)).shape[2]
    assert ours == formula == theirs
