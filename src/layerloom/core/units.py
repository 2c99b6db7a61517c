"""Readable numbers: counts with K/M/G/T (powers of 1000) and bytes with KiB/MiB/GiB/TiB (powers
of 1024). Counts are exact Python integers of any size; beyond the largest suffix they are shown in
powers of ten (``4.2e+35``) computed without going through a float, which would overflow."""
from __future__ import annotations

import math


def count(n: float) -> str:
    """A count with a K/M/G/T suffix; small numbers stay whole.

    >>> count(25557032), count(4089184256), count(640), count(10 ** 400)
    ('25.6 M', '4.09 G', '640', '1e+400')
    """
    return _scaled(n, ((10 ** 12, "T"), (10 ** 9, "G"), (10 ** 6, "M"), (10 ** 3, "K")), 10 ** 15,
                   lambda m: f"{m:.3g}" if isinstance(m, float) and not m.is_integer() else f"{int(m)}")


def size(n: float) -> str:
    """Bytes with a KiB/MiB/GiB/TiB suffix.

    >>> size(1572864), size(512)
    ('1.5 MiB', '512 B')
    """
    return _scaled(n, ((1 << 40, "TiB"), (1 << 30, "GiB"), (1 << 20, "MiB"), (1 << 10, "KiB")), 1 << 50,
                   lambda m: f"{int(m)} B", " B")


def _scaled(n, steps, beyond, small, unit_beyond: str = "") -> str:
    if isinstance(n, float) and not math.isfinite(n):
        return "∞" if n > 0 else ("-∞" if n < 0 else "?")
    if abs(n) >= beyond * 1000:
        return _power_of_ten(n) + unit_beyond
    for step, unit in steps:
        if abs(n) >= step:
            return f"{n / step:.3g} {unit}" if abs(n) < 100 * step else f"{n / step:.0f} {unit}"
    return small(n)


def _power_of_ten(n) -> str:
    """``n`` as ``d.dde+X`` with three significant digits, exact for integers of any size."""
    if isinstance(n, float):
        return f"{n:.3g}"
    sign, n = ("-" if n < 0 else ""), abs(int(n))
    digits = len(str(n)) if n.bit_length() < 10_000 else int(n.bit_length() * math.log10(2)) + 1
    head = n // 10 ** max(digits - 3, 0)
    if head >= 1000:  # bit_length's estimate was one digit short
        head, digits = head // 10, digits + 1
    mantissa = f"{head / 100:.2f}".rstrip("0").rstrip(".")
    return f"{sign}{mantissa}e+{digits - 1}"


def ratio(n, d: float) -> float:
    """``n / d`` as a float; infinity when the quotient is beyond a float's range."""
    try:
        return n / d
    except OverflowError:
        return math.inf if (n > 0) == (d > 0) else -math.inf
