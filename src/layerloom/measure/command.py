"""``layerloom measure FILE``: time the exported design here, compare with the roofline estimate,
calibrate a target for this machine and say how well it predicts blocks it was not fitted on."""
from __future__ import annotations

import csv
import io
import json
import sys

from layerloom.core.fileformat import load, save
from layerloom.core.measurement import compare
from layerloom.core.targets import CAUTION, PRESETS

RUNTIMES = ("torch", "onnxruntime")
ATTEMPTS = 3  # measurements taken before an implausible calibration is refused


def add_parser(sub) -> None:
    m = sub.add_parser("measure", help="time the exported network on this computer, per block and whole, "
                       "beside the roofline estimate; calibrate a target for this machine")
    m.add_argument("file", help="a .loom design (well formed)")
    m.add_argument("--batch", type=int, help="batch size N (default: the design's)")
    m.add_argument("--threads", type=int, help="CPU threads (default: torch's default)")
    m.add_argument("--runtime", choices=RUNTIMES, default="torch", help="run with torch (default) or onnxruntime")
    m.add_argument("--repeat", type=int, default=20, help="timed runs of the whole network and of each block "
                   "(default 20; the median and interquartile spread are reported)")
    m.add_argument("--target", metavar="NAME", help="estimate on this preset (default: the design's target; "
                   "else the calibrated one): " + "; ".join(f"'{t.name}'" for t in PRESETS))
    m.add_argument("--holdout", metavar="OTHER.loom", help="also measure another design and report how well "
                   "the target calibrated on half of FILE's blocks predicts its blocks")
    m.add_argument("--save", action="store_true", help="keep the measurement and the calibrated target in FILE")
    fmt = m.add_mutually_exclusive_group()
    fmt.add_argument("--json", action="store_true", help="print the results as JSON")
    fmt.add_argument("--csv", action="store_true", help="print the per-block table as CSV")
    m.set_defaults(run=run)


def run(args) -> int:
    from layerloom.cli import UsageError, _open
    from layerloom.core.calibrate import Implausible, mape, samples  # numpy: only when measuring
    from layerloom.core.ledger import Ledger

    for option, value in (("--repeat", args.repeat), ("--threads", args.threads)):
        if value is not None and value < 1:
            raise UsageError(f"{option} must be at least 1, not {value}")
    design = _open(args)
    for attempt in range(1, ATTEMPTS + 1):  # an implausible fit: measured again, then refused, never kept
        ledger, measurement = _measure(design, args)
        data = samples(ledger, measurement)
        try:
            kept, half, checks = _calibrated(design, measurement, data)
            break
        except Implausible as e:
            if attempt == ATTEMPTS:
                raise UsageError(f"{args.file}: {e}; refused after {ATTEMPTS} measurements") from None
            print(f"note: {e}; measuring again ({attempt + 1} of {ATTEMPTS})", file=sys.stderr)
        except ValueError as e:
            raise UsageError(f"{args.file}: {e}") from None
    if args.holdout:
        other = load(args.holdout)
        other.set_field("batch", measurement.batch)
        other_ledger, other_measurement = _measure(other, args)
        checks[f"all blocks of {args.holdout}"] = mape(half, samples(other_ledger, other_measurement))
    if ledger.target is None:
        design.set_field("target", kept)
        ledger = Ledger(design.analysis())
    rows = compare(ledger, measurement)
    if args.save:
        saved = load(args.file)
        saved.measurement, saved.target = measurement, kept
        save(saved, args.file)
    if args.json:
        print(json.dumps({"file": args.file, "measurement": measurement.to_data(), "estimate_target": ledger.target.name,
                          "blocks": [r._asdict() for r in rows], "sum_of_blocks_s": sum(r.measured for r in rows),
                          "sum_of_estimates_s": ledger.totals.latency, "calibrated_target": kept.to_data(),
                          "holdout_mape_percent": checks}, indent=1, ensure_ascii=False))
    elif args.csv:
        out = io.StringIO()
        w = csv.writer(out, lineterminator="\n")
        w.writerow(("block", "kind", "measured_s", "spread_s", "estimated_s", "ratio"))
        w.writerows((r.name, r.kind, r.measured, r.spread, r.estimated, r.ratio) for r in rows)
        print(out.getvalue(), end="")
    else:
        _print(args, ledger, measurement, rows, kept, checks)
    return 0


def _calibrated(design, measurement, data):
    """The target calibrated on all blocks, the one on half of them, and how well that half predicts
    the other half; ValueError (:class:`~layerloom.core.calibrate.Implausible` for a figure no
    computer has) when the times cannot give one."""
    from layerloom.core.calibrate import calibrate, mape, split_halves

    threads = measurement.machine.threads
    name = f"this machine, {threads} thread{'s' if threads > 1 else ''}"
    kept = calibrate(data, name, f"calibrated {measurement.date} on {measurement.machine.describe()}, torch "
                     f"{measurement.machine.torch_version}: least squares over {len(data)} blocks of "
                     f"'{design.name}' at batch {measurement.batch}")
    fit_half, held = split_halves(data)
    half = calibrate(fit_half, name)
    return kept, half, {"other half of the blocks": mape(half, held) if held else None}


def _measure(design, args):
    from layerloom.cli import UsageError
    from layerloom.core.ledger import Ledger
    from layerloom.export import ExportRefused
    from layerloom.measure.timing import measure

    try:
        measurement = measure(design, args.batch, args.threads, args.runtime, args.repeat)
    except ExportRefused as e:
        raise UsageError(f"{design.name}: {e}") from None
    except ImportError as e:
        raise UsageError(f"measuring needs {e.name or 'torch'} ({e}); install it with pip") from None
    return Ledger(design.analysis()), measurement


def _print(args, ledger, measurement, rows, kept, checks) -> None:
    def us(s):
        return "·" if s is None else f"{s * 1e6:.1f}"

    table = [("block", "kind", "measured µs", "± spread", "estimated µs", "measured ÷ est.")]
    table += [(r.name, r.kind, us(r.measured), us(r.spread), us(r.estimated), f"{r.ratio:.2f}" if r.ratio else "·")
              for r in rows]
    widths = [max(len(row[c]) for row in table) for c in range(len(table[0]))]
    for n, row in enumerate(table):
        print("  ".join(c.ljust(w) if i < 2 else c.rjust(w) for i, (c, w) in enumerate(zip(row, widths))).rstrip())
        if n == 0:
            print("  ".join("─" * w for w in widths))
    m = measurement
    print(f"\nmeasured on {m.machine.describe()}, torch {m.machine.torch_version}, {m.date}; batch {m.batch}, "
          f"median of {m.repeat} runs (fp32)")
    print(f"whole network  {m.total * 1e3:.3g} ms ± {m.spread * 1e3:.2g} ms measured; "
          f"sum of blocks alone {sum(r.measured for r in rows) * 1e3:.3g} ms; "
          f"sum of estimates {ledger.totals.latency * 1e3:.3g} ms on {ledger.target.name}")
    print(f"calibrated target '{kept.name}': {kept.macs_per_second / 1e9:.3g} GMAC/s, "
          f"{kept.bytes_per_second / 1e9:.3g} GB/s, {kept.overhead * 1e6:.3g} µs per layer"
          + (" (kept in the file)" if args.save else " (--save keeps it in the file)"))
    for what, err in checks.items():
        if err is not None:
            print(f"fitted on half of the blocks, predicts {what} with a median absolute error of {err:.0f} %")
    print(CAUTION)
