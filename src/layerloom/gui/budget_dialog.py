"""The "Budget and target" dialog: cost limits of the design and the hardware profile for latency.

Limits left empty are not set. Targets are the shipped presets, the user's own (kept in QSettings
under ``targets/…``) or a custom one typed here; a custom target can be kept for later designs.
Accepting applies one undoable edit that sets both fields.
"""
from __future__ import annotations

import json

from PySide6.QtCore import QSettings
from PySide6.QtWidgets import (QComboBox, QDialog, QDialogButtonBox, QDoubleSpinBox, QFormLayout, QGroupBox,
                               QLabel, QLineEdit, QPushButton, QVBoxLayout)

from layerloom.core.budget import check_budget
from layerloom.core.edits import Edit, SetField
from layerloom.core.targets import CAUTION, PRESETS, Target

NO_TARGET = "no target"
CUSTOM = "custom…"
MIB = 1 << 20


def user_targets(settings: QSettings) -> list[Target]:
    """Targets the user kept; entries that cannot be read are skipped."""
    kept = []
    for raw in settings.value("targets/kept", [], type=list) or []:
        try:
            kept.append(Target.from_data(json.loads(raw)))
        except (ValueError, TypeError):
            continue
    return kept


def keep_target(settings: QSettings, target: Target) -> None:
    others = [t for t in user_targets(settings) if t.name != target.name]
    settings.setValue("targets/kept", [json.dumps(t.to_data()) for t in others + [target]])


def _limit_field(suffix: str, decimals: int = 0, maximum: float = 1e15) -> QDoubleSpinBox:
    box = QDoubleSpinBox()
    box.setRange(0, maximum)
    box.setDecimals(decimals)
    box.setSuffix(suffix)
    box.setSpecialValueText("no limit")
    box.setGroupSeparatorShown(True)
    return box


class BudgetDialog(QDialog):
    """Edit the budget and target of ``document``'s design."""

    def __init__(self, document, settings: QSettings, parent=None):
        super().__init__(parent)
        self.setWindowTitle("Budget and target")
        self.document, self.settings = document, settings
        design = document.design

        limits = QGroupBox("Budget (empty = no limit)")
        form = QFormLayout(limits)
        self.weights = _limit_field(" weights")
        self.macs = _limit_field(" M MACs", 1)
        self.memory = _limit_field(" MiB live activations", 2)
        self.latency = _limit_field(" ms", 3, 1e6)
        form.addRow("Weights", self.weights)
        form.addRow("MACs", self.macs)
        form.addRow("Peak memory", self.memory)
        form.addRow("Latency", self.latency)
        b = design.budget
        self.weights.setValue(b.get("weights", 0))
        self.macs.setValue(b.get("macs", 0) / 1e6)
        self.memory.setValue(b.get("memory", 0) / MIB)
        self.latency.setValue(b.get("latency_ms", 0))

        hardware = QGroupBox("Target for latency estimates")
        tform = QFormLayout(hardware)
        self.targets = {t.name: t for t in (*PRESETS, *user_targets(settings))}
        self.choice = QComboBox()
        self.choice.addItems([NO_TARGET, *self.targets, CUSTOM])
        self.name = QLineEdit()
        self.rate = _limit_field(" GMAC/s", 1, 1e6)
        self.bandwidth = _limit_field(" GB/s", 1, 1e5)
        self.overhead = _limit_field(" µs per layer", 1, 1e6)
        self.overhead.setSpecialValueText("")
        self.assumptions = QLineEdit()
        self.keep = QPushButton("Keep this target for other designs")
        tform.addRow("Profile", self.choice)
        tform.addRow("Name", self.name)
        tform.addRow("Peak rate", self.rate)
        tform.addRow("Bandwidth", self.bandwidth)
        tform.addRow("Overhead", self.overhead)
        tform.addRow("Assumptions", self.assumptions)
        tform.addRow("", self.keep)
        caution = QLabel(CAUTION)
        caution.setWordWrap(True)
        self.problem = QLabel()
        self.problem.setObjectName("problem")
        self.problem.setWordWrap(True)

        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        layout = QVBoxLayout(self)
        for w in (limits, hardware, caution, self.problem, buttons):
            layout.addWidget(w)

        self.choice.currentTextChanged.connect(self._chosen)
        self.keep.clicked.connect(self._keep)
        current = design.target
        if current is None:
            self.choice.setCurrentText(NO_TARGET)
        elif self.targets.get(current.name) == current:
            self.choice.setCurrentText(current.name)
        else:
            self.choice.setCurrentText(CUSTOM)
            self._show(current)
        self._chosen(self.choice.currentText())

    def _show(self, t: Target) -> None:
        self.name.setText(t.name)
        self.rate.setValue(t.macs_per_second / 1e9)
        self.bandwidth.setValue(t.bytes_per_second / 1e9)
        self.overhead.setValue(t.overhead * 1e6)
        self.assumptions.setText(t.assumptions)

    def _chosen(self, text: str) -> None:
        custom = text == CUSTOM
        for w in (self.name, self.rate, self.bandwidth, self.overhead, self.assumptions, self.keep):
            w.setEnabled(custom)
        if text in self.targets:
            self._show(self.targets[text])
        elif text == NO_TARGET:
            for w in (self.name, self.assumptions):
                w.clear()
            for w in (self.rate, self.bandwidth, self.overhead):
                w.setValue(0)

    def target(self) -> Target | None:
        """The target as the dialog shows it; ValueError saying which field is missing."""
        text = self.choice.currentText()
        if text == NO_TARGET:
            return None
        if text in self.targets:
            return self.targets[text]
        if not self.name.text().strip():
            raise ValueError("a custom target needs a name")
        return Target.from_data({"name": self.name.text().strip(), "gmacs_per_second": self.rate.value(),
                                 "gbytes_per_second": self.bandwidth.value(), "overhead_us": self.overhead.value(),
                                 "assumptions": self.assumptions.text()})

    def budget(self) -> dict:
        raw = {"weights": round(self.weights.value()), "macs": round(self.macs.value() * 1e6),
               "memory": round(self.memory.value() * MIB), "latency_ms": self.latency.value()}
        return check_budget({k: v for k, v in raw.items() if v})

    def _keep(self) -> None:
        try:
            t = self.target()
        except ValueError as e:
            self.problem.setText(str(e))
            return
        if t is not None:
            keep_target(self.settings, t)
            self.problem.setText(f"Kept “{t.name}” for other designs.")

    def accept(self) -> None:
        try:
            edit = Edit("Budget and target", (SetField("budget", self.budget()), SetField("target", self.target())))
        except ValueError as e:
            self.problem.setText(str(e))
            return
        self.document.apply(edit)
        super().accept()
