"""The ``layerloom`` command: ``check`` and ``ledger`` a design file; with a file name only (or
nothing) it opens the editor.

Exit codes: 0 fine; 1 the design has error findings (``check``; ``ledger``, whose totals are then
partial); 2 the file, an option or the command could not be used (one line says where and why).
"""
from __future__ import annotations

import argparse
import math
import os
import sys
import textwrap

from layerloom import fit_command
from layerloom.core import units
from layerloom.core.design import DTYPES, MAX_BATCH, Design
from layerloom.core.fileformat import LoomFileError, load
from layerloom.core.findings import ERROR
from layerloom.core.json_text import layout
from layerloom.core.shapes import parse_shape
from layerloom.core.targets import CAUTION, PRESETS, preset
from layerloom.core.training_memory import OPTIMIZERS, training_memory, training_text
from layerloom.core.values import one_line, quote
from layerloom.measure import command as measure_command
from layerloom.interchange import add_import_parser
from layerloom import picture

# Each command imports what only it needs (the ledger brings numpy, the mends the whole pass of
# a candidate fix): a process's start-up is most of the time of `check` or `ledger` on a file.

COMMANDS = ("check", "ledger", "export", "import", "measure", "fit", "picture")


class UsageError(Exception):
    """An option that cannot be applied to this design."""


def _open(args) -> Design:
    design = load(args.file)
    if getattr(args, "input", None) is not None:
        inputs = design.of_kind("Input")
        if len(inputs) != 1:
            raise UsageError(f"--input needs a design with exactly one Input block; {args.file} has {len(inputs)}")
        try:
            c, h, w = parse_shape(args.input)
            design.set(inputs[0].id, channels=c, height=h, width=w)
        except ValueError as e:  # SettingError names the size and its range
            raise UsageError(f"--input {quote(args.input)}: {e}") from None
    if getattr(args, "dtype", None):
        design.set_field("dtype", args.dtype)
    if getattr(args, "target", None):
        try:
            design.set_field("target", preset(args.target))
        except KeyError as e:
            raise UsageError(f"--target: {e.args[0]}") from None
    if getattr(args, "batch", None) is not None:
        if not 1 <= args.batch <= MAX_BATCH:
            raise UsageError(f"--batch must be at least 1 and at most {MAX_BATCH:,}, not {args.batch}")
        design.set_field("batch", args.batch)
    return design


def _finding_dict(design, f) -> dict:
    """A finding as JSON; ``numbers`` are the two clashing values a badge shows (``256 ≠ 128``)."""
    from layerloom.core.mends import mends_for

    return {"code": f.code, "severity": f.severity, "block": f.block,
            "block_name": design.blocks[f.block].name if f.block in design.blocks else None,
            "path": list(f.path), "port": f.port, "message": f.message,
            "numbers": list(f.numbers) if f.numbers else None,
            "mends": [m.label for m in mends_for(design, f)]}


def _check(args) -> int:
    from layerloom.core.mends import mends_for

    design = _open(args)
    findings = design.findings()
    errors = sum(f.severity == ERROR for f in findings)
    if args.json:
        print(layout({"file": args.file, "errors": errors, "findings": [_finding_dict(design, f) for f in findings]},
                     ("findings",)))
    else:
        for f in findings:
            print(f"{f.severity:<7} {f.code:<20} {one_line(f.message)}")
            for m in mends_for(design, f):
                print(f"        mend: {one_line(m.label)}")
        counts = {s: sum(f.severity == s for f in findings) for s in ("error", "warning", "note")}
        verdict = "well formed" if not errors else "not well formed"
        tally = ", ".join(f"{n} {s}{'' if n == 1 else 's'}" for s, n in counts.items())
        print(f"{args.file}: {verdict} — {tally}")
    return 1 if errors else 0


LEDGER_COLUMNS = ("step", "block", "kind", "depth", "out shape", "weights", "MACs", "out memory", "receptive field")
TARGET_COLUMNS = ("est. time", "bound")


