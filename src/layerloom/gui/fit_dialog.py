"""Design ▸ Fit to budget: search the scalings of the design that fit its budget and apply one.

The limits start from the design's budget. Search runs :func:`layerloom.core.fit.fit` (the ledger
only, well under a second) and lists every fitting candidate in a table and on a plot of MACs
against weights, with the front of the largest (no other candidate has more of both) joined by a
line and the chosen (largest) candidate ringed. Selecting a row or a point selects the other.
Apply performs the candidate and sets the budget as one undoable edit.
"""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QDialog, QHBoxLayout, QLabel, QPushButton, QTableWidget, QVBoxLayout

from layerloom.core import units
from layerloom.core.fit import apply_edit, fit, pareto
from layerloom.gui import theme
from layerloom.gui.budget_dialog import MIB, _limit_field
from layerloom.gui.depth_ledger import UnitAxis
from layerloom.gui.result_parts import accept_buttons, caution_label, narrow_form, result_table, set_row

COLUMNS = ("candidate", "weights", "MACs", "peak memory", "est. latency", "")


class FitDialog(QDialog):
    """Fit ``document``'s design to a budget."""

    def __init__(self, document, parent=None):
        super().__init__(parent)
        self.setWindowTitle("Fit to budget")
        self.setObjectName("fit_dialog")
        self.document = document
        self.result = None
        self.front: list[bool] = []
        budget = document.design.budget

        self.weights = _limit_field("")
        self.macs = _limit_field("")
        self.memory = _limit_field(" MiB", 3)
        self.latency = _limit_field(" ms", 3)
        self.weights.setValue(budget.get("weights", 0))
        self.macs.setValue(budget.get("macs", 0))
        self.memory.setValue(budget.get("memory", 0) / MIB)
        self.latency.setValue(budget.get("latency_ms", 0))
        form = narrow_form({"Weights": self.weights, "MACs (batch)": self.macs, "Peak live activations": self.memory,
                            "Estimated latency": self.latency}, 220)
        target = document.design.target
        self.latency.setEnabled(target is not None)
        self.latency.setToolTip(f"on {target.name}" if target else "choose a target in Budget and target first")
        search = QPushButton("Search")
        search.setDefault(True)
        search.clicked.connect(self.search)
        how = QLabel("Width: every channel count × w, rounded to a multiple of 8 (common practice); resolution: "
                     "input size × r; depth: motif repeat counts; compound: depth 1.2^φ, width 1.1^φ, "
                     "resolution 1.15^φ (EfficientNet's constants). The head keeps its channel count.")
        how.setWordWrap(True)
        how.setObjectName("fit_help")
        top = QHBoxLayout()
        top.addLayout(form)
        top.addWidget(search, 0, Qt.AlignmentFlag.AlignBottom)
        top.addStretch(1)

        self.table = result_table(COLUMNS)
        self.table.setSelectionBehavior(QTableWidget.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QTableWidget.SelectionMode.SingleSelection)
        self.table.itemSelectionChanged.connect(self._row_chosen)

        self.x_axis, self.y_axis = UnitAxis("bottom"), UnitAxis("left")
        self.plot = pg.PlotWidget(axisItems={"bottom": self.x_axis, "left": self.y_axis}, background=theme.CARD)
        self.plot.setMenuEnabled(False)
        self.plot.getPlotItem().hideButtons()
        self.plot.showGrid(x=True, y=True, alpha=0.15)
        self.plot.setLabel("bottom", "MACs")
        self.plot.setLabel("left", "weights")
        self.front_line = self.plot.plot(pen=pg.mkPen(theme.ACCENT, width=1.5))
        self.points = pg.ScatterPlotItem(size=8, pen=pg.mkPen(theme.TEXT_MUTED), brush=pg.mkBrush(theme.CARD))
        self.front_points = pg.ScatterPlotItem(size=9, pen=None, brush=pg.mkBrush(theme.ACCENT))
        self.chosen = pg.ScatterPlotItem(size=18, symbol="o", pen=pg.mkPen(theme.WARNING, width=2), brush=None)
        self.selected = pg.ScatterPlotItem(size=14, symbol="s", pen=pg.mkPen(theme.TEXT, width=1.5), brush=None)
        for item in (self.points, self.front_points, self.chosen, self.selected):
            self.plot.addItem(item)
        self.points.sigClicked.connect(self._point_clicked)
        self.front_points.sigClicked.connect(self._point_clicked)
        self.key = QLabel("○ hollow: fits · ● filled, joined: front of the largest (no other has more MACs and "
                          "more weights) · ring: chosen (most MACs)")
        self.key.setObjectName("chart_key")
        self.key.setWordWrap(True)
        self.status = QLabel()
        self.status.setWordWrap(True)
        self.buttons, self.apply_button = accept_buttons(self, "Apply", self.apply)

        body = QHBoxLayout()
        body.addWidget(self.table, 5)
        body.addWidget(self.plot, 4)
        layout = QVBoxLayout(self)
        layout.addLayout(top)
        layout.addWidget(how)
        layout.addLayout(body, 1)
        layout.addWidget(self.key)
        layout.addWidget(self.status)
        layout.addWidget(caution_label())
        layout.addWidget(self.buttons)
        self.resize(1040, 620)
        if budget:
            self.search()

    def budget(self) -> dict:
        values = {"weights": self.weights.value(), "macs": self.macs.value(), "memory": self.memory.value() * MIB,
                  "latency_ms": self.latency.value() if self.latency.isEnabled() else 0}
        return {k: (v if k == "latency_ms" else int(v)) for k, v in values.items() if v > 0}

    def search(self) -> None:
        budget = self.budget()
        try:
            self.result = fit(self.document.design, budget)
        except ValueError as e:
            self.result = None
            self.status.setText(f"Not searched: {e}.")
            self._show([])
            return
        cands = self.result.candidates
        self.front = pareto(cands)
        if self.result.best is None:
            self.status.setText("No scaling of the design fits this budget (multipliers searched from 1/32).")
        else:
            self.status.setText(f"{len(cands)} candidates fit; the largest is {self.result.best.describe()} "
                                f"(search took {self.result.seconds * 1e3:.0f} ms).")
        self._show(cands)

    def _show(self, cands) -> None:
        best = self.result.best if self.result else None
        self.table.blockSignals(True)
        self.table.setRowCount(len(cands))
        for r, (c, front) in enumerate(zip(cands, self.front)):
            mark = "chosen" if c is best else ("front" if front else "")
            set_row(self.table, r, (c.describe(), units.count(c.weights), units.count(c.macs), units.size(c.memory),
                                    "·" if c.latency is None else f"{c.latency * 1e3:.3g} ms", mark), range(1, 5))
        self.table.blockSignals(False)
        macs = np.array([c.macs for c in cands], dtype=float)
        weights = np.array([c.weights for c in cands], dtype=float)
        on = np.array(self.front, dtype=bool) if cands else np.zeros(0, dtype=bool)
        self.points.setData(macs[~on], weights[~on], data=np.flatnonzero(~on))
        self.front_points.setData(macs[on], weights[on], data=np.flatnonzero(on))
        order = np.argsort(macs[on])
        self.front_line.setData(macs[on][order], weights[on][order])
        self.chosen.setData([best.macs] if best else [], [best.weights] if best else [])
        self.selected.setData([], [])
        if best is not None:
            self.table.selectRow(cands.index(best))
        self.apply_button.setEnabled(best is not None)

    def candidate(self):
        rows = self.table.selectionModel().selectedRows() if self.result else []
        return self.result.candidates[rows[0].row()] if rows else None

    def _row_chosen(self) -> None:
        c = self.candidate()
        self.selected.setData([c.macs] if c else [], [c.weights] if c else [])
        self.apply_button.setEnabled(c is not None)

    def _point_clicked(self, item, points, *_) -> None:
        if len(points):
            self.table.selectRow(int(points[0].data()))

    def apply(self) -> None:
        """Apply the selected candidate and the budget as one undoable edit."""
        c = self.candidate()
        if c is None:
            return
        self.document.apply(apply_edit(self.document.design, c, self.budget()))
        self.accept()
