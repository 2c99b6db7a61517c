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
