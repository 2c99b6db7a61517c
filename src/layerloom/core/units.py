"""Readable numbers: counts with K/M/G (powers of 1000) and bytes with KiB/MiB/GiB (powers of 1024)."""
from __future__ import annotations


def count(n: float) -> str:
    """A count with a K/M/G suffix; small numbers stay whole.

    >>> count(25557032), count(4089184256), count(640)
    ('25.6 M', '4.09 G', '640')
    """
    for size, unit in ((1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "K")):
        if abs(n) >= size:
            return f"{n / size:.3g} {unit}" if abs(n) < 100 * size else f"{n / size:.0f} {unit}"
    return f"{n:.3g}" if isinstance(n, float) and not float(n).is_integer() else f"{int(n)}"


def size(n: float) -> str:
    """Bytes with a KiB/MiB/GiB suffix.

    >>> size(1572864), size(512)
    ('1.5 MiB', '512 B')
    """
    for step, unit in ((1 << 30, "GiB"), (1 << 20, "MiB"), (1 << 10, "KiB")):
        if abs(n) >= step:
            return f"{n / step:.3g} {unit}" if abs(n) < 100 * step else f"{n / step:.0f} {unit}"
    return f"{int(n)} B"
