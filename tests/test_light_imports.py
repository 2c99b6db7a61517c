"""Import contract: ``layerloom check`` on a valid file imports neither numpy (only drawing and
measuring need it) nor jsonschema (only a broken file needs its words), ``layerloom ledger`` (as a
table, JSON or CSV, against a pinned baseline or another file) no numpy, and reading a design, its
whole pass and its ledger import no numpy, since a process's start-up is most of the time of a
check. Checked in a fresh interpreter."""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

from layerloom.core.baseline import snapshot
from layerloom.core.fileformat import load, save
from layerloom.core.targets import PRESETS

SAMPLE = Path(__file__).resolve().parents[1] / "samples" / "fastener_sorter.loom"


def _run(code: str) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(p for p in sys.path if p)}
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120)


def _budgeted(tmp_path) -> Path:
    """The sample with a budget it passes (so a budget finding is made) and a pinned baseline."""
    design = load(SAMPLE)
    pinned = snapshot(design.ledger(), "before")
    design.set_field("budget", {"weights": 1000})
    design.set_field("baseline", pinned)
    path = tmp_path / "budgeted.loom"
    save(design, path)
    return path


@pytest.mark.parametrize("budgeted", [False, True])
def test_check_of_a_valid_file_imports_no_numpy_nor_jsonschema(tmp_path, budgeted):
    path = _budgeted(tmp_path) if budgeted else SAMPLE
    done = _run("import sys; from layerloom.cli import main; "
                f"code = main(['check', {str(path)!r}]); "
                "heavy = sorted(m for m in sys.modules if m.split('.')[0] in ('numpy', 'jsonschema')); "
                "assert code == 0 and not heavy, (code, heavy)")
    assert done.returncode == 0, done.stderr[-2000:]
    assert "well formed" in done.stdout
    assert ("budget.weights" in done.stdout) == budgeted


def test_loading_and_finding_import_no_numpy():
    """Reading a file, the whole pass and the findings are plain Python."""
    done = _run("import sys, layerloom; "
                f"d = layerloom.load({str(SAMPLE)!r}); found = d.findings(); "
                "assert d.analysis().live_profile() and 'numpy' not in sys.modules, sorted(sys.modules)")
    assert done.returncode == 0, done.stderr[-2000:]


@pytest.mark.parametrize("options", [[], ["--json"], ["--csv"], ["--target", PRESETS[0].name, "--batch", "4"],
                                     ["--baseline", str(SAMPLE)], ["--baseline", str(SAMPLE), "--json"]])
def test_ledger_imports_no_numpy(tmp_path, options):
    path = _budgeted(tmp_path)
    done = _run("import sys; from layerloom.cli import main; "
                f"code = main(['ledger', {str(path)!r}, *{options!r}]); "
                "assert code == 0 and 'numpy' not in sys.modules, code")
    assert done.returncode == 0, done.stderr[-2000:]
    assert "part_class" in done.stdout  # the table, the JSON and the CSV name each block
    if not options:
        assert "over budget: weights" in done.stdout and "against baseline 'before'" in done.stdout
    if options[:1] == ["--baseline"]:  # the sample itself: its weights unchanged
        assert ("weights                       162 K  was      162 K  change          0 (+0.0 %)" in done.stdout
                or '"metric": "weights", "current": 162148, "baseline": 162148, "delta": 0' in done.stdout)


def test_ledger_still_comes_from_the_package():
    done = _run("import sys, layerloom; from layerloom import Ledger; "
                f"L = Ledger(layerloom.load({str(SAMPLE)!r}).analysis()); "
                "assert L.totals.macs and L.rows and 'numpy' not in sys.modules, sorted(sys.modules)")
    assert done.returncode == 0, done.stderr[-2000:]


def test_a_broken_file_still_gets_jsonschemas_words(tmp_path):
    broken = tmp_path / "broken.loom"
    broken.write_text(SAMPLE.read_text(encoding="utf-8").replace('"batch": 1', '"batch": "one"', 1), encoding="utf-8")
    done = _run(f"from layerloom.cli import main; raise SystemExit(main(['check', {str(broken)!r}]))")
    assert done.returncode == 2
    assert "batch: 'one' is not of type 'integer'" in done.stderr
