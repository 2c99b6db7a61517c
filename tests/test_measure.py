"""Measure and calibrate. Timing on a shared machine is noisy, so these tests check structure and
sanity only (every block timed, times positive, the whole within a factor of the sum of blocks),
never absolute times; calibration is checked exactly on times made by a known roofline."""
from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import small_designs
from layerloom.core.calibrate import PLAUSIBLE, Implausible, Sample, calibrate, mape, predict, samples, split_halves
from layerloom.core.fileformat import LoomFileError, dumps, load, parse, save
from layerloom.core.ledger import Ledger
from layerloom.core.measurement import compare
from layerloom.core.targets import Target
from layerloom.measure import timing
from layerloom.measure.timing import Cancelled, measure

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def measured():
    design = small_designs.residual_motifs(batch=2)
    return design, measure(design, repeat=3, warmup=1, threads=1)


def test_every_working_block_is_timed_and_times_are_sane(measured):
    design, m = measured
    ledger = design.ledger()
    working = {b for b, w in zip(ledger.order, ledger.working) if w}
    assert set(m.blocks) == working and len(working) >= 6
    assert all(t > 0 and s >= 0 for t, s in m.blocks.values())
    blocks = sum(t for t, _ in m.blocks.values())
    assert m.total > 0 and blocks / 10 < m.total < blocks * 10  # same work, run together or one by one
    assert m.machine.threads == 1 and m.machine.torch_version and m.machine.cpu and m.batch == 2 and m.repeat == 3
    rows = compare(ledger, m)
    assert [r.block for r in rows] == [b for b in ledger.order if b in working]
    assert all(r.estimated is None for r in rows)  # the design has no target


def test_progress_counts_every_timed_call_and_cancel_stops():
    design = small_designs.plain_stack()
    seen = []
    measure(design, repeat=2, warmup=1, progress=lambda done, total: seen.append((done, total)))
    total = seen[-1][1]
    assert [d for d, _ in seen] == list(range(1, total + 1))
    working = int(design.ledger().working.sum())
    assert total == (1 + 2) + working * (1 + 2)
    with pytest.raises(Cancelled):
        measure(design, repeat=2, cancelled=lambda: True)


def test_onnxruntime_times_the_same_blocks():
    pytest.importorskip("onnxruntime")
    design = small_designs.branches_concat()
    m = measure(design, repeat=2, warmup=1, runtime="onnxruntime", threads=1)
    ledger = design.ledger()
    assert set(m.blocks) == {b for b, w in zip(ledger.order, ledger.working) if w}
    assert m.machine.runtime.startswith("onnxruntime") and all(t > 0 for t, _ in m.blocks.values())


def test_calibration_recovers_a_synthetic_roofline_exactly():
    ledger = load(ROOT / "samples" / "fastener_sorter.loom").ledger()
    true = Target("synthetic", 37e9, 5.5e9, 7e-6)
    rows = [r for r in ledger.rows if r.kind != "Motif" and r.moved]
    data = [Sample(r.name, float(r.macs), float(r.moved), 0.0) for r in rows]
    times = predict(true, data)
    data = [s._replace(seconds=float(t)) for s, t in zip(data, times)]
    kinds = ["compute" if s.macs / true.macs_per_second > s.moved / true.bytes_per_second else "memory" for s in data]
    assert {"compute", "memory"} <= set(kinds)  # both sorts of block are used
    fitted = calibrate(data, "this machine, 1 thread")
    assert fitted.macs_per_second == pytest.approx(true.macs_per_second, rel=1e-9)
    assert fitted.bytes_per_second == pytest.approx(true.bytes_per_second, rel=1e-9)
    assert fitted.overhead == pytest.approx(true.overhead, rel=1e-9)
    assert mape(fitted, data) == pytest.approx(0, abs=1e-9)


def _sample_rows(ledger):
    return [Sample(r.name, float(r.macs), float(r.moved), 0.0) for r in ledger.rows if r.kind != "Motif" and r.moved]


