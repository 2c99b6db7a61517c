"""Design ▸ Measure on this machine, Design ▸ Fit to budget and the Depth ledger's measured latency
and training-memory curves, driven through the real widgets."""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
from PySide6.QtWidgets import QApplication

from layerloom.core import units
from layerloom.core.fileformat import dumps, load, save
from layerloom.core.fit import fit
from layerloom.core.ledger import Ledger
from layerloom.core.training_memory import training_curve, training_memory
from layerloom.gui.budget_dialog import user_targets

import small_designs
from test_window_files import open_window

ROOT = Path(__file__).resolve().parents[2]
SHOTS = ROOT / "tests" / "screenshots"
SMALL = str(ROOT / "samples" / "fastener_sorter.loom")


def _action(window, name):
    return next(a for a in window.findChildren(type(window.menuBar().actions()[0])) if a.objectName() == name)


def _measure_dialog(qtbot, window):
    _action(window, "measure").trigger()
    dialog = next(w for w in QApplication.topLevelWidgets() if w.objectName() == "measure_dialog" and w.isVisible())
    dialog.repeat.setValue(2)
    dialog.threads.setValue(1)
    return dialog


def test_measure_runs_in_a_worker_can_be_cancelled_and_is_kept_as_one_edit(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path, [SMALL])
    doc = window.document
    dialog = _measure_dialog(qtbot, window)
    dialog.repeat.setValue(200)
    dialog.start_button.click()
    qtbot.waitUntil(lambda: dialog.progress.value() > 0, timeout=60_000)
    assert dialog.running()
    ticks = dialog.progress.value()
    window.canvas.zoom_in()  # the editor answers while the worker measures
    qtbot.wait(50)
    dialog.cancel_button.click()
    qtbot.waitUntil(lambda: not dialog.running(), timeout=30_000)
    assert "Cancelled" in dialog.status.text() and dialog.measurement is None and ticks < dialog.progress.maximum()

    dialog.repeat.setValue(2)
    dialog.start_button.click()
    qtbot.waitUntil(lambda: dialog.measurement is not None, timeout=120_000)
    ledger = Ledger(doc.design.analysis())
    assert dialog.table.rowCount() == int(ledger.working.sum())
    assert "Calibrated target" in dialog.summary.text() and "median error" in dialog.summary.text()
    dialog.check_other(str(tmp_path / "nowhere.loom"))
    assert "Not checked" in dialog.status.text() and "nowhere.loom" in dialog.status.text()
    other = tmp_path / "other.loom"
    save(small_designs.branches_concat(), other)
    dialog.check_other(str(other))
    qtbot.waitUntil(lambda: hasattr(dialog, "check_error"), timeout=120_000)
    assert dialog.check_error >= 0 and "branches-concat" in dialog.summary.text()
    window.resize(1280, 800)
    dialog.resize(900, 640)
    qtbot.wait(20)
    dialog.grab().save(str(SHOTS / "measure_dialog.png"))
    dialog.use_target.setChecked(True)
    before = doc.undo_stack.count()
    dialog.keep_button.click()
    assert doc.design.measurement is dialog.measurement and doc.design.target.name == "this machine, 1 thread"
    assert doc.undo_stack.count() == before + 1
    assert [t.name for t in user_targets(window.settings)] == ["this machine, 1 thread"]  # offered to later designs
    doc.undo_stack.undo()
    assert doc.design.measurement is None and doc.design.target is None
    doc.undo_stack.redo()

    chart = window.depth_ledger
    chart.metric_box.setCurrentIndex(3)  # estimated latency
    qtbot.wait(5)
    measured = doc.design.measurement.along(chart.ledger.order)
    assert np.allclose(chart.measured_curve.yData, np.cumsum(measured))
    assert "measured" in chart.key.text()
    window.grab().save(str(SHOTS / "depth_ledger_measured_1280.png"))
    saved = tmp_path / "kept.loom"
    save(doc.design, saved)
    assert '"measurement"' in saved.read_text(encoding="utf-8")
    window.close()


