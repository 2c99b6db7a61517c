"""leaf-blight-grader: a PyTorch module exported from a Layerloom design.

Input (NCHW): leaf_photo (N, 3, 192, 192).
Totals: 81,845 weights (learned parameters) and 61,607,168 MACs per sample
(multiply-accumulates of convolutions and linear layers).
torch.jit.script accepts it (every kind used allows it).
Exported on 2024-01-01.

Each motif is one class: its constructor takes the channel counts of its input ports and the
motif's parameters (with the motif's defaults), each use passes its own values, and a repeat x N
is an nn.Sequential of N instances.
"""

import torch
from torch import nn

__all__ = ["LeafBlightGrader"]


class InvertedResidual(nn.Module):
    """Motif 'inverted_residual' for any input channels; the comments show its first use: (N, 24, 48, 48), expand=96, width=24."""

    def __init__(self, in_channels, expand=96, width=24):
        super().__init__()
        self.expand = nn.Conv2d(in_channels, expand, kernel_size=1, bias=False)
        self.bn_1 = nn.BatchNorm2d(expand)
        self.relu6_1 = nn.ReLU6()
        self.spatial = nn.Conv2d(expand, expand, kernel_size=3, padding=1, groups=expand, bias=False)
        self.bn_2 = nn.BatchNorm2d(expand)
        self.relu6_2 = nn.ReLU6()
        self.squeeze = nn.AdaptiveAvgPool2d(1)
        self.excite_down = nn.Conv2d(expand, 8, kernel_size=1)
        self.relu_1 = nn.ReLU()
        self.excite_up = nn.Conv2d(8, expand, kernel_size=1)
        self.sigmoid_1 = nn.Sigmoid()
        self.project = nn.Conv2d(expand, width, kernel_size=1, bias=False)
        self.bn_3 = nn.BatchNorm2d(width)

    def forward(self, x):
        expand = self.expand(x)                  # (N, 96, 48, 48)
        bn_1 = self.bn_1(expand)                 # (N, 96, 48, 48)
        relu6_1 = self.relu6_1(bn_1)             # (N, 96, 48, 48)
        spatial = self.spatial(relu6_1)          # (N, 96, 48, 48)
        bn_2 = self.bn_2(spatial)                # (N, 96, 48, 48)
        relu6_2 = self.relu6_2(bn_2)             # (N, 96, 48, 48)
        squeeze = self.squeeze(relu6_2)          # (N, 96, 1, 1)
        excite_down = self.excite_down(squeeze)  # (N, 8, 1, 1)
        relu_1 = self.relu_1(excite_down)        # (N, 8, 1, 1)
        excite_up = self.excite_up(relu_1)       # (N, 96, 1, 1)
        sigmoid_1 = self.sigmoid_1(excite_up)    # (N, 96, 1, 1)
        gate = relu6_2 * sigmoid_1               # (N, 96, 48, 48)
        project = self.project(gate)             # (N, 24, 48, 48)
        bn_3 = self.bn_3(project)                # (N, 24, 48, 48)
        residual = bn_3 + x                      # (N, 24, 48, 48)
        return residual


class LeafBlightGrader(nn.Module):
    """The design 'leaf-blight-grader' (15 blocks)."""

    def __init__(self):
        super().__init__()
        self.stem = nn.Conv2d(3, 16, kernel_size=3, stride=2, padding=1, bias=False)
        self.bn_1 = nn.BatchNorm2d(16)
        self.relu6_1 = nn.ReLU6()
        self.reduce_1 = nn.Conv2d(16, 16, kernel_size=3, stride=2, padding=1, groups=16, bias=False)
        self.widen_1 = nn.Conv2d(16, 24, kernel_size=1, bias=False)
        self.stage_1 = nn.Sequential(*[InvertedResidual(in_channels=24, expand=96, width=24) for _ in range(2)])
        self.reduce_2 = nn.Conv2d(24, 24, kernel_size=3, stride=2, padding=1, groups=24, bias=False)
        self.widen_2 = nn.Conv2d(24, 40, kernel_size=1, bias=False)
        self.stage_2 = nn.Sequential(*[InvertedResidual(in_channels=40, expand=160, width=40) for _ in range(3)])
        self.head = nn.Conv2d(40, 256, kernel_size=1, bias=False)
        self.pool_1 = nn.AdaptiveAvgPool2d(1)
        self.flatten_1 = nn.Flatten(1)
        self.severity = nn.Linear(256, 5)

    def forward(self, leaf_photo):
        stem = self.stem(leaf_photo)         # (N, 16, 96, 96)
        bn_1 = self.bn_1(stem)               # (N, 16, 96, 96)
        relu6_1 = self.relu6_1(bn_1)         # (N, 16, 96, 96)
        reduce_1 = self.reduce_1(relu6_1)    # (N, 16, 48, 48)
        widen_1 = self.widen_1(reduce_1)     # (N, 24, 48, 48)
        stage_1 = self.stage_1(widen_1)      # (N, 24, 48, 48)
        reduce_2 = self.reduce_2(stage_1)    # (N, 24, 24, 24)
        widen_2 = self.widen_2(reduce_2)     # (N, 40, 24, 24)
        stage_2 = self.stage_2(widen_2)      # (N, 40, 24, 24)
        head = self.head(stage_2)            # (N, 256, 24, 24)
        pool_1 = self.pool_1(head)           # (N, 256, 1, 1)
        flatten_1 = self.flatten_1(pool_1)   # (N, 256)
        severity = self.severity(flatten_1)  # (N, 5)
        return severity
