"""ResNet-50 written as a design and exported: PyTorch counts the published figures.

Source of the check values: torchvision model documentation for ResNet50_Weights.IMAGENET1K_V1 —
25,557,032 parameters and 4.09 GFLOPS at 3×224×224 (its GFLOPS are multiply-accumulates).
"""
from __future__ import annotations

from reference_nets import resnet50

from layerloom.export import verify, module_source


def test_exported_resnet50_has_torchvisions_parameters_and_macs():
    design = resnet50()
    report = verify(design, module_source(design))
    assert report.ok, report.table()
    assert report.total.torch_weights == 25_557_032  # sum(p.numel()) in torch; torchvision docs
    assert abs(report.total.torch_macs - 4.09e9) <= 0.005 * 4.09e9  # FlopCounterMode / 2; torchvision docs
