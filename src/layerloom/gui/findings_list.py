"""Findings: the design's errors, warnings and notes as a list, with their mends one click away.

Errors come first (the core's order). Choosing a finding selects its block and asks the window to
centre it (``block_chosen``); a finding inside a motif names the instance and the inner block
(``stage_2 › conv_a``), and choosing it opens the motif, as in that use, at the inner block.
**Mend** applies the first mend offered for it, the arrow beside it lists the others. A mend is one
undoable edit. The list always shows the whole design's findings and follows ``document.changed``.
"""
from __future__ import annotations

from PySide6.QtCore import Signal
from PySide6.QtWidgets import (QHBoxLayout, QHeaderView, QMenu, QToolButton, QTreeWidget, QTreeWidgetItem, QVBoxLayout,
                               QWidget)

from layerloom.core import edits
from layerloom.core.findings import Finding
from layerloom.core.mends import Mend, mends_for
from layerloom.core.values import one_line
from layerloom.gui import theme
from layerloom.gui.document import Document
from layerloom.gui.text_fit import ElidedLabel

COLUMNS = ("Severity", "Code", "Block", "Message")
BLOCK_COLUMN_WIDTH = 260  # pixels at most for the block path; a longer one is elided (hover shows it whole)


def _key(f: Finding) -> tuple:
    """What identifies a finding across refreshes (its message may change with the numbers)."""
    return f.code, f.block, f.port, f.path


