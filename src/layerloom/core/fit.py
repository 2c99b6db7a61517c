"""Fit to budget: scale a design until it meets its budget, with the ledger only (no torch).

Four families of scaling, each driven by one multiplier s (s = 1 is the design as it is):

- **width**: every channel count × s, rounded to a multiple of 8 (common practice; never below 8,
  never more than 10 % under the exact value; a multiple of the groups too for a grouped
  convolution); width multiplier α of MobileNets (Howard et al. 2017, §3.3). Channel counts are the
  out-channels of convolutions, out-features of Linear layers and the motif parameters those use;
  the head (the layer whose output reaches an Output block through layers without channel counts,
  e.g. the classifier) keeps its count, as the task sets it.
- **resolution**: the height and width of each Input block × s, rounded to a multiple of 8;
  resolution multiplier ρ (§3.4).
- **depth**: each motif use stacked more than once repeats ⌈repeat × s⌉ times (at least once).
- **compound**: depth α^φ, width β^φ and resolution γ^φ with α = 1.2, β = 1.1, γ = 1.15 (Tan & Le
  2019, eq. 3), so that MACs grow about (α·β²·γ²)^φ ≈ 1.92^φ; here φ = log s / log(α·β²·γ²), so s is
  the intended MACs factor.

Each family's cost is monotone in s, so the largest s that fits every limit is found by bisection
on log s (to 1 %); the chosen candidate is the fitting one with the most MACs (then weights). A
candidate fits when the ledger's totals are within every limit of the budget (weights, MACs, peak
live activations, estimated latency on the target) and it has no error findings.
"""
from __future__ import annotations

import math
import time
from typing import NamedTuple

from layerloom.core import edits
from layerloom.core.fileformat import copy
from layerloom.core.findings import ERROR

ALPHA, BETA, GAMMA = 1.2, 1.1, 1.15  # EfficientNet's depth, width and resolution bases (Tan & Le 2019, eq. 3)
FAMILIES = ("width", "resolution", "depth", "compound")
LOW, LIMIT = 1 / 32, 1024.0  # the multipliers searched
PRECISION = 1.01  # bisection stops when the bracket is this narrow (ratio)
GRID = 1.25  # smaller candidates listed below each family's largest: s / 1.25, s / 1.25², …
GRID_STEPS = 5
CHANNEL_KEYS = ("out_channels", "out_features")


class Scaling(NamedTuple):
    """Multipliers of width, resolution and depth."""

    width: float = 1.0
    resolution: float = 1.0
    depth: float = 1.0


class Candidate(NamedTuple):
    """One scaled variant and its totals (MACs for the batch, memory and weights as the ledger counts)."""

    family: str
    multiplier: float
    scaling: Scaling
    weights: int
    macs: int
    memory: int  # peak live activation bytes
    latency: float | None  # seconds on the target
    fits: bool
    errors: int  # error findings of the scaled design

    def describe(self) -> str:
        w, r, d = self.scaling
        if self.family == "compound":
            return f"compound φ = {math.log(self.multiplier) / math.log(ALPHA * BETA ** 2 * GAMMA ** 2):+.2f}"
        value = {"width": w, "resolution": r, "depth": d}[self.family]
        return f"{self.family} × {value:.3g}"


class FitResult(NamedTuple):
    best: Candidate | None  # the largest candidate that fits, None when none does
    candidates: list[Candidate]  # every evaluated candidate that fits
    seconds: float  # time the search took


def family_scaling(family: str, s: float) -> Scaling:
    if family == "width":
        return Scaling(width=s)
    if family == "resolution":
        return Scaling(resolution=s)
    if family == "depth":
        return Scaling(depth=s)
    phi = math.log(s) / math.log(ALPHA * BETA ** 2 * GAMMA ** 2)
    return Scaling(BETA ** phi, GAMMA ** phi, ALPHA ** phi)


