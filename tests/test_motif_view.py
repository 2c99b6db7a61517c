"""Inside a motif: its blocks inferred as in its first use, in a chosen use, or with unknown inputs."""
from __future__ import annotations

from layerloom import Design
from layerloom.core.motif_view import first_use, follow, inner_inference


def halving_design() -> Design:
    """A motif ``halve`` (3×3 stride-2 conv to ``width`` channels) used twice, the second deeper."""
    d = Design("bench-vise-checker")
    m = d.motif("halve", width=8)
    m.add("Output", m.add("Conv2d", m.input(), out_channels={"param": "width"}, kernel=3, stride=2, padding=1,
                          name="squeeze"))
    x = d.input(3, 64, 64, name="frame")
    a = d.use("halve", x, name="stage_1", width=16)
    b = d.use("halve", a, name="stage_2", width=40)
    d.add("Output", b)
    return d


def test_shapes_inside_are_those_of_the_first_use_in_depth_order():
    d = halving_design()
    conv = d.motifs["halve"].block("squeeze").id
    stage_1, stage_2 = d.block("stage_1").id, d.block("stage_2").id
    assert first_use(d, "halve") == (stage_1,)
    view = inner_inference(d, "halve")
    assert view.use == (stage_1,) and view.names == ("stage_1",)
    # Conv2d output size floor((H + 2p − k)/s) + 1 = floor((64 + 2 − 3)/2) + 1 = 32 (PyTorch Conv2d docs, common practice)
    assert str(view.inference.results[conv].outs[0]) == "16×32×32"
    second = inner_inference(d, "halve", (stage_2,))
    assert second.names == ("stage_2",)
    assert str(second.inference.results[conv].outs[0]) == "40×16×16"  # 32 → 16 on the second halving
    assert inner_inference(d, "halve", ("gone",)).names == ("stage_1",)  # a use no longer there: the first
    d.set(stage_1, width=24)  # shapes inside follow the use's parameter
    assert str(inner_inference(d, "halve").inference.results[conv].outs[0]) == "24×32×32"


def test_a_motif_without_use_has_unknown_shapes_and_still_shows_its_wiring_findings():
    d = halving_design()
    spare = d.motif("spare", width=4)
    p = spare.add("Pointwise", spare.input(), out_channels={"param": "width"}, name="lonely")
    view = inner_inference(d, "spare")
    assert view.use == () and view.names == ()
    assert all(r is None for r in view.inference.results.values())
    assert [f.code for f in view.inference.graph_findings] == ["graph.no_output"]
    spare.add("Output", p)
    assert not inner_inference(d, "spare").inference.graph_findings
    assert follow(d, ("no-such-block",)) is None


def test_a_motif_used_only_inside_another_is_seen_through_the_outer_instance():
    d = halving_design()
    outer = d.motif("twice")
    first = outer.add("Motif", outer.input(), motif="halve", width=12, name="first")
    outer.add("Output", outer.add("Motif", first, motif="halve", name="second"))
    d.remove("stage_1", "stage_2")
    z = d.use("twice", d.block("frame").id, name="tail")
    d.add("Output", z)
    conv = d.motifs["halve"].block("squeeze").id
    view = inner_inference(d, "halve")
    assert view.names == ("tail", "first")
    assert str(view.inference.results[conv].outs[0]) == "12×32×32"  # the first inner use halves 64 → 32
