"""The house look in one place: colours, fonts and sizes shared by every editor widget.

A calm, light palette: neutral cards on a pale canvas, dark text, one accent (a deep teal) for
selection and focus, red for errors, amber for warnings. No colour ever stands for a block kind.
Sizes are scene pixels unless a name says otherwise.
"""
from __future__ import annotations

from PySide6.QtGui import QColor, QFont, QPalette

from layerloom.core.stage_rows import CARD_HEIGHT, CARD_WIDTH  # noqa: F401  (the card size lives in the core)

# ----- colours
CANVAS = QColor("#f4f5f2")  # the canvas behind everything
GRID_MINOR = QColor("#edeeea")
GRID_MAJOR = QColor("#e2e4de")
CARD = QColor("#ffffff")
CARD_EDGE = QColor("#b9bdb4")
TEXT = QColor("#23262a")
TEXT_MUTED = QColor("#6b7075")
GLYPH = QColor("#3b4046")
WIRE = QColor("#8e979f")
WIRE_UNKNOWN = QColor("#c3c7cb")
LABEL_BACK = QColor(244, 245, 242, 225)  # canvas colour, slightly see-through, behind wire labels
COST_BAR = QColor("#55606a")
COST_TRACK = QColor("#eceee9")
ACCENT = QColor("#1f7a78")  # selection, focus, the wire being drawn
ERROR = QColor("#d0342c")
WARNING = QColor("#d08a12")
NOTE = QColor("#8a9199")
BADGE_TEXT = QColor("#ffffff")

SEVERITY_COLOURS = {"error": ERROR, "warning": WARNING, "note": NOTE}


def tooltip_palette() -> QPalette:
    """Hover texts: dark text on a card-white ground with the card edge colour around it."""
    p = QPalette()
    p.setColor(QPalette.ColorRole.ToolTipBase, CARD)
    p.setColor(QPalette.ColorRole.ToolTipText, TEXT)
    p.setColor(QPalette.ColorRole.Window, CARD)
    p.setColor(QPalette.ColorRole.WindowText, TEXT)
    return p


def _font(point_size: float, weight: QFont.Weight = QFont.Weight.Normal, family: str = "") -> QFont:
    f = QFont(family) if family else QFont()
    f.setPointSizeF(point_size)
    f.setWeight(weight)
    return f


def title_font() -> QFont:
    """Block titles."""
    return _font(9.0, QFont.Weight.DemiBold)


def detail_font() -> QFont:
    """Settings notation on the card's second line."""
    return _font(8.0)


def figure_font() -> QFont:
    """Shapes and numbers (wire labels, output shapes)."""
    return _font(7.5)


def badge_font() -> QFont:
    return _font(7.5, QFont.Weight.Bold)


# ----- block card metrics (scene pixels)
CARD_RADIUS = 5.0
NOTCH_DEPTH = 6.0  # how far a port notch cuts into the card
NOTCH_HALF = 6.0  # half the notch's height along the edge
WIRE_GAP = 1.0  # a wire stops this far short of the card edge, leaving its notch open
GLYPH_SIZE = 14.0
PADDING = 8.0
COST_BAR_HEIGHT = 3.0
OUTLINE = 1.0
STATUS_OUTLINE = 2.0

# ----- wires
WIRE_MIN_WIDTH = 1.2  # for 2 channels or fewer (and for wires whose shape is unknown)
WIRE_MAX_WIDTH = 12.0
WIRE_WIDTH_PER_DOUBLING = 1.1  # extra stroke width each time the channel count doubles

# ----- canvas
GRID_STEP = 20.0
GRID_MAJOR_EVERY = 5
SCENE_MARGIN = 1500.0  # free space kept around the blocks
TEXT_MIN_DETAIL = 0.3  # below this zoom level text is not drawn
SHAPE_MIN_DETAIL = 0.08  # below this, cards are plain rectangles and wires hairlines
ZOOM_MIN, ZOOM_MAX = 0.04, 4.0
READABLE_ZOOM = 0.6  # a design opens at no smaller zoom than this (Fit to view may go further)
READABLE_PX = 9.6  # the least on-screen text size (pixels, em) a card keeps far out: below, it
#                    draws only its name and output shape that large; the view adds stage summaries
