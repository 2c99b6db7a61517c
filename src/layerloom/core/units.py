"""Readable numbers: counts with K/M/G (powers of 1000) and bytes with KiB/MiB/GiB (powers of 1024)."""
from __future__ import annotations


def count(n: float) -> str:
    """``25557032`` → ``25.56 M``; ``4089184256`` → ``4.09 G``; small numbers stay whole."""
    for size, unit in ((1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "K")):
        if abs(n) >= size:
            return f"{n / size:.3g} {unit}" if abs(n) < 100 * size else f"{n / size:.0f} {unit}"
    return f"{n:.3g}" if isinstance(n, float) and not float(n).is_integer() else f"{int(n)}"


def size(n: float) -> str:
    """``1572864`` → ``1.5 MiB``; bytes below 1 KiB print as ``512 B``."""
    for step, unit in ((1 << 30, "GiB"), (1 << 20, "MiB"), (1 << 10, "KiB")):
        if abs(n) >= step:
            return f"{n / step:.3g} {unit}" if abs(n) < 100 * step else f"{n / step:.0f} {unit}"
    return f"{int(n)} B"