def test_blocks_without_macs_timed_at_the_overhead_give_no_millionfold_bandwidth():
    """A loaded machine: blocks without MACs take the per-layer overhead and no more, so the times
    leave the bandwidth undetermined. It was set to a million times the MAC rate (33.1 GMAC/s gave
    3.31e+07 GB/s); now no fit uses a placeholder and the one kept is within PLAUSIBLE."""
    data = _sample_rows(load(ROOT / "samples" / "fastener_sorter.loom").ledger())
    data = [s._replace(seconds=s.macs / 33.1e9 + 6e-6) for s in data]
    assert any(s.macs == 0 for s in data) and any(s.macs > 0 for s in data)
    fitted = calibrate(data, "this machine, 1 thread")
    assert fitted.bytes_per_second < 1e13 and fitted.macs_per_second == pytest.approx(33.1e9, rel=0.01)
    assert mape(fitted, data) < 1  # every block predicted within 1 %


@pytest.mark.parametrize("bytes_per_second, overhead, figure", [
    (1e15, 7e-6, "memory bandwidth, 1e+06 GB/s"),  # copies timed faster than any memory moves them
    (5.5e9, 2.0, "per-layer overhead, 2e+06 µs")])  # a stall of seconds in every block
def test_a_calibration_no_computer_has_is_refused_naming_the_figure(bytes_per_second, overhead, figure):
    """(Times at the timer's resolution, a MAC rate beyond any computer's: the two tests below.)"""
    data = _sample_rows(load(ROOT / "samples" / "fastener_sorter.loom").ledger())
    true = Target("impossible", 37e9, bytes_per_second, overhead)
    data = [s._replace(seconds=float(t)) for s, t in zip(data, predict(true, data))]
    with pytest.raises(Implausible, match="^" + re.escape(f"the calibrated {figure}, is not one a computer has (")):
        calibrate(data, "this machine, 1 thread")
    assert [p[0] for p in PLAUSIBLE] == ["MAC rate", "memory bandwidth", "per-layer overhead"]


class _Clock:
    """A fake ``time`` for the timing module: each timed call (a reading before, one after) lasts
    the next of ``durations``."""

    def __init__(self, durations):
        self.durations, self.now, self.readings = iter(durations), 0.0, 0

    def perf_counter(self) -> float:
        self.readings += 1
        if self.readings % 2 == 0:
            self.now += next(self.durations)
        return self.now


def _timed_rows(design):
    """Samples (seconds 0) of the blocks ``measure`` times, in the order it times them."""
    ledger = design.ledger()
    working = {b for b, w in zip(ledger.order, ledger.working) if w}
    return [Sample(r.name, float(r.macs), float(r.moved), 0.0) for r in ledger.rows if r.block in working]


def test_an_implausible_calibration_is_measured_again_and_never_kept(tmp_path, monkeypatch, capsys):
    """With --repeat 1 every block is timed once after the whole network. The first measurement
    times every call at 1 ns (the timer's resolution); the second follows a known roofline, which
    is what is kept."""
    from layerloom.cli import main

    design = small_designs.plain_stack()
    path = tmp_path / "a.loom"
    save(design, path)
    rows = _timed_rows(design)
    true = Target("known", 37e9, 5.5e9, 7e-6)
    roofline = [float(t) for t in predict(true, rows)]
    monkeypatch.setattr(timing, "time", _Clock([1e-9] * (1 + len(rows)) + [sum(roofline)] + roofline))
    assert main(["measure", str(path), "--repeat", "1", "--threads", "1", "--save"]) == 0
    note = capsys.readouterr().err
    assert note.startswith("note: the calibrated MAC rate, ") and "measuring again (2 of 3)" in note
    kept = load(path).target
    assert kept.macs_per_second == pytest.approx(37e9, rel=1e-6)
    assert kept.bytes_per_second == pytest.approx(5.5e9, rel=1e-6) and kept.overhead == pytest.approx(7e-6, rel=1e-6)