class FindingsList(QWidget):
    """The Findings tab of the shelf."""

    block_chosen = Signal(str)  # a finding's block, to centre on the canvas
    counts_changed = Signal(int, int)  # errors, warnings

    def __init__(self, document: Document, parent=None):
        super().__init__(parent)
        self.document = document
        self.findings: list[Finding] = []
        self._mends: list[Mend] = []
        self.mend_applier = None  # the canvas's way of applying a mend (it keeps a tidy design tidy)

        self.tree = QTreeWidget()
        self.tree.setObjectName("findings_tree")
        self.tree.setColumnCount(len(COLUMNS))
        self.tree.setHeaderLabels(COLUMNS)
        self.tree.setRootIsDecorated(False)
        self.tree.setUniformRowHeights(True)
        self.tree.setAlternatingRowColors(True)
        header = self.tree.header()
        for col in range(2):
            header.setSectionResizeMode(col, QHeaderView.ResizeMode.ResizeToContents)
        header.setSectionResizeMode(2, QHeaderView.ResizeMode.Interactive)  # sized in refresh, long names elided
        header.setStretchLastSection(True)
        self.tree.currentItemChanged.connect(self._on_current)
        self.tree.itemActivated.connect(lambda item, _col: self._choose(item))

        self.mend_button = QToolButton()
        self.mend_button.setObjectName("mend_button")
        self.mend_button.setText("Mend")
        self.mend_button.setPopupMode(QToolButton.ToolButtonPopupMode.MenuButtonPopup)
        self.mend_menu = QMenu(self.mend_button)
        self.mend_button.setMenu(self.mend_menu)
        self.mend_button.clicked.connect(lambda: self.apply_mend(0))
        self.mend_label = ElidedLabel()
        self.mend_label.setObjectName("mend_label")
        self.note = ElidedLabel()
        self.note.setObjectName("field_message")

        bar = QHBoxLayout()
        bar.setContentsMargins(0, 0, 0, 0)
        bar.addWidget(self.mend_button)
        bar.addWidget(self.mend_label, 1)
        bar.addWidget(self.note)
        col = QVBoxLayout(self)
        col.setContentsMargins(4, 4, 4, 4)
        col.addWidget(self.tree, 1)
        col.addLayout(bar)

        document.changed.connect(self._on_change)
        document.replaced.connect(self.refresh)
        self.refresh()

    # ----- model → list
    def _on_change(self, change) -> None:
        if change.reinfers or change.renamed:
            self.refresh()

    def refresh(self) -> None:
        """Rebuild the list from the design's findings, keeping the current one if it is still there."""
        current = self.current_finding()
        design = self.document.design
        self.findings = design.findings()
        self.tree.blockSignals(True)
        self.tree.clear()
        keep = None
        for f in self.findings:
            where, message = one_line(" › ".join(self._where(f)[1]) or "—"), one_line(f.message)
            item = QTreeWidgetItem([f.severity, f.code, where, message])
            item.setForeground(0, theme.SEVERITY_COLOURS[f.severity])
            item.setToolTip(2, where)
            item.setToolTip(3, message)
            self.tree.addTopLevelItem(item)
            if current is not None and _key(f) == _key(current):
                keep = item
        self.tree.resizeColumnToContents(2)
        self.tree.setColumnWidth(2, min(self.tree.columnWidth(2), BLOCK_COLUMN_WIDTH))  # the message stays in view
        if keep is not None:
            self.tree.setCurrentItem(keep)
        self.tree.blockSignals(False)
        self._show_mends()
        self.counts_changed.emit(*self.counts())

    def counts(self) -> tuple[int, int]:
        """Errors and warnings listed."""
        return (sum(f.severity == "error" for f in self.findings),
                sum(f.severity == "warning" for f in self.findings))

    def current_finding(self) -> Finding | None:
        item = self.tree.currentItem()
        if item is None:
            return None
        return self.findings[self.tree.indexOfTopLevelItem(item)]

    def _show_mends(self) -> None:
        f = self.current_finding()
        self._mends = mends_for(self.document.design, f) if f is not None else []
        self.mend_menu.clear()
        for i, m in enumerate(self._mends):
            self.mend_menu.addAction(m.label, lambda i=i: self.apply_mend(i))
        self.mend_button.setEnabled(bool(self._mends))
        if f is None:
            self.mend_label.setText("Choose a finding to see its mends." if self.findings else "No findings.")
        elif self._mends:
            self.mend_label.setText(self._mends[0].label)
        else:
            self.mend_label.setText("No mend is offered for this finding.")
        self.mend_button.setToolTip(self._mends[0].label if self._mends else "")

    # ----- list → model
    def _on_current(self, item, _previous) -> None:
        self.note.clear()
        self._show_mends()
        if item is not None:
            self._choose(item)

    def _where(self, f: Finding) -> tuple[list[str], list[str]]:
        """Motif names entered and block names passed on the way to ``f``'s block."""
        graph, keys, names = self.document.design, [], []
        for bid in (f.block, *f.path):
            block = graph.blocks.get(bid)
            if block is None:
                break
            names.append(block.name)
            motif = self.document.design.motifs.get(block.settings.get("motif")) if block.kind == "Motif" else None
            if motif is None:
                break
            keys.append(motif.name)
            graph = motif
        return keys[:len(f.path)], names

    def _choose(self, item: QTreeWidgetItem) -> None:
        """Show the finding's block on the canvas: in the design, or inside the motif (as in the use
        the finding comes from), selected and centred."""
        f = self.findings[self.tree.indexOfTopLevelItem(item)]
        doc = self.document
        if f.path:
            keys, _ = self._where(f)
            if len(keys) != len(f.path):
                return  # the motif changed since the finding was listed
            doc.show_path(keys, use=(f.block, *f.path[:-1]), select=[f.path[-1]])
            if f.path[-1] in doc.graph.blocks:
                self.block_chosen.emit(f.path[-1])
        elif f.block in doc.design.blocks:
            if doc.graph_key:
                doc.show_path([], select=[f.block])
            else:
                doc.select([f.block])
            self.block_chosen.emit(f.block)

    def apply_mend(self, index: int) -> None:
        """Apply mend ``index`` of the current finding as one undoable edit."""
        if index >= len(self._mends):
            return
        try:
            if self.mend_applier is not None:
                self.mend_applier(self._mends[index])
            else:
                self.document.apply(self._mends[index].edit)
        except edits.EditError as e:
            self.note.setText(str(e))