def _ledger(args) -> int:
    from layerloom.core.baseline import compare
    from layerloom.core.ledger import Ledger
    from layerloom.core.ledger_csv import ledger_csv, rf_text

    design = _open(args)
    ledger = Ledger(design.analysis())
    base_errors: list = []
    baseline = _baseline(args, design, base_errors)
    errors = [f for f in design.findings() if f.severity == ERROR]
    rows, t = ledger.rows, ledger.totals
    peak_name = design.blocks[t.peak_block].name if t.peak_block else "—"
    if args.json:
        print(layout({
            "file": args.file, "complete": not errors, "batch": ledger.batch, "dtype": ledger.dtype,
            "blocks": [{"block": r.block, "name": r.name, "kind": r.kind, "depth": r.depth,
                        "shape": list(r.shape) if r.shape else None, "weights": r.weights, "buffers": r.buffers,
                        "macs": r.macs, "other_ops": r.other, "out_memory_bytes": r.memory,
                        "receptive_field": _pixels(r.rf), "jump": _pixels(r.jump),
                        "bytes_moved": r.moved, "intensity_macs_per_byte": round(r.intensity, 3),
                        "latency_s": _finite(r.latency), "bound": r.bound or None} for r in rows],
            "totals": {"weights": t.weights, "buffers": t.buffers, "macs": t.macs, "other_ops": t.other,
                       "weight_bytes": t.weight_bytes, "peak_live_bytes": t.peak_memory, "peak_at": peak_name,
                       "latency_s": _finite(t.latency)},
            "training": training_memory(ledger, args.optimizer, args.mixed_precision)._asdict(),
            "target": ledger.target.to_data() if ledger.target else None,
            "budget": design.budget,
            "findings": [_finding_dict(design, f) for f in errors],
            "baseline": None if baseline is None else {
                "name": baseline["name"], "complete": not base_errors,
                "totals": [{"metric": d.metric, "current": d.current, "baseline": d.baseline, "delta": d.delta,
                            "percent": d.percent} for d in compare(ledger, baseline)]}},
            ("blocks", "findings")))
        return 1 if errors else 0
    if args.csv:
        sys.stdout.write(ledger_csv(ledger))
        _warn_partial(args, errors, base_errors, sys.stderr)
        return 1 if errors else 0
    timed = ledger.latency is not None
    table = [LEDGER_COLUMNS + (TARGET_COLUMNS if timed else ())]
    for i, r in enumerate(rows, 1):
        cells = (str(i), one_line(r.name, 60), r.kind, str(r.depth), str(r.shape or "?"),
                 units.count(r.weights) if r.weights else "·", units.count(r.macs) if r.macs else "·",
                 units.size(r.memory) if r.memory else "·", rf_text(r.rf))
        if timed:
            cells += (f"{r.latency * 1e6:.1f} µs" if r.latency else "·", r.bound)
        table.append(cells)
    widths = [max(len(row[c]) for row in table) for c in range(len(table[0]))]
    right = {0, 3, 5, 6, 7, 8, 9}
    for n, row in enumerate(table):
        print("  ".join(cell.rjust(w) if c in right else cell.ljust(w)
                        for c, (cell, w) in enumerate(zip(row, widths))).rstrip())
        if n == 0:
            print("  ".join("─" * w for w in widths))
    print()
    print(f"weights {units.count(t.weights)} ({t.weights:,}; {units.size(t.weight_bytes)} at {ledger.dtype})"
          f" · buffers {units.count(t.buffers)} · MACs {units.count(t.macs)} ({t.macs:,})")
    print(f"peak live activations {units.size(t.peak_memory)} at {peak_name} (batch {ledger.batch}, {ledger.dtype};"
          " first-order: execution in depth order, no in-place reuse)")
    print(training_text(training_memory(ledger, args.optimizer, args.mixed_precision)) + " (first-order)")
    if timed:
        print(f"estimated latency {t.latency * 1e3:.3g} ms on {ledger.target.name} ({ledger.target.assumptions}). "
              f"{CAUTION}")
    for f in design.analysis().budget_findings():
        print(f"over budget: {f.message}")
    if baseline is not None:
        print(f"\nagainst baseline {baseline['name']!r}:")
        for d in compare(ledger, baseline):
            pct = "" if d.percent is None else f" ({d.percent:+.1f} %)"
            fmt = (lambda v: f"{v * 1e3:.3g} ms") if d.metric == "latency" else (
                units.size if d.metric == "peak_memory" else units.count)
            print(f"  {d.label:<24} {fmt(d.current):>10}  was {fmt(d.baseline):>10}  change {fmt(d.delta):>10}{pct}")
    _warn_partial(args, errors, base_errors, sys.stdout)
    return 1 if errors else 0


