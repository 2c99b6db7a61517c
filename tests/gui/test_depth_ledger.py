"""The Depth ledger chart: its data equal the core ledger, selection is linked both ways, budgets
and a pinned baseline are drawn, and the budget dialog edits the design in one undo step."""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import QPointF, QSettings, Qt

from layerloom import load
from layerloom.core.baseline import snapshot
from layerloom.core.edits import set_settings
from layerloom.core.fileformat import dumps
from layerloom.core.ledger import Ledger
from layerloom.core.ledger_csv import ledger_csv
from layerloom.gui.budget_dialog import BudgetDialog
from layerloom.gui.depth_ledger import DepthLedger
from layerloom.gui.document import Document
from flatten import expanded_copy

ROOT = Path(__file__).resolve().parents[2]
SHOTS = ROOT / "tests" / "screenshots"


def chart_for(qtbot, sample: str) -> tuple[DepthLedger, Document]:
    doc = Document(load(ROOT / "samples" / sample))
    chart = DepthLedger(doc)
    chart.resize(460, 560)
    qtbot.addWidget(chart)
    chart.show()
    qtbot.waitExposed(chart)
    return chart, doc


def settle(qtbot):
    qtbot.wait(5)  # the chart refreshes once per event-loop pass


@pytest.mark.parametrize("sample", sorted(p.name for p in (ROOT / "samples").glob("*.loom")))
def test_curves_equal_the_core_ledger(qtbot, sample):
    chart, doc = chart_for(qtbot, sample)
    ledger = Ledger(doc.design.analysis())
    checks = {0: ledger.cumulative_weights, 1: ledger.cumulative_macs, 2: ledger.live}
    for index, expected in checks.items():
        chart.metric_box.setCurrentIndex(index)
        x, y = chart.curve.xData, chart.curve.yData
        assert np.array_equal(y, np.array(expected, dtype=float))
        assert np.array_equal(x, ledger.steps)  # blocks as executed: a motif use spans its inner blocks
    # the dotted curve is the running peak, whose last value is the ledger's peak
    assert chart.peak_curve.yData[-1] == ledger.totals.peak_memory
    chart.view_box.setCurrentIndex(1)  # per-block bars
    chart.metric_box.setCurrentIndex(1)
    assert np.array_equal(chart.bars.opts["height"], ledger.costs[:, 2].astype(float))


def test_grouped_and_expanded_network_draw_the_same_curve_and_baseline(qtbot):
    """The x axis counts blocks as executed, so the bottleneck-grouped sample and its expanded form
    end at the same step with the same totals, and a baseline pinned on one lies on the other."""
    chart, doc = chart_for(qtbot, "leaf_blight_grader.loom")
    assert doc.design.motifs and doc.design.of_kind("Motif")
    flat = expanded_copy(doc.design)
    flat_ledger = Ledger(flat.analysis())
    chart.metric_box.setCurrentIndex(1)  # MACs along depth
    grouped_x, grouped_y = chart.curve.xData, chart.curve.yData
    assert grouped_x[-1] == len(flat.blocks) == len(flat_ledger.order)
    flat_at = dict(zip(flat_ledger.steps.astype(float), flat_ledger.cumulative_macs.astype(float)))
    assert grouped_y[-1] == flat_at[grouped_x[-1]]
    doc.design.set_field("baseline", snapshot(flat_ledger, "drawn flat"))
    settle(qtbot)
    assert chart.base_curve.xData[-1] == grouped_x[-1] and chart.base_curve.yData[-1] == grouped_y[-1]


def click_step(qtbot, chart: DepthLedger, step: int) -> None:
    settle(qtbot)  # let the plot lay itself out before mapping positions
    vb = chart.plot.getPlotItem().vb
    (_, _), (y0, y1) = vb.viewRange()
    pos = chart.plot.mapFromScene(vb.mapViewToScene(QPointF(step, (y0 + y1) / 2)))
    qtbot.mousePress(chart.plot.viewport(), Qt.MouseButton.LeftButton, pos=pos)
    qtbot.mouseRelease(chart.plot.viewport(), Qt.MouseButton.LeftButton, pos=pos, delay=10)


