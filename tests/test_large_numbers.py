"""Costs at the edges of the documented ranges stay exact, and nothing crashes printing them.

Input up to 65,536 × 65,536 (ends.py), batch up to 65,536 (the schema), kernels up to 4,096,
repeat up to 1,000 and motifs nested 60 deep: the ledger, ``check`` and ``export`` must neither
overflow (numpy int64) nor fail to print (Python's limit on long integer strings).
"""
from __future__ import annotations

import json
import math

import pytest
from test_cli import run

from layerloom import Design
from layerloom.core import fileformat, units
from layerloom.core.inference import MAX_NESTING
from layerloom.core.ledger import Ledger

N = 65_536


def conv_macs(batch, c_in, c_out, h_out, w_out, kh, kw, groups=1):
    """The trade formula for a convolution's multiply-accumulates (common practice; PyTorch's
    FlopCounterMode counts twice this): N · C_out · H_out · W_out · (C_in / groups) · kh · kw."""
    return batch * c_out * h_out * w_out * (c_in // groups) * kh * kw


def wide_conv_design() -> Design:
    d = Design("wide", batch=N)
    x = d.input(3, N, N)
    x = d.add("Conv2d", x, out_channels=4096, kernel=[1, 4095], padding=[0, 2047], bias=False)
    x = d.add("ReLU", x)
    d.add("Output", x)
    return d


def nested_design(levels: int, repeat: int) -> Design:
    """Motif m0 holds one 3×3 convolution; m_i holds m_(i−1) repeated; the design uses the last."""
    d = Design("nested", batch=N)
    prev = None
    for i in range(levels):
        m = d.motif(f"m{i}")
        x = m.input()
        x = m.add("Motif", x, motif=prev, repeat=repeat) if prev else m.add(
            "Conv2d", x, out_channels=64, kernel=3, padding=1, bias=False)
        m.add("Output", x)
        prev = f"m{i}"
    x = d.input(64, N, N)
    x = d.add("Motif", x, motif=prev)
    d.add("Output", x)
    return d


def test_a_wide_convolution_on_the_largest_input_and_batch_is_counted_exactly():
    d = wide_conv_design()
    t = d.ledger().totals
    macs = conv_macs(N, 3, 4096, N, N, 1, 4095)
    assert macs > 2 ** 63  # beyond numpy's int64, where the ledger used to wrap or raise
    assert t.macs == macs
    assert t.weights == 4096 * 3 * 4095
    # peak at the ReLU: the convolution's output and its own alive together (not in place), fp32
    assert t.peak_memory == N * (4096 + 4096) * N * N * 4 == 2 ** 63


def test_motifs_nested_60_deep_with_repeat_1000_are_counted_exactly():
    d = nested_design(60, 1000)
    t = d.ledger().totals
    assert t.macs == 1000 ** 59 * conv_macs(N, 64, 64, N, N, 3, 3)
    assert t.weights == 1000 ** 59 * 64 * 64 * 9
    assert d.findings() == []


def test_deeper_nesting_is_a_finding_not_a_crash():
    d = nested_design(MAX_NESTING + 5, 2)
    codes = {f.code for f in d.findings()}
    assert "motif.too_deep" in codes
    Ledger(d.analysis())  # counts what it can


def test_a_shape_beyond_what_is_counted_stops_that_block():
    d = Design("growing")
    x = d.input(N, N, N)
    x = d.add("ConvTranspose2d", x, out_channels=1 << 20, kernel=4096, stride=4096)
    d.add("Output", x)
    (f,) = [f for f in d.findings() if f.code == "shape.too_large"]
    assert "elements per sample" in f.message
    assert d.ledger().totals.macs == 0


def test_a_receptive_field_beyond_a_float_is_shown_as_infinite_and_json_stays_valid(tmp_path):
    # stride 2 with padding 4096 and a 1×1 kernel keeps 8,193 rows and doubles the jump each time
    d = Design("jump")
    x = d.input(1, 8193, 8193)
    m = d.motif("double")
    y = m.add("Conv2d", m.input(), out_channels=1, kernel=1, stride=2, padding=4096)
    m.add("Output", y)
    m = d.motif("wide")
    y = m.add("Motif", m.input(), motif="double", repeat=1000)
    y = m.add("Conv2d", y, out_channels=1, kernel=3, padding=1)
    m.add("Output", y)
    x = d.add("Motif", x, motif="wide", repeat=1000)
    d.add("Output", x)
    assert math.isinf(d.analysis().result(x).rf[0])
    path = tmp_path / "jump.loom"
    fileformat.save(d, path)
    r = run("ledger", str(path), "--json")
    assert r.returncode == 0, r.stderr
    rows = json.loads(r.stdout)["blocks"]
    assert rows[1]["receptive_field"] == [None, None]
    table = run("ledger", str(path))
    assert table.returncode == 0 and "∞" in table.stdout


@pytest.mark.parametrize("make", [wide_conv_design, lambda: nested_design(60, 1000)], ids=["wide", "nested"])
def test_check_ledger_and_export_run_at_the_largest_sizes(make, tmp_path):
    d = make()
    path = tmp_path / "large.loom"
    fileformat.save(d, path)
    exact = d.ledger().totals.macs
    for args in (("check",), ("ledger",), ("ledger", "--csv"), ("ledger", "--target", "phone, 2 big CPU cores")):
        r = run(*args, str(path))
        assert r.returncode == 0 and not r.stderr, (args, r.stderr)
    data = json.loads(run("ledger", str(path), "--json").stdout)
    assert data["totals"]["macs"] == exact  # JSON carries the exact integer
    r = run("export", str(path), "-o", str(tmp_path / "large.py"))
    assert r.returncode == 0, r.stderr
    r = run("export", str(path), "-o", str(tmp_path / "large.py"), "--verify")
    assert r.returncode == 2 and "would need about" in r.stderr and "Traceback" not in r.stderr


def test_units_print_integers_of_any_size_without_a_float():
    assert units.count(10 ** 400) == "1e+400"
    assert units.count(123_456 * 10 ** 300) == "1.23e+305"
    assert units.size(2 ** 80).endswith(" B")
    assert units.count(float("inf")) == "∞"
    assert units.ratio(10 ** 400, 2.0) == math.inf
