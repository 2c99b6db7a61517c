"""The Depth ledger: how weights, MACs, activation memory and estimated latency add up along depth.

x counts blocks as executed in the core's depth order (a motif use spans the blocks it runs, so a
network draws the same whether or not it is grouped; hover names the block); y is the metric, as a
cumulative curve (activation memory: live bytes at each step and their running peak) or as
per-block bars. The design's budget is drawn as a line and the block where the curve passes it
is marked; a pinned baseline is overlaid dashed, with a table of totals and their change. With
latency, the design's last measurement (Design ▸ Measure on this machine) is drawn beside the
estimate; training memory (:mod:`layerloom.core.training_memory`) is charted for a chosen optimizer.
Curves are created once and refreshed with ``setData`` on each edit.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, QTimer, Signal
from PySide6.QtGui import QColor
from PySide6.QtWidgets import (QCheckBox, QComboBox, QFileDialog, QHBoxLayout, QHeaderView, QLabel, QMenu, QMessageBox,
                               QSizePolicy, QTableWidget, QTableWidgetItem, QToolButton, QVBoxLayout, QWidget)

from layerloom.core import units
from layerloom.core.baseline import compare, snapshot, snapshot_of_file
from layerloom.core.edits import Edit, SetField
from layerloom.core.fileformat import LoomFileError
from layerloom.core.ledger import Ledger, floats
from layerloom.core.ledger_csv import ledger_csv
from layerloom.core.targets import CAUTION
from layerloom.core.training_memory import training_curve, training_memory, training_text
from layerloom.core.values import label
from layerloom.gui import theme

METRICS = (  # key, menu label, axis unit formatter, budget key, baseline column
    ("weights", "Weights", units.count, "weights", "weights"),
    ("macs", "MACs", units.count, "macs", "macs"),
    ("memory", "Activation memory", units.size, "memory", "live"),
    ("latency", "Estimated latency", lambda s: f"{s * 1e3:.3g} ms", "latency_ms", "latency"),
    ("training", "Training memory", units.size, None, None),
)
OPTIMIZER_LABELS = {"sgd_momentum": "SGD with momentum", "adam": "Adam", "sgd": "plain SGD"}  # keys: OPTIMIZERS
MEASURED_PEN = pg.mkPen(theme.TEXT, width=1.5, style=Qt.PenStyle.DashDotDotLine)
BASE_PEN = pg.mkPen(theme.TEXT_MUTED, width=1.5, style=Qt.PenStyle.DashLine)
NOW_PEN = pg.mkPen(theme.ACCENT, width=2)
PEAK_PEN = pg.mkPen(theme.ACCENT, width=1, style=Qt.PenStyle.DotLine)
BUDGET_PEN = pg.mkPen(theme.WARNING, width=1.5, style=Qt.PenStyle.DashDotLine)


class UnitAxis(pg.AxisItem):
    """A y axis whose tick labels use K/M/G, KiB/MiB or ms."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.format = units.count
        self.enableAutoSIPrefix(False)

    def tickStrings(self, values, scale, spacing):  # noqa: N802 (Qt naming)
        return [self.format(v) if v else "0" for v in values]


class StepAxis(pg.AxisItem):
    """The x axis: steps along depth are whole numbers, so no tick falls between two blocks."""

    def tickValues(self, minVal, maxVal, size):  # noqa: N802, N803 (Qt naming)
        levels = [(spacing, values) for spacing, values in super().tickValues(minVal, maxVal, size) if spacing >= 1]
        return levels or [(1.0, [float(v) for v in range(max(int(minVal), 1), int(maxVal) + 1)])]


