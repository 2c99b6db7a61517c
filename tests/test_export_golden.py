"""Golden files: each sample in samples/ exported to tests/golden/<sample>.py, checked in, so a
change in the generator shows up as a readable diff. A sample with error findings must be refused
and has no golden file.

Regenerate after an intended change: LAYERLOOM_UPDATE_GOLDEN=1 pytest tests/test_export_golden.py
"""
from __future__ import annotations

import os
from pathlib import Path

import pytest

from layerloom import load
from layerloom.core.findings import ERROR
from layerloom.export import ExportRefused, module_source, verify

ROOT = Path(__file__).resolve().parents[1]
GOLDEN = Path(__file__).resolve().parent / "golden"
SAMPLES = sorted((ROOT / "samples").glob("*.loom"))
DATE = "2024-01-01"  # fixed, so the header's date line is stable
UPDATE = os.environ.get("LAYERLOOM_UPDATE_GOLDEN") == "1"


def test_samples_exist_and_every_golden_file_has_its_sample():
    assert SAMPLES, "samples/*.loom is empty"
    assert {p.stem for p in GOLDEN.glob("*.py")} <= {p.stem for p in SAMPLES}


@pytest.mark.parametrize("sample", SAMPLES, ids=lambda p: p.stem)
def test_sample_export_matches_its_golden_file(sample):
    design = load(sample)
    golden = GOLDEN / f"{sample.stem}.py"
    if any(f.severity == ERROR for f in design.findings()):
        with pytest.raises(ExportRefused):
            module_source(design, date=DATE)
        assert not golden.exists(), f"{golden.name} belongs to a sample that is now refused"
        return
    source = module_source(design, date=DATE)
    if UPDATE:
        golden.write_text(source, encoding="utf-8")
    assert golden.exists(), f"no golden file for {sample.name}; run with LAYERLOOM_UPDATE_GOLDEN=1"
    assert source == golden.read_text(encoding="utf-8"), f"export of {sample.name} differs from {golden.name}"
    report = verify(design, golden)  # the checked-in file itself agrees with the ledger in torch
    assert report.ok, report.table()