def _warn_partial(args, errors: list, base_errors: list, out) -> None:
    """Say that totals are partial: of the design, and of the baseline from ``--baseline``."""
    if errors:
        them = "them" if len(errors) > 1 else "it"
        print(f"{_findings(errors)}: blocks after {them} are not counted; see `layerloom check {args.file}`", file=out)
    if base_errors:
        print(f"warning: the baseline {args.baseline} has {_findings(base_errors)}, so its totals are "
              f"partial; see `layerloom check {args.baseline}`", file=out)


def _findings(errors: list) -> str:
    return f"{len(errors)} error finding{'s' if len(errors) > 1 else ''}"


def _pixels(pair) -> list | None:
    from layerloom.core.ledger_csv import pixels

    return [pixels(v) for v in pair] if pair else None


def _finite(v: float | None) -> float | None:
    """JSON has no infinity: a latency beyond a float's range is written as null."""
    return v if v is not None and math.isfinite(v) else None


def _export(args) -> int:
    from pathlib import Path

    from layerloom.export import ExportRefused, VerifyRefused, export, refuse_placeholders, verify

    design = _open(args)
    if args.verify:
        try:
            refuse_placeholders(design)
        except VerifyRefused as e:
            raise UsageError(f"{args.file}: {e}") from None
    if args.onnx:
        from layerloom.interchange import export_onnx_command

        if args.output is None:
            return export_onnx_command(design, args)
        written = export_onnx_command(design, args)
        if written:
            return written
    elif args.output is None:
        raise UsageError("export needs -o MODEL.py or --onnx MODEL.onnx")
    try:
        made = export(design, args.class_name)
    except ExportRefused as e:
        print(f"layerloom: {one_line(f'{args.file}: {e}')}", file=sys.stderr)
        return 1
    except ValueError as e:
        raise UsageError(f"--class-name: {e}") from None
    target = Path(args.output)
    try:
        target.write_text(made.source, encoding="utf-8")
    except OSError as e:
        raise UsageError(f"cannot write {target}: {e.strerror or e}") from None
    print(f"wrote {target}: class {made.class_name}, {len(design.blocks)} blocks")
    if not args.verify:
        return 0
    try:
        report = verify(design, target)
    except ImportError as e:
        raise UsageError(f"--verify needs PyTorch ({e}); install it with: pip install torch") from None
    except ValueError as e:
        raise UsageError(f"--verify: {e}") from None
    print(report.table())
    return 0 if report.ok else 1


def _baseline(args, design, errors: list) -> dict | None:
    """The baseline to compare with: ``--baseline FILE`` (its current ledger; its error findings
    go to ``errors``), else the design's pinned one."""
    from layerloom.core.baseline import snapshot_of_file

    if not getattr(args, "baseline", None):
        return design.baseline
    return snapshot_of_file(args.baseline, design.target, errors=errors, curves=False)  # totals are compared


def _targets_text() -> str:
    """The target presets with their assumptions, for ``ledger --help``."""
    lines = ["target presets for --target (first-order roofline estimates):"]
    for t in PRESETS:
        lines += [f"  {t.name}", *textwrap.wrap(t.assumptions, 96, initial_indent="      ", subsequent_indent="      ")]
    return "\n".join(lines + [textwrap.fill(CAUTION, 100)])