def test_selection_is_linked_both_ways(qtbot):
    chart, doc = chart_for(qtbot, "fastener_sorter.loom")
    heard = []
    chart.block_activated.connect(heard.append)
    order = chart.ledger.order
    click_step(qtbot, chart, 7)
    assert doc.selection == [order[6]] and heard == [order[6]]
    doc.select([order[12]])
    assert chart.marker.isVisible() and chart.marker.value() == 13
    doc.select([])
    assert not chart.marker.isVisible()


def test_edit_refreshes_through_set_data_and_baseline_overlays(qtbot):
    chart, doc = chart_for(qtbot, "fastener_sorter.loom")
    curve = chart.curve
    chart.metric_box.setCurrentIndex(1)
    before = chart.curve.yData[-1]
    chart.pin_baseline()
    squeeze = doc.design.block("squeeze_3").id
    doc.apply(set_settings(doc.design, squeeze, {"out_channels": 16}))
    settle(qtbot)
    assert chart.curve is curve  # the same curve object, refreshed
    after = chart.curve.yData[-1]
    assert after < before
    assert chart.base_curve.yData[-1] == before
    assert chart.table.item(1, 0).text() == "MACs" and "%" in chart.table.item(1, 3).text()
    assert "dashed: baseline" in chart.key.text()
    SHOTS.mkdir(exist_ok=True)
    chart.grab().save(str(SHOTS / "depth_ledger_baseline.png"))
    doc.undo_stack.undo()
    doc.undo_stack.undo()
    settle(qtbot)
    assert doc.design.baseline is None and chart.base_curve.yData is None


def test_budget_line_and_crossing_marker(qtbot):
    chart, doc = chart_for(qtbot, "fastener_sorter.loom")
    chart.metric_box.setCurrentIndex(1)
    doc.design.set_field("budget", {"macs": 20_000_000})
    settle(qtbot)
    assert chart.budget_line.isVisible() and chart.budget_line.value() == 20_000_000
    (finding,) = doc.design.analysis().budget_findings()
    (spot,) = chart.crossing.data
    assert spot["data"] == finding.block
    assert spot["y"] > 20_000_000 >= chart.curve.yData[chart.ledger.order.index(finding.block) - 1]


def test_exports(qtbot, tmp_path):
    chart, doc = chart_for(qtbot, "leaf_blight_grader.loom")
    chart.export_csv(str(tmp_path / "ledger.csv"))
    assert (tmp_path / "ledger.csv").read_text() == ledger_csv(Ledger(doc.design.analysis()))
    chart.export_png(str(tmp_path / "chart.png"))
    assert (tmp_path / "chart.png").stat().st_size > 1000


def test_budget_dialog_sets_budget_and_target_in_one_step(qtbot, tmp_path):
    doc = Document(load(ROOT / "samples" / "fastener_sorter.loom"))
    before = dumps(doc.design)
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)
    dialog = BudgetDialog(doc, settings)
    qtbot.addWidget(dialog)
    dialog.macs.setValue(20)
    dialog.memory.setValue(0.5)
    dialog.choice.setCurrentText("small ARM board, 4 cores")
    dialog.accept()
    assert doc.design.budget == {"macs": 20_000_000, "memory": 524_288}
    assert doc.design.target.name == "small ARM board, 4 cores"
    assert {f.code for f in doc.design.analysis().budget_findings()} == {"budget.macs", "budget.memory"}
    doc.undo_stack.undo()
    assert dumps(doc.design) == before


def test_custom_target_is_checked_and_kept(qtbot, tmp_path):
    doc = Document(load(ROOT / "samples" / "fastener_sorter.loom"))
    settings = QSettings(str(tmp_path / "settings.ini"), QSettings.Format.IniFormat)
    dialog = BudgetDialog(doc, settings)
    qtbot.addWidget(dialog)
    dialog.choice.setCurrentText("custom…")
    dialog.name.setText("bench board")
    dialog.rate.setValue(10)
    dialog.accept()  # no bandwidth: refused with a message, nothing changes
    assert "positive" in dialog.problem.text() and doc.design.target is None
    dialog.bandwidth.setValue(2)
    dialog.keep.click()
    assert "Kept" in dialog.problem.text()
    again = BudgetDialog(doc, settings)
    qtbot.addWidget(again)
    assert "bench board" in [again.choice.itemText(i) for i in range(again.choice.count())]
