"""Choosing our kind for an imported operation, shared by the PyTorch and the ONNX readers.

A reader proposes a chain of blocks (``(kind, settings)`` pairs, usually one) for an operation;
:func:`confirm` keeps the proposal only when our own rules agree with what the source measured:
the settings are valid, the kind's shape rule gives the traced output shape, and its weights and
buffers are the source's. Anything else becomes an unmapped operation, so a mapping can never
make the ledger wrong.
"""
from __future__ import annotations

from layerloom.core.findings import Report, Stop
from layerloom.core.kinds import KINDS
from layerloom.core.settings import SettingError
from layerloom.core.shapes import Shape

Chain = list  # [(kind name, settings), ...]


def conv_chain(in_channels: int, out: int, kernel, stride, padding, dilation, groups: int, bias: bool) -> Chain:
    """The kind for a 2-d convolution: Pointwise for a plain 1×1 without padding, Depthwise when each
    input channel has its own filters (groups = in channels), Conv2d otherwise. Pairs are (h, w)."""
    one = (1, 1)
    if padding == "same" and tuple(kernel) == one:
        padding = (0, 0)
    if tuple(kernel) == one and tuple(padding) == (0, 0) and tuple(dilation) == one:
        return [("Pointwise", {"out_channels": out, "stride": _pair(stride), "groups": groups, "bias": bias})]
    if groups == in_channels and groups > 1 and out % groups == 0:
        return [("Depthwise", {"kernel": _pair(kernel), "stride": _pair(stride), "padding": _pair(padding),
                               "dilation": _pair(dilation), "multiplier": out // groups, "bias": bias})]
    return [("Conv2d", {"out_channels": out, "kernel": _pair(kernel), "stride": _pair(stride),
                        "padding": _pair(padding), "dilation": _pair(dilation), "groups": groups, "bias": bias})]


def upsample_chain(h: int, w: int, oh, ow, mode: str) -> Chain | None:
    """Upsample by a whole factor, the same on both axes, from sizes h×w to oh×ow; else None."""
    if oh % h or ow % w or oh // h != ow // w:
        return None
    return [("Upsample", {"scale": int(oh // h), "mode": mode})]


def _pair(value):
    """``(3, 3)`` → ``3``; ``(3, 1)`` → ``[3, 1]``; an int (or ``"same"``) stays."""
    if isinstance(value, (int, str)):
        return value
    h, w = (int(v) for v in value)
    return h if h == w else [h, w]


def _run(chain: Chain, ins: tuple[Shape, ...]):
    """Checked settings, output shape, weights and buffers of ``chain`` on ``ins``; raises when it
    does not fit."""
    checked, shapes, weights, buffers = [], ins, 0, 0
    for kind_name, settings in chain:
        kind = KINDS[kind_name]
        s = kind.check_settings(settings)
        if len(shapes) != kind.input_count(s):
            raise ValueError(f"{kind_name} takes {kind.input_count(s)} inputs, not {len(shapes)}")
        y = kind.shape(s, shapes, Report("", kind_name))
        cost = kind.cost(s, shapes, y)
        weights, buffers = weights + cost.weights, buffers + cost.buffers
        checked.append((kind_name, s))
        shapes = (y,)
    return checked, shapes[0], weights, buffers


FAILS = (Stop, SettingError, KeyError, TypeError, ValueError, IndexError)


def chain_shape(chain: Chain | None, ins: tuple[Shape, ...]) -> Shape | None:
    """The output shape our rules give ``chain`` on ``ins``, or None (no chain, or it does not fit)."""
    try:
        return _run(chain, ins)[1] if chain else None
    except FAILS:
        return None


def confirm(chain: Chain | None, ins: tuple[Shape, ...], out: Shape, weights: int = 0, buffers: int = 0) -> Chain | None:
    """``chain`` with checked settings when our rules reproduce ``out``, ``weights`` and ``buffers``
    from the input shapes ``ins``; ``None`` when they do not (or there is no chain)."""
    if not chain:
        return None
    try:
        checked, y, w, b = _run(chain, ins)
    except FAILS:
        return None
    return checked if (y, w, b) == (out, weights, buffers) else None


def representable(dims) -> Shape | None:
    """The per-sample shape of a tensor with batch 1 and dims N×C×H×W or N×F, else None."""
    if dims is None or len(dims) not in (2, 4) or dims[0] != 1 or any(not isinstance(d, int) or d < 1 for d in dims):
        return None
    return Shape(tuple(dims[1:]))
