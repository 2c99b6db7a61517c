"""Budgets, first-order latency on a target (roofline), and pinned baselines."""
from __future__ import annotations

import pytest

from layerloom import Design, Ledger
from layerloom.core.baseline import compare, snapshot
from layerloom.core.fileformat import dumps, parse
from layerloom.core.targets import PRESETS, Target

# A made-up target for hand-worked numbers: 48 GMAC/s and 4 GB/s, so its ridge point (where a
# block turns from memory- to compute-bound) is 48e9 / 4e9 = 12 MACs per byte; no overhead.
BOARD = Target("worked example", 48e9, 4e9, 0.0)


def one_conv(kernel: int) -> tuple[Design, str]:
    d = Design()
    x = d.input(64, 56, 56)
    c = d.add("Conv2d", x, out_channels=64, kernel=kernel, padding=kernel // 2, bias=False)
    d.add("Output", c)
    return d, c


def test_roofline_of_a_compute_bound_3x3_convolution():
    d, c = one_conv(3)
    row = next(r for r in Ledger(d.analysis(), BOARD).rows if r.block == c)
    # MACs = 56·56 output positions × 64 filters × 64·3·3 = 115,605,504
    assert row.macs == 115_605_504
    # bytes moved at fp32: weights 64·64·9·4 = 147,456; input and output 64·56·56·4 = 802,816 each
    assert row.moved == 147_456 + 2 * 802_816
    # intensity 115,605,504 / 1,753,088 ≈ 65.9 MACs per byte, above the ridge point of 12
    assert row.intensity == pytest.approx(65.94, abs=0.01)
    # time = max(115,605,504 / 48e9 = 2.408 ms, 1,753,088 / 4e9 = 0.438 ms)
    assert row.latency == pytest.approx(2.4084e-3, rel=1e-3)
    assert row.bound == "compute"


def test_roofline_of_a_memory_bound_1x1_convolution():
    d, c = one_conv(1)
    row = next(r for r in Ledger(d.analysis(), BOARD).rows if r.block == c)
    # MACs = 56·56 × 64 × 64 = 12,845,056; bytes = 64·64·4 + 2 × 802,816 = 1,622,016
    assert (row.macs, row.moved) == (12_845_056, 1_622_016)
    # intensity ≈ 7.9 MACs/byte, below 12: time = 1,622,016 / 4e9 = 0.4055 ms > 12,845,056 / 48e9
    assert row.intensity == pytest.approx(7.92, abs=0.01)
    assert row.latency == pytest.approx(0.4055e-3, rel=1e-3)
    assert row.bound == "memory"


def test_pointwise_has_lower_intensity_than_3x3_with_the_same_channels():
    """A 1×1 convolution reuses each loaded value less than a 3×3 (common practice)."""
    for c, h in ((32, 28), (256, 14), (512, 7)):
        rows = {}
        for k in (1, 3):
            d = Design()
            x = d.add("Conv2d", d.input(c, h, h), out_channels=c, kernel=k, padding=k // 2)
            d.add("Output", x)
            rows[k] = next(r for r in Ledger(d.analysis()).rows if r.block == x)
        assert rows[1].intensity < rows[3].intensity


def test_every_preset_states_its_assumptions():
    for t in PRESETS:
        assert t.macs_per_second > 0 and t.bytes_per_second > 0 and len(t.assumptions) > 20


def chain_design() -> tuple[Design, list[str]]:
    d = Design()
    ids = [d.input(3, 64, 64)]
    for width in (16, 32, 64, 128):
        ids.append(d.add("Conv2d", ids[-1], out_channels=width, kernel=3, padding=1))
    d.add("Output", ids[-1])
    return d, ids


def test_budget_is_passed_at_the_right_block_and_clears_when_the_design_fits():
    d, ids = chain_design()
    ledger = d.ledger()
    cumulative = list(ledger.cumulative_weights)
    # weights per conv: 3·16·9+16 = 448, 16·32·9+32 = 4,640, 32·64·9+64 = 18,496, 64·128·9+128 = 73,856
    assert [int(v) for v in cumulative[1:5]] == [448, 5_088, 23_584, 97_440]
    d.set_field("budget", {"weights": 20_000})
    (f,) = [f for f in d.findings() if f.code == "budget.weights"]
    assert f.block == ids[3] and f.severity == "warning"  # 23,584 > 20,000 at the third convolution
    assert "20 K" in f.message and "97.4 K" in f.message and "487 %" in f.message
    assert f.badge == "97.4 K > 20 K"  # the design's total over its limit: a budget passed, not a clash
    d.set(ids[4], out_channels=8)  # last conv now 64·8·9+8 = 4,616 weights: total 28,200, still over at ids[3]
    assert [f.block for f in d.findings() if f.code == "budget.weights"] == [ids[3]]
    d.set(ids[3], out_channels=16)  # 32·16·9+16 = 4,624 and 16·8·9+8 = 1,160: total 10,872
    assert not [f for f in d.findings() if f.code.startswith("budget.")]


def test_memory_and_latency_budgets():
    d, ids = chain_design()
    d.set_field("budget", {"memory": 100_000, "latency_ms": 0.5})
    codes = {f.code for f in d.findings()}
    assert "budget.memory" in codes and "budget.no_target" in codes
    d.set_field("target", BOARD)
    latency = d.ledger().totals.latency
    assert latency > 0.5e-3
    assert "budget.latency_ms" in {f.code for f in d.findings()}
    with pytest.raises(ValueError, match="budget macs must be a number above 0"):
        d.set_field("budget", {"macs": -3})


def test_baseline_round_trip_and_comparison():
    d, ids = chain_design()
    d.set_field("target", BOARD)
    d.set_field("budget", {"macs": 10 ** 9})
    d.set_field("baseline", snapshot(d.ledger(), "before squeeze"))
    # put a 1×1 squeeze to 32 channels in front of the last 3×3 convolution
    d.remove(ids[4])
    sq = d.add("Pointwise", ids[3], out_channels=32)
    last = d.add("Conv2d", sq, out_channels=128, kernel=3, padding=1)
    d.add("Output", last)
    again = parse(dumps(d))
    assert dumps(again) == dumps(d)
    diffs = {x.metric: x for x in compare(again.ledger(), again.baseline)}
    # last conv MACs before: 64·64 positions × 128 × 64·9 = 301,989,888; after: squeeze 64·64×32×64 = 8,388,608
    # plus 64·64 × 128 × 32·9 = 150,994,944
    assert diffs["macs"].delta == 8_388_608 + 150_994_944 - 301_989_888
    assert diffs["macs"].percent == pytest.approx(100 * diffs["macs"].delta / diffs["macs"].baseline)
    assert set(diffs) == {"weights", "macs", "peak_memory", "latency"}


def test_baseline_from_another_file_is_estimated_on_our_target(tmp_path):
    from layerloom.core.baseline import snapshot_of_file
    from layerloom.core.fileformat import LoomFileError, save

    other, _ = chain_design()
    save(other, tmp_path / "other.loom")
    data = snapshot_of_file(tmp_path / "other.loom", BOARD)
    assert data["totals"]["macs"] == other.ledger().totals.macs
    assert data["target"] == BOARD.name and data["totals"]["latency"] == Ledger(other.analysis(), BOARD).totals.latency
    (tmp_path / "broken.loom").write_text("{", encoding="utf-8")
    with pytest.raises(LoomFileError, match="broken.loom"):
        snapshot_of_file(tmp_path / "broken.loom")


def test_every_preset_target_survives_saving_exactly():
    """A saved and reopened design estimates the same latency to the last bit (10 µs was written
    as 10.000000000000002 and read back as a slightly different overhead)."""
    from layerloom.core.targets import PRESETS, Target

    for t in PRESETS:
        assert Target.from_data(t.to_data()) == t, t.name
