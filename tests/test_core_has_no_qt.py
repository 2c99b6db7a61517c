"""Import contract: ``layerloom``, ``layerloom.core`` and ``layerloom.export`` pull in neither Qt
(PySide6, shiboken6) nor torch at import time. Checked in a fresh interpreter, since this test
process has long imported both."""
from __future__ import annotations

import importlib
import os
import pkgutil
import subprocess
import sys

FORBIDDEN = ("PySide6", "shiboken6", "torch")


def _modules(package: str) -> list[str]:
    pkg = importlib.import_module(package)
    return [package] + [m.name for m in pkgutil.walk_packages(pkg.__path__, package + ".")]


def test_core_and_export_import_no_qt_and_no_torch():
    modules = _modules("layerloom.core") + _modules("layerloom.export")
    assert "layerloom.core.inference" in modules and "layerloom.core.kinds.conv" in modules  # discovery works
    code = (f"import layerloom, {', '.join(modules)}; import sys; "
            f"bad = sorted(m for m in sys.modules if m.split('.')[0] in {FORBIDDEN!r}); "
            "assert not bad, bad")
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(p for p in sys.path if p)}
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]
