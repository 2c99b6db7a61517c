"""Published architectures and small networks of our own written directly in PyTorch, as the
outside side of the import round trips (no torchvision: the classes are written here).

ResNet-50 follows torchvision's variant (stride 2 in the 3×3 convolution of each downsampling
bottleneck; torchvision model documentation: 25,557,032 parameters, 4.09 GFLOPS at 3×224×224).
"""
from __future__ import annotations

import torch
import torch.nn.functional as F
from torch import nn


class Bottleneck(nn.Module):
    """He et al. 2016, Fig. 5 right: 1×1 reduce, 3×3, 1×1 expand, with a residual addition."""

    def __init__(self, in_ch: int, width: int, stride: int = 1):
        super().__init__()
        out = width * 4
        self.conv1 = nn.Conv2d(in_ch, width, 1, bias=False)
        self.bn1 = nn.BatchNorm2d(width)
        self.conv2 = nn.Conv2d(width, width, 3, stride, 1, bias=False)
        self.bn2 = nn.BatchNorm2d(width)
        self.conv3 = nn.Conv2d(width, out, 1, bias=False)
        self.bn3 = nn.BatchNorm2d(out)
        self.relu = nn.ReLU(inplace=True)
        self.downsample = None
        if stride != 1 or in_ch != out:
            self.downsample = nn.Sequential(nn.Conv2d(in_ch, out, 1, stride, bias=False), nn.BatchNorm2d(out))

    def forward(self, x):
        identity = x
        y = self.relu(self.bn1(self.conv1(x)))
        y = self.relu(self.bn2(self.conv2(y)))
        y = self.bn3(self.conv3(y))
        if self.downsample is not None:
            identity = self.downsample(x)
        return self.relu(y + identity)


class ResNet50(nn.Module):
    def __init__(self, classes: int = 1000):
        super().__init__()
        self.conv1 = nn.Conv2d(3, 64, 7, 2, 3, bias=False)
        self.bn1 = nn.BatchNorm2d(64)
        self.relu = nn.ReLU(inplace=True)
        self.maxpool = nn.MaxPool2d(3, 2, 1)
        ch, stages = 64, []
        for width, blocks, stride in ((64, 3, 1), (128, 4, 2), (256, 6, 2), (512, 3, 2)):
            units = []
            for i in range(blocks):
                units.append(Bottleneck(ch, width, stride if i == 0 else 1))
                ch = width * 4
            stages.append(nn.Sequential(*units))
        self.layer1, self.layer2, self.layer3, self.layer4 = stages
        self.avgpool = nn.AdaptiveAvgPool2d(1)
        self.fc = nn.Linear(2048, classes)

    def forward(self, x):
        x = self.maxpool(self.relu(self.bn1(self.conv1(x))))
        x = self.layer4(self.layer3(self.layer2(self.layer1(x))))
        return self.fc(torch.flatten(self.avgpool(x), 1))


class SqueezeGate(nn.Module):
    """A squeeze-and-excite gate written with mean over H, W, as many code bases do."""

    def __init__(self, ch: int, squeeze: int):
        super().__init__()
        self.reduce = nn.Conv2d(ch, squeeze, 1)
        self.expand = nn.Conv2d(squeeze, ch, 1)

    def forward(self, x):
        s = x.mean((2, 3), keepdim=True)
        return x * torch.sigmoid(self.expand(F.relu(self.reduce(s))))


class InvertedUnit(nn.Module):
    """1×1 expand → depthwise 3×3 → gate → 1×1 project, residual when the shape is kept."""

    def __init__(self, ch: int, out: int, expand: int, stride: int):
        super().__init__()
        hidden = ch * expand
        self.expand = nn.Sequential(nn.Conv2d(ch, hidden, 1, bias=False), nn.BatchNorm2d(hidden), nn.ReLU6())
        self.dw = nn.Sequential(nn.Conv2d(hidden, hidden, 3, stride, 1, groups=hidden, bias=False),
                                nn.BatchNorm2d(hidden), nn.Hardswish())
        self.gate = SqueezeGate(hidden, max(hidden // 4, 8))
        self.project = nn.Sequential(nn.Conv2d(hidden, out, 1, bias=False), nn.BatchNorm2d(out))
        self.residual = stride == 1 and ch == out

    def forward(self, x):
        y = self.project(self.gate(self.dw(self.expand(x))))
        return x + y if self.residual else y


class SeedlingCounter(nn.Module):
    """Our own scenario: counting seedlings in tray photos on a greenhouse camera. A small network
    that uses most mappable operations: grouped, depthwise, dilated and transposed convolutions,
    batch norms, several activations, pools, upsampling, concatenation, a gate, Flatten by view,
    dropout and a classifier."""

    def __init__(self, classes: int = 6):
        super().__init__()
        self.stem = nn.Conv2d(3, 16, 3, 2, 1, bias=False)
        self.stem_bn = nn.BatchNorm2d(16)
        self.units = nn.Sequential(InvertedUnit(16, 24, 4, 2), InvertedUnit(24, 24, 4, 1), InvertedUnit(24, 24, 4, 1),
                                   InvertedUnit(24, 40, 3, 2))
        self.grouped = nn.Conv2d(40, 40, 3, padding=2, dilation=2, groups=4)
        self.side = nn.Conv2d(40, 8, 1)
        self.up = nn.ConvTranspose2d(40, 16, 2, 2)
        self.pool = nn.MaxPool2d(2)
        self.avg = nn.AvgPool2d(3, 1, 1)
        self.head = nn.Linear(64 * 2 * 2, 32)
        self.drop = nn.Dropout(0.2)
        self.fc = nn.Linear(32, classes)

    def forward(self, x):
        x = F.silu(self.stem_bn(self.stem(x)))
        x = self.units(x)
        g = F.leaky_relu(self.grouped(x), 0.1)
        up = self.pool(torch.tanh(self.up(g)))
        side = F.interpolate(self.avg(self.side(g)), scale_factor=1, mode="nearest")
        x = torch.cat([g, up, side], dim=1)
        x = F.adaptive_avg_pool2d(x, 2)
        x = x.view(x.size(0), -1)
        return self.fc(self.drop(F.gelu(self.head(x))))


class ChannelShuffleNet(nn.Module):
    """Two grouped 1×1 convolutions with a channel shuffle between them (view / transpose / view),
    which no block kind describes, then a projection that an unmapped F.conv2d computes with its
    own weight: both must import whole as unmapped operations."""

    def __init__(self, groups: int = 4):
        super().__init__()
        self.groups = groups
        self.conv_a = nn.Conv2d(3, 32, 3, 2, 1)
        self.conv_b = nn.Conv2d(32, 32, 1, groups=groups)
        self.conv_c = nn.Conv2d(32, 32, 1, groups=groups)
        self.mix = nn.Parameter(torch.randn(16, 32, 3, 3) * 0.1)
        self.fc = nn.Linear(16, 10)

    def forward(self, x):
        x = F.relu(self.conv_b(self.conv_a(x)))
        n, c, h, w = x.shape
        x = x.view(n, self.groups, c // self.groups, h, w).transpose(1, 2).contiguous().view(n, c, h, w)
        x = F.conv2d(self.conv_c(x), self.mix, padding=1)
        return self.fc(torch.flatten(F.adaptive_avg_pool2d(x, 1), 1))
