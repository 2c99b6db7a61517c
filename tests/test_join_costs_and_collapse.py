"""Joins count the other operations their documentation states, and a collapse on both axes names both."""
from __future__ import annotations

import pytest

from layerloom import Design
from layerloom.core import ledger
from layerloom.core.kinds import joins


def _joined(kind: str, n: int = 3, **settings):
    d = Design()
    x = d.input(8, 10, 12)
    branches = [d.add("ReLU", x) for _ in range(n if kind != "Multiply" else 2)]
    j = d.add(kind, *branches, **settings)
    d.add("Output", j)
    return d.analysis().result(j)


def test_join_other_operations_follow_the_documented_convention():
    # the documentation (ledger's docstring, joins.py, README) states these counts
    assert "concatenation only copies and counts none" in ledger.__doc__
    assert "Concat none" in joins.__doc__
    elements = 8 * 10 * 12
    assert _joined("Add", inputs=3).cost.other == elements * 2  # one per output element per extra input
    assert _joined("Multiply").cost.other == elements  # one per output element
    assert _joined("Concat", inputs=3).cost.other == 0  # a copy


@pytest.mark.parametrize("kind, settings", [("Conv2d", {"kernel": 7, "padding": 0}),
                                            ("MaxPool2d", {"kernel": 7, "stride": 1}),
                                            ("AvgPool2d", {"kernel": 7, "stride": 1}),
                                            ("ConvTranspose2d", {"kernel": 1, "stride": 1, "padding": 3})])
def test_a_collapse_of_height_and_width_names_both(kind, settings):
    d = Design()
    d.add("Output", d.add(kind, d.input(3, 4, 4), **settings))
    (f,) = [f for f in d.findings() if f.code == "shape.collapsed"]
    assert "height" in f.message and "width" in f.message
    assert all("×" in str(n) for n in f.numbers)


def test_a_collapse_of_the_height_alone_names_the_height():
    d = Design()
    d.add("Output", d.add("Conv2d", d.input(3, 4, 16), kernel=[7, 1], padding=0))
    (f,) = [f for f in d.findings() if f.code == "shape.collapsed"]
    assert "height" in f.message and "width" not in f.message and f.numbers == (4, 7)
