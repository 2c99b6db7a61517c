"""The command line on the samples, as a user runs it (in a subprocess, through ``python -m``)."""
from __future__ import annotations

import csv
import io
import json
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = sorted((ROOT / "samples").glob("*.loom"))


def run(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "layerloom", *args], capture_output=True, text=True,
                          cwd=ROOT, env={"PYTHONPATH": str(ROOT / "src"), "PATH": "/usr/bin:/bin"})


def test_samples_exist_and_one_has_a_deliberate_clash():
    assert len(SAMPLES) >= 3
    codes = {p.name: run("check", str(p)).returncode for p in SAMPLES}
    assert sorted(codes.values()) == [0] * (len(SAMPLES) - 1) + [1], codes


def test_check_lists_the_clash_with_its_mend_and_exits_1():
    r = run("check", "samples/shelf_gap_counter_clash.loom")
    assert r.returncode == 1
    assert "join.channels" in r.stdout and "64 channels to 128 channels" in r.stdout
    assert "mend: Insert a 1×1 projection to 128 channels and stride 2" in r.stdout
    assert r.stdout.splitlines()[-1].endswith("not well formed — 1 error, 0 warnings, 0 notes")


def test_check_json():
    r = run("check", "samples/shelf_gap_counter_clash.loom", "--json")
    data = json.loads(r.stdout)
    assert data["errors"] == 1
    (f,) = data["findings"]
    assert f["code"] == "join.channels" and f["block_name"] == "add_2" and f["mends"]


def test_ledger_table_totals_match_json_and_csv():
    r = run("ledger", "samples/fastener_sorter.loom")
    assert r.returncode == 0, r.stderr
    data = json.loads(run("ledger", "samples/fastener_sorter.loom", "--json").stdout)
    total = data["totals"]
    assert f"{total['weights']:,}" in r.stdout and f"{total['macs']:,}" in r.stdout
    assert sum(b["weights"] for b in data["blocks"]) == total["weights"]
    rows = list(csv.DictReader(io.StringIO(run("ledger", "samples/fastener_sorter.loom", "--csv").stdout)))
    assert [row["block"] for row in rows] == [b["name"] for b in data["blocks"]]
    assert sum(int(row["MACs"]) for row in rows) == total["macs"]


def test_ledger_overrides_input_dtype_and_batch():
    base = json.loads(run("ledger", "samples/fastener_sorter.loom", "--json").stdout)
    big = json.loads(run("ledger", "samples/fastener_sorter.loom", "--json", "--input", "3x256x256",
                         "--dtype", "fp16", "--batch", "4").stdout)
    assert big["blocks"][0]["shape"] == [3, 256, 256]
    assert big["totals"]["weights"] == base["totals"]["weights"]  # weights do not depend on the input size
    # every map doubles in height and width (3×3 / 2 with padding 1 halves even sizes exactly), so
    # convolution MACs scale with the area (×4) and the batch (×4); the Linear head only with the batch
    # (common practice: MACs = output elements × in-channels/groups × kernel area)
    head = sum(b["macs"] for b in base["blocks"] if b["kind"] == "Linear")
    assert big["totals"]["macs"] == 16 * (base["totals"]["macs"] - head) + 4 * head
    # fp16 halves the bytes per element; 4 samples and 4× the area multiply them by 16
    assert big["blocks"][0]["out_memory_bytes"] == base["blocks"][0]["out_memory_bytes"] * 16 // 2


@pytest.mark.parametrize("args, words", [
    (("ledger", "samples/none.loom"), ["samples/none.loom", "cannot read"]),
    (("ledger", "samples/fastener_sorter.loom", "--input", "3x0x4"), ["--input", "below 1"]),
    (("ledger", "samples/fastener_sorter.loom", "--input", "tall"), ["--input", "C×H×W"]),
    (("ledger", "samples/fastener_sorter.loom", "--batch", "0"), ["--batch", "at least 1"]),
])
def test_bad_input_gets_a_clear_message_and_exit_2(args, words):
    r = run(*args)
    assert r.returncode == 2
    for w in words:
        assert w in r.stderr


def test_broken_file_names_the_place(tmp_path):
    data = json.loads((ROOT / "samples/fastener_sorter.loom").read_text())
    data["blocks"][1]["settings"]["stride"] = 0
    bad = tmp_path / "bad.loom"
    bad.write_text(json.dumps(data))
    r = run("check", str(bad))
    assert r.returncode == 2
    assert "blocks[1] (stem)" in r.stderr and "Stride 0 is below the minimum 1" in r.stderr


def test_ledger_compares_with_another_design():
    this = json.loads(run("ledger", "samples/fastener_sorter.loom", "--json").stdout)["totals"]
    other = json.loads(run("ledger", "samples/leaf_blight_grader.loom", "--json").stdout)["totals"]
    r = run("ledger", "samples/fastener_sorter.loom", "--json", "--baseline", "samples/leaf_blight_grader.loom")
    macs = next(x for x in json.loads(r.stdout)["baseline"]["totals"] if x["metric"] == "macs")
    assert (macs["current"], macs["baseline"]) == (this["macs"], other["macs"])
    assert macs["delta"] == this["macs"] - other["macs"]


def _one_line_error(r, code=2):
    assert r.returncode == code, (r.returncode, r.stderr)
    assert "Traceback" not in r.stderr and r.stderr.count("\n") == 1, r.stderr
    return r.stderr


