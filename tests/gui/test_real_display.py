"""The editor starts on a real X server (Xvfb) as well as off screen, so a system library that Qt's
X11 plugin needs and the machine lacks fails the build instead of a user's first start.

Outside CI the X-server test is skipped when Xvfb is not installed; in CI (``CI=true``, which
``.ci/run`` sets and which installs Xvfb) it must run.
"""
from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
IN_CI = os.environ.get("CI", "").lower() == "true"

START = """
import sys
from PySide6.QtCore import QSettings, QTimer
from PySide6.QtWidgets import QApplication
from layerloom.gui.main_window import MainWindow

app = QApplication(sys.argv[:1])
settings = QSettings(sys.argv[2] + "/settings.ini", QSettings.Format.IniFormat)
window = MainWindow([sys.argv[1]], settings=settings, scratch_dir=sys.argv[2])
window.resize(1280, 800)
window.show()
seen = []


def look():
    image = window.grab().toImage()
    seen.extend([app.platformName(), window.isVisible(), image.width(), image.height(),
                 len(window.document.design.blocks)])
    window.document.undo_stack.setClean()
    app.quit()


QTimer.singleShot(400, look)
app.exec()
print(*seen)
"""


def _xcb_plugin() -> Path:
    import PySide6

    return Path(PySide6.__file__).parent / "Qt" / "plugins" / "platforms" / "libqxcb.so"


@pytest.fixture
def x_server():
    """A fresh Xvfb on a display number it picks itself; yields the DISPLAY value."""
    if shutil.which("Xvfb") is None:
        if IN_CI:
            pytest.fail("Xvfb is not installed, but CI must start the editor under a real X server (.ci/run "
                        "installs it with apt-get)")
        pytest.skip("Xvfb is not installed (apt-get install xvfb); CI runs this test")
    read, write = os.pipe()
    server = subprocess.Popen(["Xvfb", "-displayfd", str(write), "-screen", "0", "1280x800x24", "-nolisten", "tcp"],
                              pass_fds=(write,), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    os.close(write)
    try:
        with os.fdopen(read) as f:
            number = f.readline().strip()  # written once the server accepts clients
        assert number.isdigit(), "Xvfb did not report a display number"
        yield f":{number}"
    finally:
        server.terminate()
        server.wait(timeout=10)


def _start_editor(tmp_path, env) -> list[str]:
    design = tmp_path / "fastener_sorter.loom"
    shutil.copyfile(ROOT / "samples" / "fastener_sorter.loom", design)
    env = {**env, "PYTHONPATH": str(ROOT / "src"), "PATH": os.environ.get("PATH", "/usr/bin:/bin"),
           "HOME": str(tmp_path)}
    r = subprocess.run([sys.executable, "-c", START, str(design), str(tmp_path)], capture_output=True, text=True,
                       env=env, timeout=120)
    assert r.returncode == 0, r.stderr[-2000:]
    return r.stdout.split()


def test_the_editor_starts_under_a_real_x_server(x_server, tmp_path):
    platform, visible, width, height, blocks = _start_editor(tmp_path, {"DISPLAY": x_server,
                                                                        "QT_QPA_PLATFORM": "xcb"})
    assert platform == "xcb" and visible == "True"
    assert (int(width), int(height)) == (1280, 800) and int(blocks) > 10


def test_the_editor_starts_off_screen(tmp_path):
    platform, visible, width, height, blocks = _start_editor(tmp_path, {"QT_QPA_PLATFORM": "offscreen"})
    assert platform == "offscreen" and visible == "True" and int(blocks) > 10


@pytest.mark.skipif(not sys.platform.startswith("linux") or shutil.which("ldd") is None, reason="Linux with ldd")
def test_every_library_of_the_x11_plugin_is_present():
    r = subprocess.run(["ldd", str(_xcb_plugin())], capture_output=True, text=True)
    missing = re.findall(r"^\s*(\S+) => not found", r.stdout, re.M)
    assert missing == [], f"Qt's X11 plugin needs {missing}: see README.md, 'Linux: what Qt needs'"


def test_readme_and_ci_install_the_same_system_packages():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    block = readme[readme.index("**Linux: what Qt needs.**"):]
    block = block[block.index("apt-get install"):block.index("```", block.index("apt-get install"))]
    listed = set(re.findall(r"\blib[\w.+-]+", block))
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    ci_block = ci[ci.index('QT_XCB_PACKAGES="') + 17:]
    in_ci = set(ci_block[:ci_block.index('"')].split())
    assert listed == in_ci and "libxcb-icccm4" in listed and "libxcb-keysyms1" in listed
