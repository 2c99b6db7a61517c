"""Depth ledger refresh speed (prints figures; the target from the issue is ≤ 30 ms at 2,000 blocks).

Builds a 2,000-block design, shows the chart offscreen, then times one settings edit followed by
one event-loop pass, in which the chart refreshes (a fresh ledger, setData on the existing
curves) and repaints, for each metric.

Run: QT_QPA_PLATFORM=offscreen PYTHONPATH=src:benchmarks python benchmarks/ledger_chart_speed.py
"""
from __future__ import annotations

import os
import statistics
import time

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from PySide6.QtWidgets import QApplication  # noqa: E402
from synthetic import residual_stack  # noqa: E402

from layerloom.core.edits import set_settings  # noqa: E402


def main() -> None:
    app = QApplication.instance() or QApplication([])
    from layerloom.gui.depth_ledger import DepthLedger
    from layerloom.gui.document import Document

    design = residual_stack(2000)
    doc = Document(design)
    chart = DepthLedger(doc)
    chart.resize(420, 520)
    chart.show()
    app.processEvents()
    conv = [b.id for b in design.of_kind("Conv2d")][len(design.of_kind("Conv2d")) // 2]
    print(f"design: {len(design.blocks)} blocks")
    for index in range(chart.metric_box.count()):
        chart.metric_box.setCurrentIndex(index)
        times = []
        for i in range(15):
            t = time.perf_counter()
            doc.apply(set_settings(design, conv, {"out_channels": 16 if i % 2 else 24}))
            app.processEvents()  # the chart refreshes once per event-loop pass, and repaints
            times.append((time.perf_counter() - t) * 1000)
        print(f"  {chart.metric_box.currentText():<20} edit + chart refresh: median {statistics.median(times):6.1f} ms, "
              f"worst {max(times):6.1f} ms (target ≤ 30 ms)")


if __name__ == "__main__":
    main()
