"""Fit to budget: the chosen candidate fits and a 10 % larger one of its family does not; width
rounding keeps channel counts multiples of 8 (common practice; MobileNets, Howard et al. 2017, §3.3);
compound scaling grows MACs by about α·β²·γ² ≈ 1.92 per step of φ (Tan & Le 2019, §3.3, eq. 3)."""
from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

import small_designs
from layerloom import Design
from layerloom.core.fileformat import copy, load
from layerloom.core.findings import ERROR
from layerloom.core.fit import (ALPHA, BETA, GAMMA, Candidate, Scaling, apply_edit, family_scaling, fit, pareto,
                                round_channels, scaled_edit)
from layerloom.core.targets import preset

ROOT = Path(__file__).resolve().parents[1]


def _scaled(design, scaling):
    d = copy(design)
    d.apply(scaled_edit(d, scaling))
    return d


def _within(design, budget, target=None) -> bool:
    from layerloom.core.ledger import Ledger

    t = Ledger(design.analysis(), target).totals
    got = {"weights": t.weights, "macs": t.macs, "memory": t.peak_memory,
           "latency_ms": None if t.latency is None else t.latency * 1e3}
    no_errors = not any(f.severity == ERROR for f in design.findings())
    return no_errors and all(got[k] <= v for k, v in budget.items())


CASES = [("leaf_blight_grader.loom", {"macs": 30_000_000, "weights": 100_000}, None),
         ("fastener_sorter.loom", {"macs": 10_000_000, "latency_ms": 1.0}, "phone, 2 big CPU cores"),
         ("fastener_sorter.loom", {"weights": 400_000, "memory": 3 << 20}, None)]


@pytest.mark.parametrize("sample, budget, target", CASES)
def test_chosen_candidate_fits_and_ten_percent_larger_does_not(sample, budget, target):
    design = load(ROOT / "samples" / sample)
    tgt = preset(target) if target else None
    result = fit(design, budget, tgt)
    best = result.best
    assert best is not None and best.fits and all(c.fits for c in result.candidates)
    assert best.macs == max(c.macs for c in result.candidates)
    assert _within(_scaled(design, best.scaling), budget, tgt)
    larger = _scaled(design, family_scaling(best.family, best.multiplier * 1.1))
    assert not _within(larger, budget, tgt)


def test_growing_a_design_that_is_under_budget():
    design = load(ROOT / "samples" / "fastener_sorter.loom")
    totals = design.ledger().totals
    best = fit(design, {"macs": 3 * totals.macs}, families=("width",)).best
    assert best.multiplier > 1 and totals.macs < best.macs <= 3 * totals.macs


@given(st.integers(1, 4096), st.floats(0.05, 8.0))
def test_width_rounding_is_a_multiple_of_8_and_close(c, w):
    r = round_channels(c, w)
    assert r % 8 == 0 and r >= 8 and r >= 0.9 * c * w  # common practice: at most 10 % below
    assert r < max(8, c * w) + 8


def test_width_multiplier_keeps_every_channel_count_a_multiple_of_8_except_the_head():
    design = small_designs.residual_motifs()
    scaled = _scaled(design, Scaling(width=0.77))
    for g in (scaled, *scaled.motifs.values()):
        for b in g.blocks.values():
            for k in ("out_channels", "out_features"):
                v = b.settings.get(k)
                if type(v) is int and b.kind != "Linear":  # the only Linear is the head
                    assert v % 8 == 0, (b.name, v)
        if g is not scaled:
            assert all(v % 8 == 0 for p, v in g.params.items() if p != "stride")
    for b in scaled.of_kind("Motif"):
        assert b.settings["width"] % 8 == 0 and b.settings["out"] % 8 == 0
    head = next(b for b in scaled.of_kind("Linear"))
    assert head.settings["out_features"] == 3  # the classifier keeps its classes
    assert not scaled.findings()


def _repeated_conv_design(size=224, width=96, repeat=10) -> Design:
    """A plain convolutional design whose stages repeat a 3×3 conv motif (depth scales its repeats)."""
    d = Design("plain-conv")
    m = d.motif("conv3", width=width)
    i = m.input()
    m.add("Output", m.add("ReLU", m.add("Conv2d", i, out_channels={"param": "width"}, kernel=3, padding=1)))
    x = d.add("Conv2d", d.input(3, size, size), out_channels=width, kernel=3, stride=2, padding=1)
    x = d.use("conv3", x, repeat=repeat, width=width)
    x = d.add("Conv2d", x, out_channels=2 * width, kernel=3, stride=2, padding=1)
    x = d.use("conv3", x, repeat=repeat, width=2 * width)
    d.add("Output", d.add("Linear", d.add("Flatten", d.add("AdaptiveAvgPool2d", x)), out_features=10))
    return d


