"""Design ▸ Measure on this machine: time the exported design here, in a worker thread.

The dialog copies the design, and a worker thread builds the exported module (torch is imported
there, on first use, never at the editor's start) and times it (:mod:`layerloom.measure.timing`),
reporting progress; Cancel stops it after the current timed call and the editor stays responsive
throughout. The result shows each block's measured time beside its roofline estimate, the whole
network against the sum of estimates, and a target calibrated from it (:mod:`layerloom.core.calibrate`)
with how well it predicts the half of the blocks it was not fitted on, and, on request, every
block of another design measured the same way ("Check on another design…"). "Keep" stores the
measurement in the design (the Depth ledger draws it) and, if chosen, the calibrated target, as one
undoable edit; the target is also kept among the user's targets for later designs.
"""
from __future__ import annotations

import os
import threading

from PySide6.QtCore import QObject, QThread, Signal
from PySide6.QtWidgets import (QCheckBox, QComboBox, QDialog, QFileDialog, QHBoxLayout, QLabel, QProgressBar,
                               QPushButton, QSpinBox, QVBoxLayout)

from layerloom.core.calibrate import calibrate, mape, samples, split_halves
from layerloom.core.edits import Edit, SetField
from layerloom.core.fileformat import LoomFileError, copy, load
from layerloom.core.findings import ERROR
from layerloom.core.ledger import Ledger
from layerloom.core.measurement import compare
from layerloom.gui.budget_dialog import keep_target
from layerloom.gui.result_parts import accept_buttons, caution_label, narrow_form, result_table, set_row

RUNTIMES = ("torch", "onnxruntime")
COLUMNS = ("block", "kind", "measured µs", "± spread", "estimated µs", "measured ÷ est.")
MEASURE_MAX_BATCH = 4096  # samples per timed run: a larger batch rarely fits in a desktop's memory


class MeasureWorker(QObject):
    """Runs one measurement; lives in a worker thread. Signals carry the result or a one-line error."""

    progressed = Signal(int, int)
    finished = Signal(object)  # Measurement
    failed = Signal(str)
    cancelled = Signal()

    def __init__(self, design, options: dict):
        super().__init__()
        self.design, self.options = design, options
        self.stop = threading.Event()

    def run(self) -> None:
        try:
            from layerloom.measure.timing import Cancelled, measure
        except ImportError as e:  # pragma: no cover - torch is a test dependency
            self.failed.emit(f"measuring needs torch: {e}")
            return
        try:
            result = measure(self.design, progress=self.progressed.emit, cancelled=self.stop.is_set, **self.options)
        except Cancelled:
            self.cancelled.emit()
        except ImportError as e:
            self.failed.emit(f"the {self.options.get('runtime')} runtime is not installed: {e}")
        except (ValueError, RuntimeError) as e:
            self.failed.emit(str(e).splitlines()[0])
        else:
            self.finished.emit(result)