def test_a_calibration_implausible_three_times_is_refused_and_nothing_is_saved(tmp_path, monkeypatch, capsys):
    from layerloom.cli import main

    design = small_designs.plain_stack()
    path = tmp_path / "a.loom"
    save(design, path)
    before = path.read_text(encoding="utf-8")
    monkeypatch.setattr(timing, "time", _Clock(iter(lambda: 1e-9, None)))  # every call: 1 ns
    assert main(["measure", str(path), "--repeat", "1", "--threads", "1", "--save"]) == 2
    err = capsys.readouterr().err
    assert "the calibrated MAC rate, " in err and err.rstrip().endswith("refused after 3 measurements")
    assert "Traceback" not in err and path.read_text(encoding="utf-8") == before


def test_calibration_on_a_measurement_predicts_held_out_blocks(measured):
    design, m = measured
    data = samples(Ledger(design.analysis()), m)
    fit_half, held = split_halves(data)
    assert len(fit_half) + len(held) == len(data) and not {s.name for s in fit_half} & {s.name for s in held}
    target = calibrate(data, "this machine, 1 thread")
    assert target.macs_per_second > 0 and target.bytes_per_second > 0 and target.overhead >= 0
    other = small_designs.branches_concat(batch=2)
    err = mape(target, samples(Ledger(other.analysis()), measure(other, repeat=3, warmup=1, threads=1)))
    assert np.isfinite(err) and err >= 0
    with pytest.raises(ValueError, match="batch"):
        samples(Ledger(small_designs.residual_motifs(batch=4).analysis()), m)


def test_measurement_is_kept_in_the_file_and_old_files_still_load(measured, tmp_path):
    design, m = measured
    design.set_field("measurement", m)
    path = tmp_path / "m.loom"
    save(design, path)
    again = load(path)
    assert again.measurement == m
    data = json.loads(dumps(design))
    assert data["measurement"]["cpu"] == m.machine.cpu and data["measurement"]["threads"] == 1
    del data["measurement"]
    assert parse(json.dumps(data)).measurement is None  # a file without one still loads
    data["measurement"] = {**m.to_data(), "total_s": -1}
    with pytest.raises(LoomFileError, match="measurement.total_s"):
        parse(json.dumps(data))


def _run(*args):
    return subprocess.run([sys.executable, "-m", "layerloom", *args], capture_output=True, text=True, cwd=ROOT,
                          env={"PYTHONPATH": str(ROOT / "src"), "PATH": "/usr/bin:/bin"}, timeout=300)


def test_measure_command_reports_calibrates_and_saves(tmp_path):
    path, other = tmp_path / "a.loom", tmp_path / "b.loom"
    save(small_designs.plain_stack(), path)
    save(small_designs.branches_concat(), other)
    r = _run("measure", str(path), "--repeat", "3", "--threads", "1", "--holdout", str(other), "--save", "--json")
    assert r.returncode == 0, r.stderr
    out = json.loads(r.stdout)
    assert len(out["blocks"]) == int(small_designs.plain_stack().ledger().working.sum())
    assert all(b["measured"] > 0 and b["estimated"] > 0 and b["ratio"] > 0 for b in out["blocks"])
    assert set(out["holdout_mape_percent"]) == {"other half of the blocks", f"all blocks of {other}"}
    kept = load(path)
    assert kept.measurement is not None and kept.target.name == "this machine, 1 thread"
    text = _run("measure", str(path), "--repeat", "2", "--target", "laptop CPU, 8 cores")
    assert text.returncode == 0 and "measured ÷ est." in text.stdout and "First-order" in text.stdout
    bad = _run("measure", str(path), "--repeat", "0")
    assert bad.returncode == 2 and "--repeat" in bad.stderr and "Traceback" not in bad.stderr
    clash = _run("measure", "samples/shelf_gap_counter_clash.loom", "--repeat", "1")
    assert clash.returncode == 2 and "error finding" in clash.stderr and "Traceback" not in clash.stderr


def test_measure_names_only_the_option_out_of_range():
    repeat = _run("measure", "samples/fastener_sorter.loom", "--repeat", "0")
    threads = _run("measure", "samples/fastener_sorter.loom", "--threads", "0")
    assert repeat.returncode == threads.returncode == 2
    assert repeat.stderr.strip() == "layerloom: --repeat must be at least 1, not 0"
    assert threads.stderr.strip() == "layerloom: --threads must be at least 1, not 0"
