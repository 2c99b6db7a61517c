"""The trail above the canvas while a motif is open: the way in from the design, and where the shapes
shown inside come from.

It reads ``‹ Back   leaf-grader › stage › bottleneck   shapes as in stage_2``: each step but the last
is a button that goes back to it; Back goes one step. Hidden while the design itself is shown.
However deep the way in and however long the names, the trail keeps the window's width: past
:data:`SHOWN_STEPS` steps the middle ones fold into "…" (their names on hover), a long name is
shortened on its button, and the motif's name and the note are cut to the room left.
"""
from __future__ import annotations

from PySide6.QtWidgets import QHBoxLayout, QLabel, QPushButton, QWidget

from layerloom.core.values import label
from layerloom.gui import theme
from layerloom.gui.document import Document
from layerloom.gui.text_fit import ElidedLabel

SHOWN_STEPS = 4  # steps back shown as buttons: the first, "…", then the last ones
NAME_ROOM = 24  # characters of a name on a step's button

STYLE = f"""
QWidget#graph_trail {{ background: {theme.CARD.name()}; border-bottom: 1px solid {theme.CARD_EDGE.name()}; }}
QPushButton#crumb, QPushButton#trail_back {{ border: none; background: transparent; padding: 2px 4px;
    color: {theme.ACCENT.name()}; }}
QPushButton#crumb:hover, QPushButton#trail_back:hover {{ text-decoration: underline; }}
QLabel#trail_here {{ font-weight: 600; color: {theme.TEXT.name()}; }}
QLabel#trail_sep, QLabel#trail_note {{ color: {theme.TEXT_MUTED.name()}; }}
"""


class GraphTrail(QWidget):
    """The trail for ``document``: follows ``graph_changed`` and re-reads the note after edits."""

    def __init__(self, document: Document, parent=None):
        super().__init__(parent)
        self.document = document
        self.setObjectName("graph_trail")
        self.setStyleSheet(STYLE)
        self.back_button = QPushButton("‹ Back")
        self.back_button.setObjectName("trail_back")
        self.back_button.setToolTip("Back to the graph this motif was opened from (Alt+Left)")
        self.back_button.clicked.connect(lambda: self.document.back())
        self.crumbs: list[QPushButton] = []
        self.here = ElidedLabel()
        self.here.setObjectName("trail_here")
        self.note = ElidedLabel()
        self.note.setObjectName("trail_note")
        self.row = QHBoxLayout(self)
        self.row.setContentsMargins(6, 2, 10, 2)
        self.row.setSpacing(2)
        self.row.addWidget(self.back_button)
        self.row.addSpacing(10)
        self._steps = QHBoxLayout()
        self._steps.setSpacing(2)
        self.row.addLayout(self._steps)
        self.row.addWidget(self.here)
        self.row.addSpacing(16)
        self.row.addWidget(self.note, 1)
        document.graph_changed.connect(self.refresh)
        document.replaced.connect(self.refresh)
        document.changed.connect(self._on_change)
        self.refresh()

    def _on_change(self, change) -> None:
        if self.document.graph_key and (change.reinfers or change.renamed):
            self._show_note()

    def refresh(self) -> None:
        """Show the trail as the document has it (hidden at the design)."""
        trail = self.document.trail
        self.setVisible(len(trail) > 1)
        while self._steps.count():
            w = self._steps.takeAt(0).widget()
            w.hide()
            w.deleteLater()
        self.crumbs = []
        steps = list(enumerate(trail[:-1]))
        folded = steps[1:len(steps) - SHOWN_STEPS + 1] if len(steps) > SHOWN_STEPS else []
        for i, (key, _) in steps:
            if folded and i == folded[0][0]:
                more = QLabel("… ›")
                more.setObjectName("trail_sep")
                more.setToolTip(" › ".join(k for _, (k, _) in folded))
                self._steps.addWidget(more)
            if folded and folded[0][0] <= i <= folded[-1][0]:
                continue
            name = key or self.document.design.name
            crumb = QPushButton(name if len(name) <= NAME_ROOM else name[:NAME_ROOM - 1] + "…")
            crumb.setObjectName("crumb")
            crumb.setToolTip("Show the design" if not key else f"Show motif {label(name)}")
            crumb.clicked.connect(lambda checked=False, back=len(trail) - 1 - i: self.document.back(back))
            sep = QLabel("›")
            sep.setObjectName("trail_sep")
            self._steps.addWidget(crumb)
            self._steps.addWidget(sep)
            self.crumbs.append(crumb)
        self.here.setText(trail[-1][0])
        self._show_note()

    def _show_note(self) -> None:
        view = self.document.motif_view()
        if view is None:
            self.note.clear()
        elif view.names:
            self.note.setText(f"shapes as in {' › '.join(view.names)}")
        else:
            self.note.setText("not used in the design yet: shapes unknown")
