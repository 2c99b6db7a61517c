"""The canvas: blocks as cards, wires as curves, edits by mouse and keys (:class:`CanvasView`)."""
from layerloom.gui.canvas.view import KIND_MIME, MOTIF_MIME, CanvasView

__all__ = ["CanvasView", "KIND_MIME", "MOTIF_MIME"]