def _parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(prog="layerloom", description="Sketch convolutional networks, check their shapes, "
                                "count what they cost. With only a FILE (or nothing), opens the editor.")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    c = sub.add_parser("check", help="list findings (errors, warnings, notes) with their mends; exit 1 on errors")
    c.add_argument("file", help="a .loom design")
    c.add_argument("--json", action="store_true", help="print findings as JSON")
    c.add_argument("--input", metavar="CxHxW", help="override the input shape, e.g. 3x224x224")
    c.set_defaults(run=_check)
    led = sub.add_parser("ledger", help="per-block cost table: shapes, weights, MACs, activation memory",
                         formatter_class=argparse.RawDescriptionHelpFormatter, epilog=_targets_text())
    led.add_argument("file", help="a .loom design")
    fmt = led.add_mutually_exclusive_group()
    fmt.add_argument("--csv", action="store_true", help="print the table as CSV")
    fmt.add_argument("--json", action="store_true", help="print the table as JSON")
    led.add_argument("--input", metavar="CxHxW", help="override the input shape, e.g. 3x224x224")
    led.add_argument("--dtype", choices=tuple(DTYPES), help="element type for memory figures")
    led.add_argument("--batch", type=int, help="batch size N (default: the design's)")
    led.add_argument("--target", metavar="NAME", help="estimate latency on a target preset: "
                     + "; ".join(f"'{t.name}'" for t in PRESETS))
    led.add_argument("--optimizer", choices=tuple(OPTIMIZERS), default="sgd_momentum",
                     help="optimizer for the training-memory line (state: sgd none, sgd_momentum 1 copy, adam 2)")
    led.add_argument("--mixed-precision", action="store_true", help="training memory with fp16 activations and "
                     "fp32 master weights, gradients and optimizer state")
    led.add_argument("--baseline", metavar="OTHER.loom", help="compare totals with another design "
                     "(default: the baseline pinned in FILE, if any)")
    led.set_defaults(run=_ledger)
    ex = sub.add_parser("export", help="write the design as a PyTorch nn.Module; refuses a design with errors")
    ex.add_argument("file", help="a .loom design")
    ex.add_argument("-o", "--output", metavar="MODEL.py", help="the Python file to write")
    ex.add_argument("--onnx", metavar="MODEL.onnx", help="write an ONNX file (through the PyTorch module); with "
                    "--verify, run it in onnxruntime and compare with torch and the ledger")
    ex.add_argument("--class-name", metavar="NAME", help="name of the design's class (default: from the design name)")
    ex.add_argument("--verify", action="store_true", help="build the module with torch, run it and compare every "
                    "block's shape, weights and MACs with the ledger; exit 1 on any disagreement")
    ex.set_defaults(run=_export)
    measure_command.add_parser(sub)
    fit_command.add_parser(sub)
    add_import_parser(sub)
    picture.register(sub)
    return p


def _negative_values_attached(argv: list[str]) -> list[str]:
    """``--memory -3MiB`` as ``--memory=-3MiB``: argparse takes a value that starts with a minus sign
    and is not a bare number for an option, so the command's own check names the value instead."""
    out: list[str] = []
    for arg in argv:
        if out and out[-1].startswith("--") and "=" not in out[-1] and arg[:1] == "-" and arg[1:2].isdecimal():
            out[-1] = f"{out[-1]}={arg}"
        else:
            out.append(arg)
    return out


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    parser = _parser()
    if not argv or (argv[0] not in COMMANDS and not argv[0].startswith("-")):
        from difflib import get_close_matches

        near = get_close_matches(argv[0], COMMANDS, n=1, cutoff=0.6) if argv else []
        if near and not os.path.exists(argv[0]):
            print(f"layerloom: {quote(argv[0])} is not a command (and no such file); did you mean "
                  f"'{near[0]}'? Commands: {', '.join(COMMANDS)}", file=sys.stderr)
            return 2
        if len(argv) > 1:
            print(f"layerloom: the editor opens one design per window; give one file, not {len(argv)} "
                  f"({', '.join(map(quote, argv))}), and start it once per design", file=sys.stderr)
            return 2
        from layerloom.app import run_editor

        return run_editor(argv)
    args = parser.parse_args(_negative_values_attached(argv))
    if args.command is None:
        parser.print_help()
        return 2
    try:
        return args.run(args)
    except (LoomFileError, UsageError, picture.PictureError) as e:
        print(f"layerloom: {one_line(str(e))}", file=sys.stderr)
        return 2
    except BrokenPipeError:
        return 0


if __name__ == "__main__":
    sys.exit(main())
