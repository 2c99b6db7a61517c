"""fastener-sorter: a PyTorch module exported from a Layerloom design.

Input (NCHW): camera_crop (N, 3, 128, 128).
Totals: 162,148 weights (learned parameters) and 26,642,688 MACs per sample
(multiply-accumulates of convolutions and linear layers).
torch.jit.script accepts it (every kind used allows it).
Exported on 2024-01-01.
"""

import torch
from torch import nn

__all__ = ["FastenerSorter"]


class FastenerSorter(nn.Module):
    """The design 'fastener-sorter' (29 blocks)."""

    def __init__(self):
        super().__init__()
        self.stem = nn.Conv2d(3, 24, kernel_size=3, stride=2, padding=1, bias=False)
        self.bn_1 = nn.BatchNorm2d(24)
        self.relu_1 = nn.ReLU()
        self.squeeze_1 = nn.Conv2d(24, 16, kernel_size=1, bias=False)
        self.relu_2 = nn.ReLU()
        self.spatial_1 = nn.Conv2d(16, 48, kernel_size=3, stride=2, padding=1, bias=False)
        self.bn_2 = nn.BatchNorm2d(48)
        self.relu_3 = nn.ReLU()
        self.squeeze_2 = nn.Conv2d(48, 24, kernel_size=1, bias=False)
        self.relu_4 = nn.ReLU()
        self.spatial_2 = nn.Conv2d(24, 96, kernel_size=3, stride=2, padding=1, bias=False)
        self.bn_3 = nn.BatchNorm2d(96)
        self.relu_5 = nn.ReLU()
        self.squeeze_3 = nn.Conv2d(96, 32, kernel_size=1, bias=False)
        self.relu_6 = nn.ReLU()
        self.spatial_3 = nn.Conv2d(32, 128, kernel_size=3, stride=2, padding=1, bias=False)
        self.bn_4 = nn.BatchNorm2d(128)
        self.relu_7 = nn.ReLU()
        self.squeeze_4 = nn.Conv2d(128, 48, kernel_size=1, bias=False)
        self.relu_8 = nn.ReLU()
        self.spatial_4 = nn.Conv2d(48, 192, kernel_size=3, padding=1, bias=False)
        self.bn_5 = nn.BatchNorm2d(192)
        self.relu_9 = nn.ReLU()
        self.global_pool = nn.AdaptiveAvgPool2d(1)
        self.flatten_1 = nn.Flatten(1)
        self.dropout_1 = nn.Dropout(0.2)
        self.part_class = nn.Linear(192, 12)

    def forward(self, camera_crop):
        stem = self.stem(camera_crop)            # (N, 24, 64, 64)
        bn_1 = self.bn_1(stem)                   # (N, 24, 64, 64)
        relu_1 = self.relu_1(bn_1)               # (N, 24, 64, 64)
        squeeze_1 = self.squeeze_1(relu_1)       # (N, 16, 64, 64)
        relu_2 = self.relu_2(squeeze_1)          # (N, 16, 64, 64)
        spatial_1 = self.spatial_1(relu_2)       # (N, 48, 32, 32)
        bn_2 = self.bn_2(spatial_1)              # (N, 48, 32, 32)
        relu_3 = self.relu_3(bn_2)               # (N, 48, 32, 32)
        squeeze_2 = self.squeeze_2(relu_3)       # (N, 24, 32, 32)
        relu_4 = self.relu_4(squeeze_2)          # (N, 24, 32, 32)
        spatial_2 = self.spatial_2(relu_4)       # (N, 96, 16, 16)
        bn_3 = self.bn_3(spatial_2)              # (N, 96, 16, 16)
        relu_5 = self.relu_5(bn_3)               # (N, 96, 16, 16)
        squeeze_3 = self.squeeze_3(relu_5)       # (N, 32, 16, 16)
        relu_6 = self.relu_6(squeeze_3)          # (N, 32, 16, 16)
        spatial_3 = self.spatial_3(relu_6)       # (N, 128, 8, 8)
        bn_4 = self.bn_4(spatial_3)              # (N, 128, 8, 8)
        relu_7 = self.relu_7(bn_4)               # (N, 128, 8, 8)
        squeeze_4 = self.squeeze_4(relu_7)       # (N, 48, 8, 8)
        relu_8 = self.relu_8(squeeze_4)          # (N, 48, 8, 8)
        spatial_4 = self.spatial_4(relu_8)       # (N, 192, 8, 8)
        bn_5 = self.bn_5(spatial_4)              # (N, 192, 8, 8)
        relu_9 = self.relu_9(bn_5)               # (N, 192, 8, 8)
        global_pool = self.global_pool(relu_9)   # (N, 192, 1, 1)
        flatten_1 = self.flatten_1(global_pool)  # (N, 192)
        dropout_1 = self.dropout_1(flatten_1)    # (N, 192)
        part_class = self.part_class(dropout_1)  # (N, 12)
        return part_class
