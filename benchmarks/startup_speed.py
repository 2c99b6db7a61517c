"""Start-up speed of the editor: from launching a fresh Python process to the window shown (and
painted once), measured from outside the process. Target: ≤ 1.5 s. Also checks that starting the
editor never imports torch.

Run: PYTHONPATH=src python benchmarks/startup_speed.py [--runs N]
(off screen unless QT_QPA_PLATFORM says otherwise)
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

TARGET_S = 1.5
SAMPLE = Path(__file__).resolve().parents[1] / "samples" / "leaf_blight_grader.loom"

CHILD = r"""
import sys, time
start = time.perf_counter()
from PySide6.QtCore import QSettings, QTimer
from PySide6.QtWidgets import QApplication
from layerloom.gui.main_window import MainWindow

app = QApplication(sys.argv[:1])
settings = QSettings(sys.argv[2] + "/settings.ini", QSettings.Format.IniFormat)
window = MainWindow(sys.argv[3:], settings=settings, scratch_dir=sys.argv[2])

def shown():
    print(f"shown {time.perf_counter() - start:.4f} torch={'torch' in sys.modules}", flush=True)
    app.quit()

window.show()
QTimer.singleShot(0, shown)  # runs after the first paint of the shown window
app.exec()
"""


def one_start(files: list[str]) -> tuple[float, float, bool]:
    """Seconds from spawning the process to the window shown, seconds inside the process, torch imported?"""
    with tempfile.TemporaryDirectory() as scratch:
        began = time.perf_counter()
        proc = subprocess.Popen([sys.executable, "-c", CHILD, "-", scratch, *files], stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE, text=True, env=os.environ)
        line = proc.stdout.readline()
        outside = time.perf_counter() - began
        _, errors = proc.communicate(timeout=60)
    if not line.startswith("shown"):
        raise SystemExit(f"the editor did not report its window (exit code {proc.returncode}):\n{errors}")
    _, inside, torch = line.split()
    return outside, float(inside), torch == "torch=True"


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=3)
    args = parser.parse_args()
    os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
    worst = 0.0
    for label, files in (("new design", []), (f"open {SAMPLE.name}", [str(SAMPLE)])):
        runs = [one_start(files) for _ in range(args.runs)]
        outside = [r[0] for r in runs]
        inside = [r[1] for r in runs]
        assert not any(r[2] for r in runs), "torch was imported while the editor started"
        worst = max(worst, statistics.median(outside))
        print(f"{label:<32} start → window shown: median {statistics.median(outside):.3f} s, "
              f"best {min(outside):.3f} s (in-process after interpreter start: {statistics.median(inside):.3f} s); "
              f"torch imported: no")
    print(f"target ≤ {TARGET_S} s: {'met' if worst <= TARGET_S else 'MISSED'} (worst median {worst:.3f} s)")
    return 0 if worst <= TARGET_S else 1


if __name__ == "__main__":
    sys.exit(main())
