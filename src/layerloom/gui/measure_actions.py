"""The Design menu's Measure on this machine and Fit to budget: open their dialogs (imported on
first use, after the application exists: the fit dialog draws with pyqtgraph)."""
from __future__ import annotations

from PySide6.QtCore import Qt


def open_measure(window):
    """Show the measure dialog beside the editor (not modal: editing goes on while it measures)."""
    from layerloom.gui.measure_dialog import MeasureDialog

    dialog = MeasureDialog(window.document, window, window.settings)
    dialog.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
    dialog.show()
    return dialog


def open_fit(window):
    """Open the fit dialog over the editor (window-modal; returns at once)."""
    from layerloom.gui.fit_dialog import FitDialog

    dialog = FitDialog(window.document, window)
    dialog.setAttribute(Qt.WidgetAttribute.WA_DeleteOnClose)
    dialog.open()
    return dialog
