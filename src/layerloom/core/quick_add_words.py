"""What Quick add understands: the trade's everyday words for each block kind, a few presets and
the motifs, ranked against what the user typed.

A :class:`Choice` is one line of the list: a kind (with preset settings) or a motif (``library:<key>``
or ``design:<name>``). :func:`rank` orders any entries by how well typed text matches their words:
first a whole word typed exactly, then a word's prefix, then the start of a word
inside one, then any substring; ties keep the given order. ``×`` and ``x``, ``-``, ``_`` and spaces
count as the same, so ``1x1`` finds "1×1 convolution" and ``global pool`` finds "global_pool". Within
a tier, a match on an entry's own name comes before one on an everyday word.

    >>> [c.label for c in choices("bn")][:1]
    ['Batch norm · BatchNorm2d']
"""
from __future__ import annotations

import re
from typing import Iterable, NamedTuple, TypeVar

from layerloom.core.kinds import KINDS
from layerloom.core.motif_library import LIBRARY

WORDS: dict[str, tuple[str, ...]] = {
    "Conv2d": ("conv", "convolution", "3x3", "5x5", "7x7", "stem"),
    "Pointwise": ("1x1", "pointwise", "pw", "pw conv", "projection", "reduce", "expand", "bottleneck"),
    "Depthwise": ("dw", "depthwise", "dw conv", "separable", "dwconv"),
    "ConvTranspose2d": ("deconv", "transposed", "upconv", "convtranspose"),
    "BatchNorm2d": ("bn", "batchnorm", "batch norm", "norm", "normalisation", "normalization"),
    "ReLU": ("relu", "activation", "act"),
    "ReLU6": ("relu6",),
    "LeakyReLU": ("leaky", "lrelu"),
    "GELU": ("gelu",),
    "SiLU": ("silu", "swish"),
    "Sigmoid": ("sigmoid", "gate"),
    "Tanh": ("tanh",),
    "Hardswish": ("hardswish", "hswish", "h-swish"),
    "MaxPool2d": ("max", "maxpool", "max pool", "pool"),
    "AvgPool2d": ("avg", "avgpool", "average", "avg pool", "pool"),
    "AdaptiveAvgPool2d": ("gap", "global pool", "global average", "global avg", "adaptive", "pool"),
    "Upsample": ("upsample", "resize", "interpolate"),
    "Flatten": ("flatten", "reshape"),
    "Linear": ("fc", "dense", "linear", "fully connected", "classifier", "head", "mlp"),
    "Dropout": ("dropout", "drop"),
    "Softmax": ("softmax", "probabilities"),
    "Add": ("add", "residual", "sum", "shortcut", "skip", "plus", "+"),
    "Multiply": ("mul", "multiply", "gate", "scale", "product"),
    "Concat": ("cat", "concat", "concatenate", "join", "stack"),
    "Identity": ("identity", "pass", "noop"),
    "Input": ("input", "in", "image"),
    "Output": ("output", "out", "result"),
}
"""Everyday words and abbreviations per kind (the kind's name, title and stem are always words too)."""

MOTIF_WORDS: dict[str, tuple[str, ...]] = {
    "residual_unit": ("residual", "resblock", "basic block", "res"),
    "bottleneck": ("bottleneck", "residual", "res"),
    "bottleneck_projection": ("bottleneck", "projection", "downsample", "residual"),
    "multi_branch": ("branches", "multi", "inception"),
    "separable": ("separable", "dw", "depthwise", "dwsep"),
    "inverted_residual": ("inverted", "mbconv", "expand", "residual"),
    "se_gate": ("se", "squeeze", "excite", "squeeze excite", "attention", "gate"),
}
"""Words for the library's motifs (their titles and keys are words too)."""

HIDDEN = {"Motif"}  # an instance is offered through its motif, never as a bare kind


class Choice(NamedTuple):
    """One line Quick add can offer: ``kind`` with ``settings``, or a motif instance (``motif`` is
    ``library:<key>`` or ``design:<name>`` and ``kind`` is ``Motif``)."""

    label: str
    kind: str
    settings: dict
    motif: str
    words: tuple[tuple[str, ...], ...]  # its own names first, then everyday words


def _fold(text: str) -> str:
    """Lower case, ``×`` as ``x``, separators as single spaces."""
    return re.sub(r"[\s_\-·()/]+", " ", text.lower().replace("×", "x")).strip()


def kind_choices() -> list[Choice]:
    """A choice per kind, in registry order, plus the presets (global average pool)."""
    out = []
    for name, spec in KINDS.items():
        if name in HIDDEN:
            continue
        label = f"{spec.title} · {name}" if spec.title != name else name
        out.append(Choice(label, name, {}, "", ((name, spec.title, spec.stem), WORDS.get(name, ()))))
    return out


def motif_choices(design_motifs: Iterable[str] = ()) -> list[Choice]:
    """Choices for the library's motifs and then for the motifs a design defines."""
    out = [Choice(f"{m.title} · motif", "Motif", {}, f"library:{m.key}",
                  ((m.title, m.key), ("motif", *MOTIF_WORDS.get(m.key, ())))) for m in LIBRARY]
    out += [Choice(f"{name} · motif of this design", "Motif", {}, f"design:{name}", ((name,), ("motif",)))
            for name in design_motifs]
    return out


def choices(text: str, design_motifs: Iterable[str] = ()) -> list[Choice]:
    """Every choice matching ``text``, best first; with nothing typed, the kinds in registry order."""
    found = kind_choices()
    if not _fold(text):
        return found
    return rank(text, found + motif_choices(design_motifs), lambda c: c.words)


T = TypeVar("T")


def match_rank(text: str, groups: Iterable[Iterable[str]]) -> tuple[int, int] | None:
    """How well ``text`` matches groups of words (an entry's own names, then other words): the tier
    (0 a word exactly, 1 a word's prefix, 2 the start of a word inside one, 3 a substring) and the
    group of the best word; None when nothing matches."""
    t = _fold(text)
    best = None
    for g, words in enumerate(groups):
        for word in words:
            w = _fold(word)
            if w == t:
                tier = 0
            elif w.startswith(t):
                tier = 1
            elif f" {t}" in f" {w}":
                tier = 2
            elif t in w:
                tier = 3
            else:
                continue
            if best is None or (tier, g) < best:
                best = (tier, g)
    return best


def rank(text: str, entries: Iterable[T], words_of) -> list[T]:
    """The entries whose word groups (``words_of(entry)``) match ``text``, best first, ties in order."""
    scored = [(score, i, e) for i, e in enumerate(entries) if (score := match_rank(text, words_of(e))) is not None]
    return [e for _, _, e in sorted(scored, key=lambda s: s[:2])]
