"""Widgets the Measure and Fit to budget dialogs share: a form of narrow fields, a read-only result
table, the first-order caution and the button row with one accepting action and Close."""
from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (QDialogButtonBox, QFormLayout, QHeaderView, QLabel, QPushButton, QTableWidget,
                               QTableWidgetItem)

from layerloom.core.targets import CAUTION

RIGHT = Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter


def result_table(columns) -> QTableWidget:
    """A read-only table with ``columns``; the first stretches, the others fit their contents."""
    table = QTableWidget(0, len(columns))
    table.setHorizontalHeaderLabels(columns)
    table.verticalHeader().hide()
    table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
    header = table.horizontalHeader()
    header.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
    header.setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
    return table


def set_row(table: QTableWidget, row: int, cells, right) -> None:
    """Put ``cells`` (text) into ``row``; columns in ``right`` are right-aligned (numbers)."""
    for col, text in enumerate(cells):
        item = QTableWidgetItem(text)
        if col in right:
            item.setTextAlignment(RIGHT)
        table.setItem(row, col, item)


def caution_label() -> QLabel:
    label = QLabel(CAUTION)
    label.setWordWrap(True)
    label.setObjectName("caution")
    return label


def accept_buttons(dialog, text: str, slot) -> tuple[QDialogButtonBox, QPushButton]:
    """Buttons ``text`` (disabled until there is something to accept; calls ``slot``) and Close."""
    buttons = QDialogButtonBox()
    accept = buttons.addButton(text, QDialogButtonBox.ButtonRole.AcceptRole)
    accept.setEnabled(False)
    buttons.addButton(QDialogButtonBox.StandardButton.Close)
    buttons.accepted.connect(slot)
    buttons.rejected.connect(dialog.reject)
    return buttons, accept


def narrow_form(rows: dict, width: int = 200) -> QFormLayout:
    """A form of ``label → field``, each field at most ``width`` pixels wide."""
    form = QFormLayout()
    for label, field in rows.items():
        field.setMaximumWidth(width)
        form.addRow(label, field)
    return form
