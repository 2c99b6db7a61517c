"""Odd-but-valid names in the editor: a 200-character name, right-to-left text, emoji and combining
marks keep the window at the size it was given, wrap in Block settings and are elided (whole on
hover) in the Findings list and its mend line; nothing is cut off at the panel's edge."""
from __future__ import annotations

import pytest
from PySide6.QtWidgets import QApplication, QWidget
from test_window_files import open_window

from layerloom import Design
from layerloom.core import fileformat
from layerloom.gui.text_fit import RUN, breakable

LONG = "x" * 200


def odd_clash() -> Design:
    """A 64 + 128 channel clash (a 1×1 convolution widens one branch only) among odd names."""
    d = Design("ملف " + "long-" * 60)
    x = d.input(64, 56, 56, name="صورة_" + LONG)
    a = d.add("Pointwise", x, out_channels=128, name="widen_" + "🧵" * 40)
    j = d.add("Add", a, x, name="join" + "\u0301" * 5 + "_" + "y" * 150)
    d.add("Output", j, name="out")
    return d


def test_long_names_keep_the_window_and_its_panels_at_their_size(qtbot, tmp_path):
    path = tmp_path / "odd.loom"
    fileformat.save(odd_clash(), path)
    window, _ = open_window(qtbot, tmp_path, [path])
    window.resize(1280, 800)
    window.show_findings()
    listing = window.shelf.findings
    listing.tree.setCurrentItem(listing.tree.topLevelItem(0))  # selects the join: Block settings shows the error
    QApplication.processEvents()
    assert window.document.selection and window.width() == 1280  # was 2254: the mend line's full width
    assert "1×1 projection to 128 channels after صورة_" + LONG in listing.mend_label.toolTip()
    assert listing.tree.columnWidth(2) <= 260 and listing.tree.topLevelItem(0).toolTip(2).startswith("join")
    dock = window.settings_dock.width()
    wide = [(w.objectName(), w.minimumSizeHint().width()) for w in window.block_settings.findChildren(QWidget)
            if w.isVisible() and w.minimumSizeHint().width() > dock]
    assert wide == []  # the facts (the error names the join in full) wrap instead of widening the panel
    assert "adds 64 channels to 128 channels" in window.block_settings.facts.text()
    window.document.undo_stack.setClean()
    window.close()


def test_breakable_lets_only_long_runs_break():
    assert breakable("conv_1 adds 64 channels") == "conv_1 adds 64 channels"
    broken = breakable("a" * (2 * RUN + 1) + " b")
    assert broken == "a" * RUN + "\u200b" + "a" * RUN + "\u200b" + "a b"
    assert breakable("مرحلة ٢ " + "ب" * RUN) == "مرحلة ٢ " + "ب" * RUN  # a run of exactly RUN stays whole


def test_a_baseline_with_a_long_name_keeps_the_depth_ledger_its_height(qtbot, tmp_path):
    """The chart key named the pinned baseline in full: a 300-character design name took six lines
    from the chart at 1280 × 800."""
    path = tmp_path / "odd.loom"
    fileformat.save(odd_clash(), path)
    window, _ = open_window(qtbot, tmp_path, [path])
    window.depth_ledger.pin_baseline()
    qtbot.waitUntil(lambda: "baseline" in window.depth_ledger.key.text())
    key = window.depth_ledger.key.text()
    assert key.startswith("solid: now · dashed: baseline 'ملف long-long-") and "characters)" in key
    assert len(key) < 120
    window.document.undo_stack.setClean()
    window.close()


def deep_design(levels: int) -> Design:
    """Motifs nested ``levels`` deep with long and right-to-left names; the design uses the top one."""
    d = Design("deep")
    prev = None
    for i in range(levels):
        m = d.motif(f"level_{i}_" + ("طبقة" if i % 2 else "long_name_of_a_level_" * 3))
        x = m.input()
        x = m.add("Motif", x, motif=prev, repeat=2) if prev else m.add("Conv2d", x, out_channels=8, kernel=3, padding=1)
        m.add("Output", x)
        prev = m.name
    d.add("Output", d.add("Motif", d.input(8, 32, 32), motif=prev, name="top"))
    return d


def test_the_trail_into_a_motif_sixty_deep_keeps_the_window_width(qtbot, tmp_path):
    """Each step of the way in was a button with the motif's whole name: 60 steps made the window
    13,987 pixels wide. Past four steps the middle ones fold into '…' (named on hover)."""
    from layerloom.gui.graph_trail import SHOWN_STEPS

    path = tmp_path / "deep.loom"
    fileformat.save(deep_design(60), path)
    window, _ = open_window(qtbot, tmp_path, [path])
    window.resize(1280, 800)
    while (inner := [b.id for b in window.document.graph.blocks.values() if b.kind == "Motif"]):
        window.canvas.open_motif(inner[0])
    QApplication.processEvents()
    trail = window.trail
    assert len(window.document.trail) == 61 and window.width() == 1280
    assert len(trail.crumbs) == SHOWN_STEPS and trail.crumbs[0].text() == "deep"
    assert all(len(c.text()) <= 24 for c in trail.crumbs)
    assert trail.here.text() == "level_0_" + "long_name_of_a_level_" * 3  # whole, drawn cut to the room left
    folded = [w for w in trail.findChildren(QWidget) if not w.isHidden() and w.toolTip().startswith("level_59_")]
    assert folded and "level_4_" in folded[0].toolTip()
    trail.crumbs[1].click()  # the first step after the fold: back to level 3
    assert window.document.graph_key.startswith("level_3_")
    window.close()