@pytest.mark.parametrize("shape, words", [("3x99999999x99999999", "Height 99999999 is above the maximum 65536"),
                                          ("", "must be three numbers")])
def test_an_input_shape_out_of_range_or_empty_is_one_line_and_exit_2(shape, words):
    err = _one_line_error(run("ledger", "samples/fastener_sorter.loom", "--input", shape))
    assert "--input" in err and words in err


def test_a_batch_beyond_the_file_format_range_is_refused():
    err = _one_line_error(run("ledger", "samples/fastener_sorter.loom", "--batch", "70000"))
    assert "at most 65,536" in err


def test_a_negative_limit_with_a_unit_is_named_not_taken_for_an_option():
    err = _one_line_error(run("fit", "samples/fastener_sorter.loom", "--memory", "-3MiB"))
    assert "--memory must be above 0, not '-3MiB'" in err


def test_a_mistyped_command_is_an_error_with_a_suggestion_not_the_editor():
    err = _one_line_error(run("chek", "samples/fastener_sorter.loom"))
    assert "did you mean 'check'" in err


def test_two_files_for_the_editor_are_refused_in_one_line_not_half_opened():
    err = _one_line_error(run("samples/fastener_sorter.loom", "samples/leaf_blight_grader.loom"))
    assert "one design per window" in err and "not 2" in err and "leaf_blight_grader.loom" in err


def test_without_a_display_the_editor_says_so_in_one_line():
    r = subprocess.run([sys.executable, "-m", "layerloom", "samples/fastener_sorter.loom"], capture_output=True,
                       text=True, cwd=ROOT, env={"PYTHONPATH": str(ROOT / "src"), "PATH": "/usr/bin:/bin"})
    err = _one_line_error(r)
    assert "no display" in err and "layerloom check FILE" in err


def test_the_display_check_lets_other_platforms_through():
    from layerloom.app import missing_display

    assert missing_display({}, "linux")
    assert missing_display({"QT_QPA_PLATFORM": "xcb"}, "linux")
    assert missing_display({"DISPLAY": ":0"}, "linux") is None
    assert missing_display({"WAYLAND_DISPLAY": "wayland-0"}, "linux") is None
    assert missing_display({"QT_QPA_PLATFORM": "offscreen"}, "linux") is None
    assert missing_display({}, "darwin") is None and missing_display({}, "win32") is None


CLASH = "samples/shelf_gap_counter_clash.loom"


def test_ledger_json_of_a_design_with_errors_is_marked_incomplete_and_exits_1():
    r = run("ledger", CLASH, "--json")
    assert r.returncode == 1
    data = json.loads(r.stdout)
    assert data["complete"] is False
    assert [f["code"] for f in data["findings"]] == ["join.channels"]
    assert data["findings"][0]["numbers"] == [64, 128]
    clean = json.loads(run("ledger", "samples/fastener_sorter.loom", "--json").stdout)
    assert clean["complete"] is True and clean["findings"] == []
    partial = run("ledger", CLASH)
    assert partial.returncode == 1 and run("ledger", CLASH, "--csv").returncode == 1
    said = partial.stderr + partial.stdout
    assert f"1 error finding: blocks after it are not counted; see `layerloom check {CLASH}`" in said


def test_ledger_warns_when_the_baseline_has_errors():
    r = run("ledger", "samples/fastener_sorter.loom", "--baseline", CLASH)
    assert r.returncode == 0
    assert f"the baseline {CLASH} has 1 error finding, so its totals are partial" in r.stdout
    data = json.loads(run("ledger", "samples/fastener_sorter.loom", "--json", "--baseline", CLASH).stdout)
    assert data["baseline"]["complete"] is False
    assert "partial" not in run("ledger", "samples/fastener_sorter.loom", "--baseline",
                                "samples/leaf_blight_grader.loom").stdout


def test_check_json_carries_the_two_numbers_behind_a_badge():
    (f,) = json.loads(run("check", CLASH, "--json").stdout)["findings"]
    assert f["numbers"] == [64, 128]  # the badge reads "64 ≠ 128"


def test_ledger_help_lists_every_target_with_its_assumptions():
    from layerloom.core.targets import PRESETS

    text = " ".join(run("ledger", "--help").stdout.split())
    for t in PRESETS:
        assert t.name in text and " ".join(t.assumptions.split()) in text


def test_a_name_with_a_line_break_stays_on_one_line_in_errors(tmp_path):
    data = json.loads((ROOT / "samples/fastener_sorter.loom").read_text())
    data["blocks"][1]["name"] = "stem\nsecond line"
    data["blocks"][1]["settings"]["stride"] = 0
    bad = tmp_path / "bad.loom"
    bad.write_text(json.dumps(data))
    err = _one_line_error(run("check", str(bad)))
    assert "'stem\\nsecond line'" in err


def test_check_prints_a_direction_override_in_a_name_as_text(tmp_path):
    """A name holding an unclosed right-to-left override would turn the rest of its line around."""
    from layerloom import Design
    from layerloom.core import fileformat

    d = Design("bidi")
    x = d.input(64, 8, 8, name="in")
    d.add("Output", d.add("Add", d.add("Pointwise", x, out_channels=128), x, name="\u202eevil"))
    fileformat.save(d, tmp_path / "bidi.loom")
    r = run("check", str(tmp_path / "bidi.loom"))
    assert r.returncode == 1 and "\\u202eevil adds 64 channels to 128 channels" in r.stdout and "\u202e" not in r.stdout
