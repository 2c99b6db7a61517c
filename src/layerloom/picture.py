"""``layerloom picture``: the canvas of a design drawn to a PNG or SVG file without a window.

The design is shown in the editor's own canvas view at the given size (Fold on unless
``--unfold``), fitted to view, and that view is rendered: the picture is what the editor shows at
fit, badges of findings included. ``--tidy`` lays the design out in stage rows first (the file is
not changed). Qt runs offscreen when no display is set.
"""
from __future__ import annotations

import os
import re
import sys
from pathlib import Path

SIZE = re.compile(r"^\s*(\d+)\s*[x×]\s*(\d+)\s*$")


class PictureError(Exception):
    """An option or output the picture cannot be made with (the message says which and why)."""


def parse_size(text: str) -> tuple[int, int]:
    """``"1280x800"`` → (1280, 800); refuses sizes below 200×150 or above 8000×8000."""
    m = SIZE.match(text)
    if m is None:
        raise PictureError(f"--size {text!r}: expected WIDTHxHEIGHT, e.g. 1280x800")
    w, h = int(m.group(1)), int(m.group(2))
    if not (200 <= w <= 8000 and 150 <= h <= 8000):
        raise PictureError(f"--size {w}x{h}: width must be 200 to 8000 and height 150 to 8000 pixels")
    return w, h


def draw_picture(design, out: str | Path, size=(1280, 800), tidy: bool = False, fold: bool = True) -> Path:
    """Write ``design``'s canvas at fit to ``out`` (.png or .svg) and return its path."""
    out = Path(out)
    kind = out.suffix.lower()
    if kind not in (".png", ".svg"):
        raise PictureError(f"{out}: the picture must be a .png or .svg file")
    if not os.environ.get("DISPLAY") and not os.environ.get("WAYLAND_DISPLAY"):
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    from PySide6.QtCore import QRectF
    from PySide6.QtGui import QImage, QPainter
    from PySide6.QtWidgets import QApplication

    from layerloom.core import edits
    from layerloom.core.layout import tidy_positions
    from layerloom.gui import theme
    from layerloom.gui.canvas import CanvasView
    from layerloom.gui.document import Document

    app = QApplication.instance() or QApplication(sys.argv[:1])
    view = CanvasView(Document(design))
    view.canvas_scene.set_fold(fold)
    view.setHorizontalScrollBarPolicy(view.horizontalScrollBarPolicy().ScrollBarAlwaysOff)
    view.setVerticalScrollBarPolicy(view.verticalScrollBarPolicy().ScrollBarAlwaysOff)
    view.setFrameShape(view.frameShape().NoFrame)
    view.resize(*size)
    if tidy:
        design.apply(edits.move(design, tidy_positions(design, fold=fold, view=(float(size[0]), float(size[1])))))
    view.show()
    app.processEvents()
    view.fit_all()
    app.processEvents()
    w, h = view.viewport().width(), view.viewport().height()
    if kind == ".png":
        image = QImage(w, h, QImage.Format.Format_ARGB32_Premultiplied)
        image.fill(theme.CANVAS)
        painter = QPainter(image)
        view.render(painter)
        painter.end()
        ok = image.save(str(out), "PNG")
    else:
        from PySide6.QtSvg import QSvgGenerator

        gen = QSvgGenerator()
        gen.setFileName(str(out))
        gen.setSize(view.viewport().size())
        gen.setViewBox(QRectF(0, 0, w, h))
        gen.setTitle(design.name)
        painter = QPainter()
        ok = painter.begin(gen)
        if ok:
            view.canvas_scene.set_caching(False)  # shapes and text in the SVG, not bitmaps of cards
            view.render(painter)
            ok = painter.end()
    view.close()
    if not ok:
        raise PictureError(f"{out}: could not be written")
    return out


def run(args) -> int:
    """The ``picture`` subcommand: ``args`` has file, output, size, tidy and unfold."""
    from layerloom.core.fileformat import load

    size = parse_size(args.size)
    out = draw_picture(load(args.file), args.output, size, tidy=args.tidy, fold=not args.unfold)
    print(f"wrote {out} ({size[0]}×{size[1]})")
    return 0


def register(sub) -> None:
    """Add the ``picture`` subcommand to the command line's subparsers."""
    p = sub.add_parser("picture", help="draw the canvas at fit to a PNG or SVG file, without a window")
    p.add_argument("file", help="a .loom design")
    p.add_argument("-o", "--output", required=True, metavar="OUT.png|OUT.svg", help="the picture to write")
    p.add_argument("--size", default="1280x800", metavar="WxH", help="canvas size in pixels (default 1280x800)")
    p.add_argument("--tidy", action="store_true", help="lay the design out in stage rows first (the file is kept)")
    p.add_argument("--unfold", action="store_true", help="show norms and activations as cards of their own")
    p.set_defaults(run=run)