class DepthLedger(QWidget):
    """The chart and its baseline table for one document. ``block_activated`` carries the id of a
    block clicked in the chart (the window centres the canvas on it)."""

    block_activated = Signal(str)

    def __init__(self, document, parent=None):
        super().__init__(parent)
        self.document = document
        self.ledger: Ledger | None = None
        self.values = np.zeros(0)
        self.x = np.zeros(0)  # each block's last step as executed
        self._pending = False

        self.metric_box = QComboBox()
        self.metric_box.addItems([m[1] for m in METRICS])
        self.view_box = QComboBox()
        self.view_box.addItems(["Along depth", "Per block"])
        more = QToolButton(text="Baseline and export")
        more.setPopupMode(QToolButton.ToolButtonPopupMode.InstantPopup)
        menu = QMenu(more)
        self.pin_action = menu.addAction("Pin as baseline", self.pin_baseline)
        menu.addAction("Baseline from another design…", self.baseline_from_file)
        self.clear_action = menu.addAction("Clear baseline", self.clear_baseline)
        menu.addSeparator()
        menu.addAction("Export chart as PNG…", self.export_png)
        menu.addAction("Export ledger as CSV…", self.export_csv)
        more.setMenu(menu)
        self.optimizer_box = QComboBox()
        for key, text in OPTIMIZER_LABELS.items():
            self.optimizer_box.addItem(text, key)
        self.mixed_box = QCheckBox("mixed precision")
        self.mixed_box.setToolTip("fp16 activations, fp32 master weights, gradients and optimizer state")
        top = QHBoxLayout()
        top.addWidget(self.metric_box)
        top.addWidget(self.view_box)
        top.addWidget(self.optimizer_box)
        top.addWidget(self.mixed_box)
        top.addStretch(1)
        top.addWidget(more)

        self.axis = UnitAxis("left")
        self.axis.setWidth(60)  # room for labels such as "281 K" or "3.91 MiB" (narrower ones are hidden)
        self.plot = pg.PlotWidget(axisItems={"left": self.axis, "bottom": StepAxis("bottom")}, background=theme.CARD)
        self.plot.setMenuEnabled(False)
        self.plot.showGrid(x=True, y=True, alpha=0.15)
        self.plot.setLabel("bottom", "depth (blocks as executed)")
        self.plot.getPlotItem().hideButtons()
        self.base_curve = self.plot.plot(pen=BASE_PEN, name="baseline")
        self.peak_curve = self.plot.plot(pen=PEAK_PEN)
        self.curve = self.plot.plot(pen=NOW_PEN, name="now")
        self.measured_curve = self.plot.plot(pen=MEASURED_PEN, name="measured")
        for c in (self.base_curve, self.peak_curve, self.curve, self.measured_curve):
            c.setClipToView(True)
            c.setDownsampling(auto=True, method="peak")
        self.bars = pg.BarGraphItem(x=[], height=[], width=0.8, brush=theme.COST_BAR, pen=None)
        self.plot.addItem(self.bars)
        self.budget_line = pg.InfiniteLine(angle=0, pen=BUDGET_PEN, movable=False)
        self.plot.addItem(self.budget_line)
        self.crossing = pg.ScatterPlotItem(size=11, symbol="o", pen=pg.mkPen(theme.WARNING, width=2), brush=None)
        self.plot.addItem(self.crossing)
        self.marker = pg.InfiniteLine(angle=90, pen=pg.mkPen(theme.ACCENT, width=1), movable=False)
        self.plot.addItem(self.marker)
        self.hover = pg.TextItem(color=theme.TEXT, anchor=(0, 1), fill=QColor(255, 255, 255, 220))
        self.hover.setZValue(10)
        self.plot.addItem(self.hover, ignoreBounds=True)
        self.hover.hide()

        self.table = QTableWidget(0, 4)
        self.table.setHorizontalHeaderLabels(["total", "now", "baseline", "change"])
        self.table.verticalHeader().hide()
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        header.setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        self.table.setMaximumHeight(132)
        self.key = QLabel()  # wraps, and never asks for more width: the right column keeps its size
        self.key.setObjectName("chart_key")
        self.key.setWordWrap(True)
        self.key.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Preferred)
        self.caution = QLabel(CAUTION)
        self.caution.setWordWrap(True)
        self.caution.setObjectName("caution")

        layout = QVBoxLayout(self)
        layout.setContentsMargins(4, 4, 4, 4)
        layout.addLayout(top)
        layout.addWidget(self.plot, 1)
        layout.addWidget(self.key)
        layout.addWidget(self.table)
        layout.addWidget(self.caution)

        self.metric_box.currentIndexChanged.connect(self.redraw)
        self.view_box.currentIndexChanged.connect(self.redraw)
        self.optimizer_box.currentIndexChanged.connect(self.redraw)
        self.mixed_box.toggled.connect(self.redraw)
        self.plot.scene().sigMouseMoved.connect(self._hovered)
        self.plot.scene().sigMouseClicked.connect(self._clicked)
        document.changed.connect(self._changed)
        document.replaced.connect(self.refresh)
        document.selection_changed.connect(self._mark_selection)
        document.graph_changed.connect(lambda: self._mark_selection(self.document.selection))
        self.refresh()

    # ----- model → chart
    def _changed(self, change) -> None:
        if change.reinfers or change.fields & {"baseline", "measurement"} or change.renamed:
            if not self._pending:  # one refresh per event-loop pass, however many edits arrive
                self._pending = True
                QTimer.singleShot(0, self.refresh)

    def refresh(self) -> None:
        """Rebuild the ledger from the design and refresh every curve."""
        self._pending = False
        self.ledger = Ledger(self.document.design.analysis())
        self.redraw()

    def remember_choices(self, settings) -> None:
        """Start with the metric and view last chosen (kept in ``settings``) and keep each new choice."""
        for box, name in ((self.metric_box, "ledger/metric"), (self.view_box, "ledger/view")):
            index = box.findText(str(settings.value(name, box.currentText())))
            if index >= 0:
                box.setCurrentIndex(index)
            box.currentTextChanged.connect(lambda text, name=name: settings.setValue(name, text))

    def metric_key(self) -> str:
        return METRICS[self.metric_box.currentIndex()][0]

    def series(self, key: str, cumulative: bool) -> np.ndarray:
        """The values drawn for metric ``key`` (bytes for memory, seconds for latency)."""
        L = self.ledger
        if key == "memory":
            return floats(L.live if cumulative else L.out_memory)
        if key == "training":
            curve = floats(training_curve(L, self.optimizer_box.currentData(), self.mixed_box.isChecked()))
            return curve if cumulative else np.diff(curve, prepend=0.0)
        per_block = {"weights": L.costs[:, 0], "macs": L.costs[:, 2],
                     "latency": L.latency if L.latency is not None else np.zeros(len(L.order))}[key]
        return floats(np.cumsum(per_block) if cumulative else per_block)

    def redraw(self) -> None:
        L, design = self.ledger, self.document.design
        key, _, fmt, budget_key, base_key = METRICS[self.metric_box.currentIndex()]
        cumulative = self.view_box.currentIndex() == 0
        self.axis.format = fmt
        self.x = x = L.steps.astype(float)
        self.values = y = self.series(key, cumulative)
        if cumulative:
            self.curve.setData(x, y)
            self.bars.setOpts(x=[], height=[])
        else:
            self.curve.setData([], [])
            self.bars.setOpts(x=x, height=y)
        peak = floats(L.running_peak) if key == "memory" and cumulative else np.zeros(0)
        self.peak_curve.setData(x[:len(peak)], peak)
        self._draw_baseline(base_key, cumulative)
        measured = self._draw_measured(x, key, cumulative)
        limit = design.budget.get(budget_key)
        if limit is not None and key == "latency":
            limit = limit / 1e3
        show_budget = limit is not None and (cumulative or key == "memory")
        self.budget_line.setVisible(show_budget)
        if show_budget:
            self.budget_line.setValue(limit)
        self._draw_crossing(budget_key)
        key_text = ["solid: now"]
        if key == "memory" and cumulative:
            key_text.append("dotted: running peak")
        if self.base_curve.xData is not None and len(self.base_curve.xData):
            name = design.baseline["name"]
            shown = label(name, 40)  # a long or odd name shortened and quoted, so the chart keeps its height
            key_text.append("dashed: baseline " + (f"“{name}”" if shown == name else shown))
        if show_budget:
            key_text.append("dash-dot: budget" + (", ○ where it is passed" if len(self.crossing.data) else ""))
        if measured:
            key_text.append(measured)
        if key == "training":
            memory = training_memory(L, self.optimizer_box.currentData(), self.mixed_box.isChecked())
            key_text.append(f"total {units.size(memory.total)}, of it kept activations {units.size(memory.activations)}")
            self.key.setToolTip(training_text(memory))
        self.key.setText(" · ".join(key_text))
        self.caution.setVisible(key in ("latency", "training"))
        self.optimizer_box.setVisible(key == "training")
        self.mixed_box.setVisible(key == "training")
        self._fill_table()
        self._mark_selection(self.document.selection)
        self.clear_action.setEnabled(design.baseline is not None)

    def _draw_measured(self, x: np.ndarray, key: str, cumulative: bool) -> str:
        """The last measurement's latency along depth (on the latency metric); its key text or ""."""
        m = self.document.design.measurement
        if key != "latency" or m is None:
            self.measured_curve.setData([], [])
            return ""
        per_block = m.along(self.ledger.order)
        self.measured_curve.setData(x, np.cumsum(per_block) if cumulative else per_block)
        missing = m.missing(self.ledger)
        self.key.setToolTip(f"measured {m.date} on {m.machine.describe()}, torch {m.machine.torch_version}, "
                            f"batch {m.batch}, median of {m.repeat} runs")
        return (f"dash-dot-dot: measured {m.date[:10]}, {m.machine.threads} thr."
                + (f" ({len(missing)} new blocks not timed)" if missing else ""))

    def _draw_baseline(self, column: str, cumulative: bool) -> None:
        base = self.document.design.baseline
        values = None if base is None else base["blocks"].get(column)
        if values is None:
            self.base_curve.setData([], [])
            return
        values = floats(values)
        if not cumulative:
            if column == "live":  # live memory has no per-block form in a baseline
                self.base_curve.setData([], [])
                return
            values = np.diff(values, prepend=0.0)
        steps = base["blocks"].get("step") or range(1, len(values) + 1)  # pinned before steps were kept: one per block
        self.base_curve.setData(np.asarray(steps, dtype=float)[:len(values)], values[:len(steps)])

    def _draw_crossing(self, budget_key: str) -> None:
        code = f"budget.{budget_key}"
        spots = []
        for f in self.document.design.analysis().budget_findings():
            if f.code == code and f.block in self.ledger.order:
                i = self.ledger.order.index(f.block)
                spots.append({"pos": (self.x[i], self.values[i]), "data": f.block})
        self.crossing.setData(spots)
        self.crossing.setToolTip("\n".join(f.message for f in self.document.design.analysis().budget_findings()
                                           if f.code == code))

    def _fill_table(self) -> None:
        base = self.document.design.baseline
        diffs = compare(self.ledger, base) if base is not None else []
        fmt = {"weights": units.count, "macs": units.count, "peak_memory": units.size,
               "latency": lambda s: f"{s * 1e3:.3g} ms"}
        totals = self.ledger.totals
        rows = diffs or [(k, label, getattr(totals, k)) for k, label in
                         (("weights", "weights"), ("macs", "MACs"), ("peak_memory", "peak live activations"),
                          ("latency", "estimated latency")) if getattr(totals, k) is not None]
        self.table.setRowCount(len(rows))
        for r, d in enumerate(rows):
            if diffs:
                pct = "" if d.percent is None else f" ({d.percent:+.1f} %)"
                cells = (d.label, fmt[d.metric](d.current), fmt[d.metric](d.baseline),
                         ("+" if d.delta > 0 else "") + fmt[d.metric](d.delta) + pct)
            else:
                cells = (d[1], fmt[d[0]](d[2]), "—", "")
            for c, text in enumerate(cells):
                item = QTableWidgetItem(text)
                if c:
                    item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                self.table.setItem(r, c, item)
        self.table.horizontalHeaderItem(2).setToolTip(
            f"{base['name']}, pinned {base.get('pinned', '')}" if base else "no baseline pinned")

    def _mark_selection(self, ids) -> None:
        inside = self.document.graph_key != ""  # the selection is of blocks inside a motif, not on this chart
        index = self._index(ids[0]) if ids and not inside else None
        self.marker.setVisible(index is not None)
        if index is not None:
            self.marker.setValue(self.x[index])

    # ----- chart → model
    def _index(self, block_id: str) -> int | None:
        try:
            return self.ledger.order.index(block_id)
        except ValueError:
            return None

    def _step_at(self, scene_pos) -> int | None:
        vb = self.plot.getPlotItem().vb
        if not vb.sceneBoundingRect().contains(scene_pos) or not len(self.values):
            return None
        step = round(vb.mapSceneToView(scene_pos).x())
        i = int(np.searchsorted(self.x, step))  # the block whose steps reach ``step``
        return i if step >= 1 and i < len(self.values) else None

    def _hovered(self, scene_pos) -> None:
        i = self._step_at(scene_pos)
        if i is None:
            self.hover.hide()
            return
        bid = self.ledger.order[i]
        block = self.document.design.blocks[bid]
        fmt = METRICS[self.metric_box.currentIndex()][2]
        self.hover.setText(f"{int(self.x[i])}. {block.name} ({block.kind})\n{fmt(self.values[i])}")
        self.hover.setPos(self.x[i], self.values[i])
        self.hover.show()

    def _clicked(self, event) -> None:
        i = self._step_at(event.scenePos())
        if i is not None and event.button() == Qt.MouseButton.LeftButton:
            bid = self.ledger.order[i]
            self.document.select([bid])
            self.block_activated.emit(bid)

    # ----- actions
    def pin_baseline(self) -> None:
        """Freeze the current ledger as the baseline (one undoable edit)."""
        name = f"{self.document.design.name} as pinned"
        self.document.apply(Edit("Pin as baseline", (SetField("baseline", snapshot(self.ledger, name)),)))

    def baseline_from_file(self, path: str | None = None) -> None:
        if path is None:
            path, _ = QFileDialog.getOpenFileName(self, "Baseline from another design", "", "Designs (*.loom)")
            if not path:
                return
        try:
            data = snapshot_of_file(path, self.document.design.target, Path(path).stem)
        except LoomFileError as e:
            QMessageBox.warning(self, "Baseline not loaded", str(e))
            return
        self.document.apply(Edit("Baseline from file", (SetField("baseline", data),)))

    def clear_baseline(self) -> None:
        self.document.apply(Edit("Clear baseline", (SetField("baseline", None),)))

    def export_png(self, path: str | None = None) -> None:
        if path is None:
            path, _ = QFileDialog.getSaveFileName(self, "Export chart", "depth-ledger.png", "PNG (*.png)")
            if not path:
                return
        if not self.plot.grab().save(str(path), "PNG"):
            QMessageBox.warning(self, "Chart not saved", f"Could not write {path}")

    def export_csv(self, path: str | None = None) -> None:
        if path is None:
            path, _ = QFileDialog.getSaveFileName(self, "Export ledger", "ledger.csv", "CSV (*.csv)")
            if not path:
                return
        try:
            Path(path).write_text(ledger_csv(self.ledger), encoding="utf-8")
        except OSError as e:
            QMessageBox.warning(self, "Ledger not saved", f"Could not write {path}: {e.strerror or e}")
