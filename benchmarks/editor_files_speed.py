"""Editor file speed with a 2,000-block design: open to first paint, and save.

Open: in a shown window, File ▸ Open of a tidied 2,000-block file (reading, checking and building
the design, the full pass, the canvas, Block settings, Depth ledger and Findings) until the window
has painted once. Save: File ▸ Save of the same design after one edit (writing and flushing the
file included). Wall time on a shared machine includes waiting for a core, so the process's CPU
time is printed too. Targets (PRODUCT.md, issue 13): open ≤ 0.5 s, save ≤ 50 ms. Also prints the
yardstick of benchmarks/core_speed.py, as figures on a shared machine are noisy.

Run: QT_QPA_PLATFORM=offscreen PYTHONPATH=src:benchmarks python benchmarks/editor_files_speed.py
"""
from __future__ import annotations

import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

from canvas_speed import residual_tower  # noqa: E402
from core_speed import machine_speed  # noqa: E402
from PySide6.QtCore import QSettings  # noqa: E402
from PySide6.QtWidgets import QApplication  # noqa: E402

from layerloom.core import edits, fileformat  # noqa: E402

BLOCKS, RUNS = 2000, 5


def main() -> None:
    print(f"this machine: an empty million-step Python loop takes {machine_speed():.0f} ms "
          "(a recent laptop: about 15 ms)")
    from layerloom.gui.main_window import MainWindow

    app = QApplication.instance() or QApplication(sys.argv[:1])
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "tower.loom"
        fileformat.save(residual_tower(BLOCKS), path)
        settings = QSettings(str(Path(folder) / "settings.ini"), QSettings.Format.IniFormat)
        window = MainWindow(settings=settings, scratch_dir=folder)
        window.show()
        app.processEvents()
        opens, open_cpu, saves, save_cpu = [], [], [], []
        for _ in range(RUNS):
            t, c = time.perf_counter(), time.process_time()
            window.files.open_path(path, ask=False)
            app.processEvents()  # the first paint of what was opened
            opens.append(time.perf_counter() - t)
            open_cpu.append(time.process_time() - c)
            conv = window.document.design.of_kind("Conv2d")[1]
            window.document.apply(edits.set_settings(window.document.design, conv.id, {"out_channels": 24}))
            t, c = time.perf_counter(), time.process_time()
            window.files.save()
            saves.append(time.perf_counter() - t)
            save_cpu.append(time.process_time() - c)
        print(f"{len(window.document.design.blocks)} blocks, file {path.stat().st_size // 1024} KiB")
        print(f"  open to first paint: median {statistics.median(opens):.3f} s, best {min(opens):.3f} s "
              f"(target ≤ 0.5 s); CPU time median {statistics.median(open_cpu):.3f} s")
        print(f"  save: median {statistics.median(saves) * 1000:.1f} ms, best {min(saves) * 1000:.1f} ms "
              f"(target ≤ 50 ms); CPU time median {statistics.median(save_cpu) * 1000:.1f} ms")
        window.document.undo_stack.setClean()
        window.close()


if __name__ == "__main__":
    main()