def test_a_motif_with_a_long_name_leaves_block_settings_its_width(qtbot, tmp_path):
    """The motif list of an instance was as wide as the longest motif name (1,859 pixels): every
    field of Block settings ran past the dock's edge."""
    d = Design("combo")
    m = d.motif("motif_" + "with_a_very_long_name_" * 12, width=8)
    m.add("Output", m.add("Pointwise", m.input(), out_channels={"param": "width"}))
    d.add("Output", d.use(m.name, d.input(8, 32, 32), name="use"))
    path = tmp_path / "combo.loom"
    fileformat.save(d, path)
    window, _ = open_window(qtbot, tmp_path, [path])
    window.resize(1280, 800)
    window.document.select([b.id for b in window.document.design.blocks.values() if b.kind == "Motif"])
    QApplication.processEvents()
    panel = window.block_settings
    assert panel.fields["motif"].widget.currentText() == m.name
    dock = window.settings_dock.width()
    wide = [w.objectName() for w in panel.findChildren(QWidget) if w.isVisible() and w.minimumSizeHint().width() > dock]
    assert wide == []
    window.close()


def test_a_message_naming_a_block_with_a_line_break_stays_on_one_line(qtbot, tmp_path):
    """Found by the editor's property test: 'a⏎b is already wired to out' was said on two lines."""
    d = Design("breaks")
    x = d.input(3, 8, 8, name="cam\nleft")
    out = d.add("Output", x, name="out")
    path = tmp_path / "breaks.loom"
    fileformat.save(d, path)
    window, _ = open_window(qtbot, tmp_path, [path])
    window.document.select([out])
    window.canvas._wire_from(x)  # Ctrl+I, then the line of the block already wired in
    shown = window.statusBar().currentMessage()
    assert shown == "cam⏎left is already wired to out"
    window.close()


def test_a_name_with_an_unclosed_right_to_left_override_leaves_the_message_readable(qtbot, tmp_path):
    """A join named '\\u202eevil' (a right-to-left override never closed) turned the rest of its
    finding around on screen: 'slennahc 821 ot slennahc 46 sdda'. Messages show the control as text."""
    d = Design("bidi")
    x = d.input(64, 8, 8, name="in")
    join = d.add("Add", d.add("Pointwise", x, out_channels=128, name="wide"), x, name="\u202eevil")
    d.add("Output", join, name="out")
    path = tmp_path / "bidi.loom"
    fileformat.save(d, path)
    window, _ = open_window(qtbot, tmp_path, [path])
    item = window.shelf.findings.tree.topLevelItem(0)
    assert item.text(3) == "\\u202eevil adds 64 channels to 128 channels" and item.text(2) == "\\u202eevil"
    window.document.select([join])
    assert "\\u202eevil adds 64 channels to 128 channels" in window.block_settings.facts.text()
    assert window.document.design.blocks[join].name == "\u202eevil"  # the name itself is kept as typed
    window.close()


STACKED = "a" + "\u0301" * 40  # 'a' under forty combining acute accents


def card_picture(qtbot, name: str, zoom: float):
    """A canvas showing one convolution named ``name`` at ``zoom``: its viewport picture as an
    array of pixels, and the card's rectangle in it."""
    import numpy as np
    from PySide6.QtGui import QImage, QTransform

    from layerloom.gui.canvas import CanvasView
    from layerloom.gui.canvas.block_item import H, W
    from layerloom.gui.document import Document

    d = Design()
    d.add("Conv2d", d.input(3, 32, 32), out_channels=8, name=name, position=(600.0, 0.0))
    view = CanvasView(Document(d))
    qtbot.addWidget(view)
    view.resize(700, 420)
    view.show()
    qtbot.waitExposed(view)
    view.setTransform(QTransform.fromScale(zoom, zoom))
    view.centerOn(600.0 + W / 2, H / 2)
    QApplication.processEvents()
    image = view.viewport().grab().toImage().convertToFormat(QImage.Format.Format_RGB32)
    pixels = np.array(image.constBits(), dtype=np.uint8).reshape(image.height(), image.bytesPerLine() // 4, 4)
    card = view.mapFromScene(600.0, 0.0), view.mapFromScene(600.0 + W, H)
    view.close()
    return pixels[:, :image.width()].copy(), card


@pytest.mark.parametrize("zoom", [2.0, 1.0, 0.5, 0.47, 0.25])  # close up; far: name and shape, name only; overview
def test_combining_marks_stacked_on_a_name_stay_inside_its_card(qtbot, zoom):
    """A name drawn with forty accents stacked on one letter differs from the plain name only
    inside the card: the marks beyond what a line holds are dropped, never drawn above the card."""
    import numpy as np

    plain, (top_left, bottom_right) = card_picture(qtbot, "a", zoom)
    stacked, _ = card_picture(qtbot, STACKED, zoom)
    assert plain.shape == stacked.shape
    rows, cols = np.nonzero((plain != stacked).any(axis=2))
    assert len(rows), "the accents are drawn somewhere"
    assert rows.min() >= top_left.y() and rows.max() <= bottom_right.y(), (rows.min(), top_left.y())
    assert cols.min() >= top_left.x() and cols.max() <= bottom_right.x()