def test_a_design_batch_beyond_what_is_measured_is_said_not_silently_cut(qtbot, tmp_path):
    design = load(SMALL)
    design.batch = 65_536
    save(design, tmp_path / "big_batch.loom")
    window, _ = open_window(qtbot, tmp_path, [str(tmp_path / "big_batch.loom")])
    dialog = _measure_dialog(qtbot, window)
    assert dialog.batch.value() == 4096
    assert "batch 65,536" in dialog.status.text() and "4,096 at most" in dialog.status.text()


def test_fit_dialog_lists_candidates_plots_the_front_and_applies_one_undo_step(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path, [SMALL])
    doc = window.document
    doc.design.set_field("budget", {"macs": 10_000_000, "memory": 1 << 20})
    original = dumps(doc.design)
    _action(window, "fit_to_budget").trigger()
    dialog = next(w for w in QApplication.topLevelWidgets() if w.objectName() == "fit_dialog" and w.isVisible())
    expected = fit(doc.design, doc.design.budget)
    assert dialog.table.rowCount() == len(expected.candidates)
    assert len(dialog.points.data) + len(dialog.front_points.data) == len(expected.candidates)
    assert len(dialog.front_points.data) >= 1 and len(dialog.chosen.data) == 1
    assert dialog.candidate().describe() == expected.best.describe()  # the largest is selected
    dialog.table.selectRow(len(expected.candidates) - 1)
    chosen = dialog.candidate()
    assert tuple(dialog.selected.data[0])[:2] == (chosen.macs, chosen.weights)
    window.resize(1280, 800)
    qtbot.wait(20)
    dialog.grab().save(str(SHOTS / "fit_dialog.png"))
    count = doc.undo_stack.count()
    dialog.apply_button.click()
    assert doc.undo_stack.count() == count + 1
    totals = Ledger(doc.design.analysis()).totals
    assert (totals.macs, totals.weights) == (chosen.macs, chosen.weights)
    assert not doc.design.findings()
    doc.undo_stack.undo()
    assert dumps(doc.design) == original
    window.close()


def test_training_memory_metric_follows_the_optimizer(qtbot, tmp_path):
    window, _ = open_window(qtbot, tmp_path, [SMALL])
    chart = window.depth_ledger
    chart.metric_box.setCurrentIndex(4)
    assert chart.optimizer_box.isVisible() and chart.caution.isVisible()
    ledger = chart.ledger
    for i in range(chart.optimizer_box.count()):
        chart.optimizer_box.setCurrentIndex(i)
        expected = training_curve(ledger, chart.optimizer_box.currentData())
        assert np.array_equal(chart.curve.yData, expected.astype(float))
    chart.mixed_box.setChecked(True)
    assert np.array_equal(chart.curve.yData, training_curve(ledger, chart.optimizer_box.currentData(), True))
    assert "mixed precision" in chart.key.toolTip() and "activations kept for backward" in chart.key.toolTip()
    assert chart.key.text().endswith(f"kept activations {units.size(training_memory(ledger, 'sgd', True).activations)}")
    window.resize(1280, 800)
    qtbot.wait(20)
    window.grab().save(str(SHOTS / "depth_ledger_training_1280.png"))
    chart.metric_box.setCurrentIndex(0)
    assert not chart.optimizer_box.isVisible()
    window.close()


def test_editor_start_and_the_menus_import_no_torch():
    code = ("import sys; from PySide6.QtWidgets import QApplication; app = QApplication([]); "
            "from layerloom.gui.main_window import MainWindow; w = MainWindow(); w.show(); app.processEvents(); "
            "from layerloom.gui import measure_dialog, fit_dialog; "
            "assert 'torch' not in sys.modules, 'torch imported'")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120,
                          env={"PYTHONPATH": str(ROOT / "src"), "QT_QPA_PLATFORM": "offscreen", "PATH": "/usr/bin:/bin",
                               "HOME": "/tmp"})
    assert done.returncode == 0, done.stderr[-2000:]
