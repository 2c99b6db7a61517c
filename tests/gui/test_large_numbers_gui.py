"""The editor shows designs at the edges of the documented ranges without an error: exact totals
beyond 64 bits (see tests/test_large_numbers.py), every chart of the Depth ledger, a pinned
baseline saved and read back."""
from __future__ import annotations

from test_large_numbers import nested_design, wide_conv_design
from test_window_files import open_window

from layerloom.core import fileformat, units


def test_the_editor_shows_charts_and_pins_designs_with_counts_beyond_64_bits(qtbot, tmp_path):
    for i, design in enumerate((wide_conv_design(), nested_design(60, 1000))):
        path = tmp_path / f"large_{i}.loom"
        fileformat.save(design, path)
        window, prompts = open_window(qtbot, tmp_path, [path])
        assert prompts.asked == []
        macs = design.ledger().totals.macs
        assert macs > 2 ** 63
        assert f"MACs {units.count(macs)}" in window.totals_label.text() and "e+" in units.count(macs)
        chart = window.depth_ledger
        for view in range(chart.view_box.count()):
            chart.view_box.setCurrentIndex(view)
            for metric in range(chart.metric_box.count()):  # every curve and bar chart a user can pick
                chart.metric_box.setCurrentIndex(metric)
                window.grab()
        chart.pin_baseline()
        assert window.files.save()
        again = fileformat.load(path)
        assert again.baseline["totals"]["macs"] == macs  # exact in the file too
        window.close()
