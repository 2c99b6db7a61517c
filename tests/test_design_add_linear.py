"""``Design.add`` costs the same at any size: it never walks all blocks (counted, not timed; the
figures are in benchmarks/design_add_speed.py), and the indexes that spare the walk stay right."""
from __future__ import annotations

from layerloom import Design
from layerloom.core import edits


class CountingBlocks(dict):
    """The design's block table, counting every block handed out by a walk over it."""

    walked = 0

    def __iter__(self):
        for key in super().__iter__():
            CountingBlocks.walked += 1
            yield key

    def values(self):
        return [self[k] for k in self]

    def items(self):
        return [(k, self[k]) for k in self]

    def keys(self):
        return list(self)


def _chain(d: Design, x: str, n: int) -> str:
    for i in range(n):
        x = d.add(("Conv2d", "ReLU")[i % 2], x)
    return x


def test_adding_blocks_does_not_walk_the_blocks_already_there():
    d = Design()
    x = _chain(d, d.input(8, 16, 16), 300)
    d.blocks = CountingBlocks(d.blocks)
    CountingBlocks.walked = 0
    _chain(d, x, 300)
    # a walk per add (the old name and position look-ups) visits 300 + 301 + … + 599 ≈ 135,000 blocks
    assert CountingBlocks.walked < 10 * 300, CountingBlocks.walked


def test_fresh_names_take_the_smallest_free_number_after_deletes_and_renames():
    d = Design()
    x = d.input(3, 8, 8)
    a, b, c = (d.add("ReLU", x) for _ in range(3))
    assert [d.blocks[i].name for i in (a, b, c)] == ["relu_1", "relu_2", "relu_3"]
    d.remove(b)
    assert d.blocks[d.add("ReLU", x)].name == "relu_2"
    d.apply(edits.rename(d, a, "first"))
    assert d.blocks[d.add("ReLU", x)].name == "relu_1"
    undo = d.apply(edits.rename(d, c, "third"))
    assert d.blocks[d.add("ReLU", x)].name == "relu_3"
    d.apply(undo)  # relu_3 is now borne twice; removing one keeps the name taken
    d.remove(c)
    assert d.blocks[d.add("ReLU", x)].name == "relu_4"


def test_the_next_free_spot_follows_moves_deletes_and_undo():
    d = Design()
    x = d.input(3, 8, 8)
    y = d.add("ReLU", x)
    assert d.blocks[y].position == (220.0, 0.0)
    far = d.add("ReLU", y, position=(5000.0, 0.0))
    assert d.layout_position() == (5220.0, 0.0)
    undo = d.apply(edits.move(d, {far: (100.0, 50.0)}))
    assert d.layout_position() == (440.0, 0.0)  # y at 220 is now the rightmost
    d.apply(undo)
    assert d.layout_position() == (5220.0, 0.0)
    d.remove(far)
    assert d.layout_position() == (440.0, 0.0)