class MeasureDialog(QDialog):
    """Measure ``document``'s design on this machine."""

    def __init__(self, document, parent=None, settings=None):
        super().__init__(parent)
        self.setWindowTitle("Measure on this machine")
        self.settings = settings  # QSettings where the user's own targets are kept, or None
        self.setObjectName("measure_dialog")
        self.document = document
        self.measurement = None
        self.target = None
        self._half = None  # the target fitted on half of the blocks
        self._thread: QThread | None = None
        self._worker: MeasureWorker | None = None
        design = document.design

        self.batch = QSpinBox(minimum=1, maximum=MEASURE_MAX_BATCH, value=min(design.batch, MEASURE_MAX_BATCH))
        self.threads = QSpinBox(minimum=1, maximum=512, value=os.cpu_count() or 1)
        self.runtime = QComboBox()
        self.runtime.addItems(RUNTIMES)
        self.repeat = QSpinBox(minimum=1, maximum=1000, value=20)
        form = narrow_form({"Batch": self.batch, "Threads": self.threads, "Runtime": self.runtime,
                            "Timed runs": self.repeat}, 180)

        self.start_button = QPushButton("Measure")
        self.start_button.setDefault(True)
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setEnabled(False)
        self.progress = QProgressBar()
        self.progress.setFormat("%p %")
        beyond = (f"The design's batch {design.batch:,} is more than is measured here: batch "
                  f"{MEASURE_MAX_BATCH:,} at most. " if design.batch > MEASURE_MAX_BATCH else "")
        self.status = QLabel(beyond + "Times the exported network (random weights, fp32) after two warm-up runs, "
                             "then each block alone on its real inputs.")
        self.status.setWordWrap(True)
        run_row = QHBoxLayout()
        run_row.addWidget(self.progress, 1)
        run_row.addWidget(self.start_button)
        run_row.addWidget(self.cancel_button)

        self.table = result_table(COLUMNS)
        self.summary = QLabel()
        self.summary.setWordWrap(True)
        self.summary.setObjectName("measure_summary")
        self.use_target = QCheckBox("Use the calibrated target for this design's estimates")
        self.use_target.setEnabled(False)
        self.check_button = QPushButton("Check on another design…")
        self.check_button.setEnabled(False)
        self.check_button.setToolTip("measure another design and see how well the target fitted on half of this "
                                     "design's blocks predicts its blocks")
        self.check_button.clicked.connect(lambda: self.check_other())
        target_row = QHBoxLayout()
        target_row.addWidget(self.use_target, 1)
        target_row.addWidget(self.check_button)
        self.buttons, self.keep_button = accept_buttons(self, "Keep in design", self.keep)

        layout = QVBoxLayout(self)
        layout.addLayout(form)
        layout.addLayout(run_row)
        layout.addWidget(self.status)
        layout.addWidget(self.table, 1)
        layout.addWidget(self.summary)
        layout.addLayout(target_row)
        layout.addWidget(caution_label())
        layout.addWidget(self.buttons)
        self.resize(760, 600)

        self.start_button.clicked.connect(self.start)
        self.cancel_button.clicked.connect(self.cancel)

    # ----- running
    def start(self) -> None:
        design = self.document.design
        errors = [f for f in design.findings() if f.severity == ERROR]
        if errors:
            self.status.setText(f"The design has {len(errors)} error finding{'s' if len(errors) > 1 else ''} "
                                f"(first: {errors[0].message}); mend {'them' if len(errors) > 1 else 'it'} to measure.")
            return
        self._work = copy(design)
        self._work.set_field("batch", self.batch.value())
        self._run(self._work, self._done)

    def check_other(self, path: str | None = None) -> None:
        """Measure another design (same batch, threads, runtime, runs) and report how well the target
        fitted on half of this design's blocks predicts its blocks."""
        if path is None:
            path, _ = QFileDialog.getOpenFileName(self, "Check on another design", "", "Designs (*.loom)")
            if not path:
                return
        try:
            other = load(path)
        except LoomFileError as e:
            self.status.setText(f"Not checked: {e}")
            return
        if any(f.severity == ERROR for f in other.findings()):
            self.status.setText(f"Not checked: {other.name} has error findings; mend them first.")
            return
        other.set_field("batch", self.measurement.batch)
        self._other = other
        self._run(other, self._checked)

    def _run(self, design, on_done) -> None:
        """Measure ``design`` in a worker thread; ``on_done(measurement)`` when it is done."""
        options = {"threads": self.threads.value(), "runtime": self.runtime.currentText(), "repeat": self.repeat.value()}
        self._thread = QThread(self)
        self._worker = MeasureWorker(design, options)
        self._worker.moveToThread(self._thread)
        self._thread.started.connect(self._worker.run)
        self._worker.progressed.connect(self._progressed)
        self._worker.finished.connect(on_done)
        self._worker.failed.connect(self._failed)
        self._worker.cancelled.connect(self._cancelled)
        for signal in (self._worker.finished, self._worker.failed, self._worker.cancelled):
            signal.connect(self._thread.quit)
        self._set_running(True)
        self.status.setText("Building the module…")
        self._thread.start()

    def cancel(self) -> None:
        if self._worker is not None:
            self._worker.stop.set()
            self.status.setText("Cancelling after the current run…")

    def running(self) -> bool:
        return self._thread is not None and self._thread.isRunning()

    def _set_running(self, on: bool) -> None:
        self.start_button.setEnabled(not on)
        self.check_button.setEnabled(not on and self._half is not None)
        self.cancel_button.setEnabled(on)
        for w in (self.batch, self.threads, self.runtime, self.repeat):
            w.setEnabled(not on)
        if on:
            self.progress.setValue(0)

    def _progressed(self, done: int, total: int) -> None:
        self.progress.setMaximum(total)
        self.progress.setValue(done)
        self.status.setText(f"Timing: {done} of {total} runs")

    def _failed(self, message: str) -> None:
        self._set_running(False)
        self.status.setText(f"Not measured: {message}")

    def _cancelled(self) -> None:
        self._set_running(False)
        self.progress.setValue(0)
        self.status.setText("Cancelled; nothing was kept.")

    def _done(self, measurement) -> None:
        self._set_running(False)
        self.measurement = measurement
        ledger = Ledger(self._work.analysis())
        m = measurement
        threads = m.machine.threads
        name = f"this machine, {threads} thread{'s' if threads > 1 else ''}"
        data = samples(ledger, m)
        lines = [f"Whole network: {m.total * 1e3:.3g} ms ± {m.spread * 1e3:.2g} ms measured (median of {m.repeat}); "
                 f"blocks alone add up to {sum(t for t, _ in m.blocks.values()) * 1e3:.3g} ms"
                 + (f"; estimates add up to {ledger.totals.latency * 1e3:.3g} ms on {ledger.target.name}."
                    if ledger.target is not None else ".")]
        try:
            self.target = calibrate(data, name, f"calibrated {m.date} on {m.machine.describe()}, torch "
                                    f"{m.machine.torch_version}: least squares over {len(data)} blocks of "
                                    f"'{self._work.name}' at batch {m.batch}")
            fit_half, held = split_halves(data)
            self._half = calibrate(fit_half, name) if len(fit_half) > 1 else None
            lines.append(f"Calibrated target “{name}”: {self.target.macs_per_second / 1e9:.3g} GMAC/s, "
                         f"{self.target.bytes_per_second / 1e9:.3g} GB/s, {self.target.overhead * 1e6:.3g} µs per layer.")
            if held and self._half is not None:
                lines.append(f"Fitted on half of the blocks, it predicts the other half with a median error of "
                             f"{mape(self._half, held):.0f} %.")
        except ValueError as e:
            self.target = self._half = None
            lines.append(f"No target calibrated: {e}.")
        self.summary.setText("\n".join(lines))
        self.use_target.setEnabled(self.target is not None)
        self.use_target.setChecked(self.target is not None and self.document.design.target is None)
        if ledger.target is None and self.target is not None:  # estimate on the calibrated target, as the command does
            ledger = Ledger(self._work.analysis(), self.target)
        self._fill(compare(ledger, m))
        self.status.setText(f"Measured on {m.machine.describe()}, torch {m.machine.torch_version}, {m.date}.")
        self.keep_button.setEnabled(True)
        self.check_button.setEnabled(self._half is not None)

    def _checked(self, measurement) -> None:
        self._set_running(False)
        data = samples(Ledger(self._other.analysis()), measurement)
        if not data:
            self.status.setText(f"Not checked: {self._other.name} has no timed plain blocks.")
            return
        self.check_error = mape(self._half, data)
        self.summary.setText(self.summary.text() + f"\nOn “{self._other.name}” ({len(data)} blocks, none fitted "
                             f"on), it predicts with a median error of {self.check_error:.0f} %.")
        self.status.setText(f"Checked on {self._other.name}.")

    def _fill(self, rows) -> None:
        def us(s):
            return "·" if s is None else f"{s * 1e6:.1f}"

        self.table.setRowCount(len(rows))
        for r, row in enumerate(rows):
            set_row(self.table, r, (row.name, row.kind, us(row.measured), us(row.spread), us(row.estimated),
                                    f"{row.ratio:.2f}" if row.ratio else "·"), range(2, 6))

    # ----- result
    def keep(self) -> None:
        """Store the measurement (and the calibrated target, if chosen) as one undoable edit."""
        if self.measurement is None:
            return
        ops = [SetField("measurement", self.measurement)]
        if self.use_target.isChecked() and self.target is not None:
            ops.append(SetField("target", self.target))
            if self.settings is not None:
                keep_target(self.settings, self.target)
        self.document.apply(Edit("Keep measurement", tuple(ops)))
        self.accept()

    def done(self, result: int) -> None:  # noqa: D401 (Qt override) - closing stops a running measurement
        if self.running():
            self._worker.stop.set()
            self._thread.quit()
            self._thread.wait()
        super().done(result)
