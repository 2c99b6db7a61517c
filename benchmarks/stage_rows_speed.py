"""Stage-row speed: Tidy of a 2,000-block design, and a fit-to-view frame with folded cards.

Prints figures against the targets of PRODUCT.md and issue 9: Tidy of 2,000 blocks ≤ 100 ms;
a fit-to-view render with folded cards and 2,000 blocks ≤ 16 ms per frame. Tidy is timed as the
editor runs it (fold groups, stages, columns, wrap width, positions; shapes read from the live
analysis); routing every wire around the cards is timed on its own (it runs when a layout lands,
not per frame). A frame is a repaint of the viewport as the event loop does it (far out, the
overview is drawn once into a pixmap and blitted while nothing changes), also timed after a change
that redraws the overview, after an edit (a convolution's width: shapes after it and a clash, so
cards and findings change but no wire's way), and as a full render into an offscreen image (what a
picture costs).

    QT_QPA_PLATFORM=offscreen PYTHONPATH=src:benchmarks python benchmarks/stage_rows_speed.py
"""
from __future__ import annotations

import os
import statistics
import sys
import time

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from PySide6.QtGui import QImage, QPainter  # noqa: E402
from PySide6.QtWidgets import QApplication  # noqa: E402

from canvas_speed import residual_tower  # noqa: E402
from core_speed import machine_speed  # noqa: E402
from layerloom.core import edits  # noqa: E402
from layerloom.core.layout import graph_shapes, tidy_layout  # noqa: E402

BLOCKS = 2000
RUNS = 15
FRAMES = 40


def timed(fn, runs: int) -> list[float]:
    out = []
    for _ in range(runs):
        t = time.perf_counter()
        fn()
        out.append((time.perf_counter() - t) * 1000)
    return out


def report(label: str, times: list[float], target: float) -> None:
    print(f"{label:<44} median {statistics.median(times):7.2f} ms, worst {max(times):7.2f} ms (target ≤ {target:g} ms)")


def main() -> None:
    from layerloom.gui.canvas import CanvasView
    from layerloom.gui.document import Document

    print(f"this machine: an empty million-step Python loop takes {machine_speed():.0f} ms "
          "(about 21 ms when the machine is quiet)")
    design = residual_tower(BLOCKS)
    design.analysis().refresh()
    print(f"design: {len(design.blocks)} blocks, {len(design.wires)} wires")
    report("Tidy (folded, shapes from the analysis)", timed(lambda: tidy_layout(design), RUNS), 100)
    shapes = graph_shapes(design)
    report("Tidy (unfolded, shapes given)", timed(lambda: tidy_layout(design, shapes, fold=False), RUNS), 100)
    lay = tidy_layout(design)
    print(f"  {len(lay.rows)} lines, {len(set(lay.stage_of.values()))} stage(s), "
          f"{len(lay.stage_of)} cards for {len(design.blocks)} blocks")
    design.apply(edits.move(design, lay.positions))

    app = QApplication.instance() or QApplication(sys.argv)
    view = CanvasView(Document(design))
    view.resize(1280, 800)
    view.show()
    app.processEvents()
    scene = view.canvas_scene

    def route_all():
        scene._dirty_wires.update(scene.wires)
        scene.flush_wires()

    report(f"route all {len(scene.wires)} drawn wires around cards", timed(route_all, 5), 100)

    def editor_tidy():  # from a scrambled layout: layout, one undoable move of every block, routes
        design.apply(edits.move(design, {b: (0.0, 0.0) for b in design.blocks}))
        scene.flush_wires()
        t, c = time.perf_counter(), time.process_time()
        view.tidy()
        scene.flush_wires()
        cpu.append((time.process_time() - c) * 1000)
        return (time.perf_counter() - t) * 1000

    cpu: list[float] = []  # CPU time of the same runs: on a shared machine, wall time includes waiting
    report("Tidy in the editor (layout, edit, routes)", [editor_tidy() for _ in range(5)], 100)
    report("  the same, CPU time", cpu, 100)
    view.fit_all()
    app.processEvents()

    def tidy_seen():  # the same, then the first repaint showing it (the overview drawn afresh)
        t = editor_tidy()
        p = time.perf_counter()
        view.viewport().repaint()
        return t + (time.perf_counter() - p) * 1000

    report("  the same and its first repaint", [tidy_seen() for _ in range(5)], 116)
    view.fit_all()
    app.processEvents()
    image = QImage(view.viewport().size(), QImage.Format.Format_ARGB32_Premultiplied)

    def frame():
        painter = QPainter(image)
        view.render(painter)
        painter.end()

    def repaint():
        view.viewport().repaint()

    def changed_repaint():  # what the overview shows changed (a selection): drawn afresh, then blitted
        c = time.process_time()
        scene._overview_stale()
        view.viewport().repaint()
        repaint_cpu.append((time.process_time() - c) * 1000)

    repaint_cpu: list[float] = []
    document = view.document
    convs = [b for b in design.analysis().order if design.blocks[b].kind == "Conv2d"]
    edited = convs[len(convs) // 2]

    def edited_repaint():  # one convolution's width changed (shapes after it, a clash at its Add): the repaint
        width = design.blocks[edited].settings["out_channels"]
        document.apply(edits.set_settings(design, edited, {"out_channels": 33 if width == 32 else 32}))
        t = time.perf_counter()
        view.viewport().repaint()
        return (time.perf_counter() - t) * 1000

    print(f"fit to view: zoom {view.zoom_level():.3f}, overview drawing {'on' if scene.overview else 'off'}, "
          f"stage labels {'on' if view.shows_stage_summaries() else 'off'}")
    middle = lay.rows[len(lay.rows) // 2].cards[3]
    step = [0]

    def drag_frame():  # move one card, re-route its wires, repaint (the rest of the overview is blitted)
        step[0] += 1
        x, y = design.blocks[middle].position
        scene.blocks[middle].setPos(x + 3.0 * step[0], y + 2.0 * (step[0] % 7))
        scene.follow_moved_cards([scene.blocks[middle]])  # what a drag step does after Qt moved the card
        scene.flush_wires()
        view.viewport().repaint()

    for label in ("folded cards", "unfolded (same positions)"):
        report(f"drag one card far out, {label}", timed(drag_frame, FRAMES), 16)
        scene.blocks[middle].setPos(*design.blocks[middle].position)
        scene.follow_moved_cards([scene.blocks[middle]])
        frame()
        repaint()
        report(f"fit-to-view repaint, {label}", timed(repaint, FRAMES), 16)
        repaint_cpu.clear()
        report("  the same after a change (overview redrawn)", timed(changed_repaint, FRAMES), 16)
        report("    its CPU time", repaint_cpu, 16)
        report("  the first repaint after an edit", [edited_repaint() for _ in range(FRAMES)], 16)
        report("  full render into an image (as a picture)", timed(frame, FRAMES), 16)
        scene.set_fold(False)
        view.fit_all()
        app.processEvents()
    view.close()


if __name__ == "__main__":
    main()
