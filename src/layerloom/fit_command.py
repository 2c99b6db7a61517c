"""``layerloom fit FILE``: scale the design to the largest variant within its budget
(:mod:`layerloom.core.fit`), list the fitting candidates and optionally write the chosen one."""
from __future__ import annotations

import json
import re

from layerloom.core import units
from layerloom.core.fileformat import save
from layerloom.core.fit import FAMILIES, fit, pareto, scaled_edit
from layerloom.core.targets import CAUTION, PRESETS

# units as written in messages; typed in any case ("3m", "4mib"; "µs" with the micro sign or the Greek mu)
_SCALE = {"": 1, "K": 1e3, "M": 1e6, "G": 1e9, "T": 1e12}
_BYTES = {"": 1, "B": 1, "KB": 1e3, "MB": 1e6, "GB": 1e9, "KiB": 1 << 10, "MiB": 1 << 20, "GiB": 1 << 30}
_SECONDS = {"s": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6}


def _quantity(text: str, suffixes: dict, what: str) -> float:
    m = re.fullmatch(r"\s*(-?[0-9]*\.?[0-9]+(?:[eE][-+]?[0-9]+)?)\s*([A-Za-zµμ]*)\s*", text)
    by_case = {unit.casefold(): factor for unit, factor in suffixes.items()}
    if not m or m.group(2).casefold() not in by_case:
        raise ValueError(f"{what} {text!r} is not a number with one of the units {', '.join(s for s in suffixes if s)}")
    value = float(m.group(1)) * by_case[m.group(2).casefold()]
    if value <= 0:
        raise ValueError(f"{what} must be above 0, not {text!r}")
    return value


def budget_from(args, design) -> dict:
    """The design's budget with the limits given on the command line put in."""
    budget = dict(design.budget)
    for key, option, suffixes, convert in (("macs", "macs", _SCALE, int), ("weights", "weights", _SCALE, int),
                                           ("memory", "memory", _BYTES, int),
                                           ("latency_ms", "latency", {**_SECONDS, "": 1e-3}, lambda s: s * 1e3)):
        text = getattr(args, option)
        if text is not None:
            budget[key] = convert(_quantity(text, suffixes, f"--{option}"))
    return budget


def add_parser(sub) -> None:
    f = sub.add_parser("fit", help="scale width, input resolution and motif repeats until the design fits its "
                       "budget; list the candidates that fit")
    f.add_argument("file", help="a .loom design")
    f.add_argument("--macs", metavar="N", help="MAC limit for the batch, e.g. 300M")
    f.add_argument("--weights", metavar="N", help="weight limit, e.g. 3M")
    f.add_argument("--memory", metavar="BYTES", help="peak live activation memory limit, e.g. 4MiB")
    f.add_argument("--latency", metavar="TIME", help="estimated latency limit on the target, e.g. 20ms")
    f.add_argument("--target", metavar="NAME", help="target for the latency estimate (default: the design's): "
                   + "; ".join(f"'{t.name}'" for t in PRESETS))
    f.add_argument("--family", choices=FAMILIES, action="append",
                   help="search only this family (repeatable; default: all). width: every channel count × w, "
                   "rounded to a multiple of 8 (common practice; MobileNets §3.3); resolution: input size × r "
                   "(§3.4); depth: motif repeat counts; compound: EfficientNet's α = 1.2, β = 1.1, γ = 1.15 per φ")
    f.add_argument("-o", "--output", metavar="OUT.loom", help="write the chosen candidate (with the budget) here")
    f.add_argument("--json", action="store_true", help="print the candidates as JSON")
    f.set_defaults(run=run)


def run(args) -> int:
    from layerloom.cli import UsageError, _open

    design = _open(args)
    try:
        budget = budget_from(args, design)
        result = fit(design, budget, families=tuple(args.family or FAMILIES))
    except ValueError as e:
        raise UsageError(f"{args.file}: {e}") from None
    front = pareto(result.candidates)
    if args.json:
        def row(c):
            return {**c._asdict(), "scaling": c.scaling._asdict(), "describe": c.describe()}

        print(json.dumps({"file": args.file, "budget": budget, "search_s": result.seconds,
                          "chosen": row(result.best) if result.best else None,
                          "candidates": [{**row(c), "pareto": p} for c, p in zip(result.candidates, front)]},
                         indent=1, ensure_ascii=False))
    else:
        _print(design, budget, result, front)
    if result.best is None:
        return 1
    if args.output:
        design.apply(scaled_edit(design, result.best.scaling))
        design.set_field("budget", budget)
        try:
            save(design, args.output)
        except OSError as e:
            raise UsageError(f"cannot write {args.output}: {e.strerror or e}") from None
        print(f"wrote {args.output}: {result.best.describe()}")
    return 0


def _print(design, budget, result, front) -> None:
    limits = ", ".join(f"{k} {units.size(v) if k == 'memory' else f'{v:g} ms' if k == 'latency_ms' else units.count(v)}"
                       for k, v in budget.items())
    print(f"budget: {limits}")
    if result.best is None:
        print(f"no scaling of {design.name} fits the budget (searched multipliers from 1/32 in {result.seconds:.2f} s)")
        return
    table = [("candidate", "weights", "MACs", "peak memory", "latency", "")]
    for c, on_front in zip(result.candidates, front):
        mark = "chosen" if c is result.best else ("front" if on_front else "")
        table.append((c.describe(), units.count(c.weights), units.count(c.macs), units.size(c.memory),
                      "·" if c.latency is None else f"{c.latency * 1e3:.3g} ms", mark))
    widths = [max(len(r[i]) for r in table) for i in range(len(table[0]))]
    for n, row in enumerate(table):
        print("  ".join(c.ljust(w) if i in (0, 5) else c.rjust(w) for i, (c, w) in enumerate(zip(row, widths))).rstrip())
        if n == 0:
            print("  ".join("─" * w for w in widths))
    print(f"\n{len(result.candidates)} candidates fit ('front': no other has more MACs and more weights); "
          f"search took {result.seconds:.2f} s")
    if "latency_ms" in budget:
        print(CAUTION)