def test_compound_scaling_grows_macs_about_192_per_step_of_phi():
    design = _repeated_conv_design()
    macs = [_scaled(design, Scaling(BETA ** phi, GAMMA ** phi, ALPHA ** phi)).ledger().totals.macs
            for phi in (0, 1, 2)]
    per_step = math.sqrt(macs[2] / macs[0])
    expected = ALPHA * BETA ** 2 * GAMMA ** 2  # 1.92 (Tan & Le 2019, §3.3)
    assert expected == pytest.approx(1.92, abs=0.005)
    assert per_step == pytest.approx(expected, rel=0.08), macs  # rounding to multiples of 8 and whole repeats
    assert fit(design, {"macs": macs[1]}, families=("compound",)).best.multiplier == pytest.approx(1.92, rel=0.1)


@pytest.mark.parametrize("family", ["depth", "width", "resolution", "compound"])
def test_each_family_on_a_design_with_repeats(family):
    design = _repeated_conv_design(size=64, width=32, repeat=6)
    budget = {"macs": design.ledger().totals.macs // 2}
    best = fit(design, budget, families=(family,)).best
    assert best.family == family and _within(_scaled(design, best.scaling), budget)
    assert not _within(_scaled(design, family_scaling(family, best.multiplier * 1.1)), budget)
    if family == "depth":
        assert all(1 <= b.settings["repeat"] < 6 for b in _scaled(design, best.scaling).of_kind("Motif"))


def test_applying_a_candidate_is_one_edit_and_adds_no_findings():
    design = load(ROOT / "samples" / "leaf_blight_grader.loom")
    before = [(f.code, f.block) for f in design.findings()]
    budget = {"macs": 30_000_000}
    for c in fit(design, budget).candidates:
        d = copy(design)
        inverse = d.apply(apply_edit(d, c, budget))
        assert not d.findings(), (c.describe(), [f.message for f in d.findings()])
        d.apply(inverse)
        assert [(f.code, f.block) for f in d.findings()] == before


def test_pareto_front_of_the_largest():
    def cand(macs, weights):
        return Candidate("width", 1.0, Scaling(), weights, macs, 0, None, True, 0)
    cs = [cand(10, 5), cand(8, 9), cand(7, 4), cand(10, 5)]
    assert pareto(cs) == [True, True, False, True]


def test_fit_needs_a_budget_and_a_target_for_latency():
    design = small_designs.plain_stack()
    with pytest.raises(ValueError, match="budget"):
        fit(design, {})
    with pytest.raises(ValueError, match="target"):
        fit(design, {"latency_ms": 1.0})
    assert fit(design, {"macs": 1}).best is None  # nothing this small exists


def test_fit_command_writes_the_chosen_candidate(tmp_path):
    out = tmp_path / "fitted.loom"
    r = subprocess.run([sys.executable, "-m", "layerloom", "fit", "samples/fastener_sorter.loom", "--macs", "10M",
                        "--memory", "1MiB", "-o", str(out)], capture_output=True, text=True, cwd=ROOT,
                       env={"PYTHONPATH": str(ROOT / "src"), "PATH": "/usr/bin:/bin"})
    assert r.returncode == 0, r.stderr
    assert "chosen" in r.stdout and "multiple of 8" not in r.stdout
    fitted = load(out)
    assert fitted.budget == {"macs": 10_000_000, "memory": 1 << 20}
    t = fitted.ledger().totals
    assert t.macs <= 10_000_000 and t.peak_memory <= 1 << 20 and not fitted.findings()
    listed = subprocess.run([sys.executable, "-m", "layerloom", "fit", "samples/fastener_sorter.loom", "--macs", "10M",
                             "--json"], capture_output=True, text=True, cwd=ROOT,
                            env={"PYTHONPATH": str(ROOT / "src"), "PATH": "/usr/bin:/bin"})
    data = json.loads(listed.stdout)
    assert data["chosen"]["macs"] <= 10_000_000 and set(data["chosen"]["scaling"]) == {"width", "resolution", "depth"}
    assert sum(c["pareto"] for c in data["candidates"]) >= 1
    bad = subprocess.run([sys.executable, "-m", "layerloom", "fit", "samples/fastener_sorter.loom", "--macs", "ten"],
                         capture_output=True, text=True, cwd=ROOT, env={"PYTHONPATH": str(ROOT / "src")})
    assert bad.returncode == 2 and "--macs 'ten'" in bad.stderr and "Traceback" not in bad.stderr


@pytest.mark.parametrize("typed, limit", [("2000µs", 2.0), ("2000μs", 2.0), ("2000us", 2.0), ("2MS", 2.0),
                                          ("0.002s", 2.0), ("2", 2.0)])
def test_a_latency_limit_reads_in_any_case_and_with_either_micro_sign(typed, limit):
    """'µs' upper-cased is 'ΜS' (a Greek capital), so the micro sign was refused though listed."""
    from types import SimpleNamespace

    from layerloom.fit_command import budget_from

    args = SimpleNamespace(macs="3m", weights=None, memory="4mib", latency=typed)
    assert budget_from(args, Design()) == {"macs": 3_000_000, "memory": 4 << 20, "latency_ms": pytest.approx(limit)}
    with pytest.raises(ValueError, match=r"units s, ms, us, µs$"):
        budget_from(SimpleNamespace(macs=None, weights=None, memory=None, latency="2 parsecs"), Design())