def round_channels(c: int, w: float, multiple: int = 8) -> int:
    """``c × w`` rounded to a multiple of ``multiple``, at least ``multiple`` and not more than 10 %
    below the exact value (common practice for width multipliers)."""
    exact = c * w
    out = max(multiple, int(exact + multiple / 2) // multiple * multiple)
    return out + multiple if out < 0.9 * exact else out


def scaled_edit(design, scaling: Scaling, every: bool = False) -> edits.Edit:
    """The edit that scales ``design`` (from its current settings) by ``scaling``; one undo step.
    With ``every``, it sets every block and motif, changed or not (to apply to an earlier trial)."""
    w, r, d = scaling
    channel_params = {name: _channel_params(m) for name, m in design.motifs.items()}
    heads = _heads(design)
    ops: list = []
    for key, g in (("", design), *design.motifs.items()):
        for b in g.blocks.values():
            s = b.settings
            new = dict(s)
            if b.kind == "Input" and not key:
                new["height"], new["width"] = (max(8, round(s[k] * r / 8) * 8) if r != 1 else s[k]
                                               for k in ("height", "width"))
            elif b.kind == "Motif":
                for p in channel_params.get(s["motif"], ()):
                    if p in s and w != 1:
                        new[p] = round_channels(s[p], w)
                if s["repeat"] > 1:
                    new["repeat"] = max(1, math.ceil(s["repeat"] * d - 1e-9))
            elif w != 1 and (key, b.id) not in heads:
                for k in CHANNEL_KEYS:
                    if type(s.get(k)) is int:
                        new[k] = round_channels(s[k], w, _lcm(8, s.get("groups", 1)))
            if every or new != s:
                ops.append(edits.SetBlock(key, b.id, "settings", new))
    for name, m in design.motifs.items():
        params = {p: round_channels(v, w) if p in channel_params[name] and w != 1 else v for p, v in m.params.items()}
        if every or params != m.params:
            ops.append(edits.SetMotifParams(name, params))
    return edits.Edit("Fit to budget", tuple(ops))


def _lcm(a: int, b: int) -> int:
    return a * b // math.gcd(a, b)


def _channel_params(motif) -> set[str]:
    """Parameters of ``motif`` that set a channel count somewhere inside it."""
    return {v["param"] for b in motif.blocks.values() for k, v in b.settings.items()
            if k in CHANNEL_KEYS and type(v) is dict}


def _heads(design) -> set[tuple[str, str]]:
    """(graph, block) of the layers whose channel count an Output receives unchanged by another layer."""
    heads = set()
    stack = [w.src for b in design.of_kind("Output") for w in design.in_wires[b.id]]
    seen = set()
    while stack:
        bid = stack.pop()
        if bid in seen:
            continue
        seen.add(bid)
        blk = design.blocks[bid]
        if any(k in blk.settings for k in CHANNEL_KEYS):
            heads.add(("", bid))
        elif blk.kind not in ("Motif", "Input"):  # a motif's inside is no head: its outputs feed the design
            stack += [w.src for w in design.in_wires[bid]]
    return heads


class _Trial:
    """A working copy of the design on which candidates are applied and costed."""

    def __init__(self, design, budget: dict, target):
        self.original = design
        self.work = copy(design)
        self.work.budget = {}
        self.budget, self.target = budget, target

    def cost(self, family: str, s: float) -> Candidate:
        scaling = family_scaling(family, s)
        self.work.apply(scaled_edit(self.original, scaling, every=True))
        from layerloom.core.ledger import Ledger  # not when the command line only sets up `fit`

        analysis = self.work.analysis()
        t = Ledger(analysis, self.target).totals
        errors = sum(f.severity == ERROR for f in analysis.all_findings())
        within = {"weights": t.weights, "macs": t.macs, "memory": t.peak_memory,
                  "latency_ms": None if t.latency is None else t.latency * 1e3}
        fits = errors == 0 and all(within[k] is not None and within[k] <= v for k, v in self.budget.items())
        return Candidate(family, s, scaling, t.weights, t.macs, t.peak_memory, t.latency, fits, errors)


def fit(design, budget: dict | None = None, target=None, families=FAMILIES) -> FitResult:
    """Search every family for the largest scaling of ``design`` within ``budget`` (default: the
    design's own) and list the fitting candidates; ``target`` defaults to the design's."""
    start = time.perf_counter()
    budget = dict(design.budget if budget is None else budget)
    if not budget:
        raise ValueError("fit needs a budget: at least one limit of weights, MACs, memory or latency")
    target = target or design.target
    if "latency_ms" in budget and target is None:
        raise ValueError("a latency budget needs a target to estimate latency on")
    trial = _Trial(design, budget, target)
    repeats = any(b.settings["repeat"] > 1 for g in (design, *design.motifs.values()) for b in g.of_kind("Motif"))
    found: list[Candidate] = []
    for family in families:
        if family == "depth" and not repeats:
            continue
        best = _largest(trial, family)
        if best is None:
            continue
        found.append(best)
        s = best.multiplier
        for _ in range(GRID_STEPS):
            s /= GRID
            if s < LOW:
                break
            c = trial.cost(family, s)
            if c.fits and (c.macs, c.weights, c.memory) != (found[-1].macs, found[-1].weights, found[-1].memory):
                found.append(c)
    best = max(found, key=lambda c: (c.macs, c.weights), default=None)
    return FitResult(best, found, time.perf_counter() - start)


def _largest(trial: _Trial, family: str) -> Candidate | None:
    """The fitting candidate of ``family`` with the largest multiplier: a first guess from the
    totals at s = 1 (costs grow about as s², or s for depth and compound), a bracket found by
    growing steps from it, then bisection on log s."""
    first = trial.cost(family, 1.0)
    guess = min(max(_guess(first, trial.budget, family), LOW), LIMIT)
    c = first if guess == 1.0 else trial.cost(family, guess)
    step = 1.1
    lo, hi = (c, None) if c.fits else (None, c)
    while hi is None:  # grow until a candidate does not fit
        if lo.multiplier >= LIMIT:
            return lo
        nxt = trial.cost(family, min(lo.multiplier * step, LIMIT))
        lo, hi = (nxt, None) if nxt.fits else (lo, nxt)
        step *= step
    while lo is None:  # shrink until one fits
        if hi.multiplier <= LOW:
            return None
        nxt = trial.cost(family, max(hi.multiplier / step, LOW))
        lo, hi = (nxt, hi) if nxt.fits else (None, nxt)
        step *= step
    while hi.multiplier / lo.multiplier > PRECISION:
        mid = trial.cost(family, math.sqrt(lo.multiplier * hi.multiplier))
        lo, hi = (mid, hi) if mid.fits else (lo, mid)
    return lo


def _guess(c: Candidate, budget: dict, family: str) -> float:
    """Where the first limit would be reached if every cost grew as s² (s for depth and compound)."""
    power = 1.0 if family in ("depth", "compound") else 2.0
    now = {"weights": c.weights, "macs": c.macs, "memory": c.memory,
           "latency_ms": None if c.latency is None else c.latency * 1e3}
    ratios = [limit / now[k] for k, limit in budget.items() if now.get(k)]
    return min(ratios) ** (1 / power) if ratios else 1.0


def pareto(candidates: list[Candidate]) -> list[bool]:
    """Per candidate: on the front of the largest, i.e. no other candidate has at least as many MACs
    and weights and more of one."""
    return [not any(o.macs >= c.macs and o.weights >= c.weights and (o.macs, o.weights) != (c.macs, c.weights)
                    for o in candidates) for c in candidates]


def apply_edit(design, candidate: Candidate, budget: dict | None = None) -> edits.Edit:
    """The single edit that applies ``candidate`` (and sets ``budget`` when given)."""
    edit = scaled_edit(design, candidate.scaling)
    label = f"Fit to budget: {candidate.describe()}"
    ops = edit.ops + ((edits.SetField("budget", dict(budget)),) if budget is not None else ())
    return edits.Edit(label, ops)
