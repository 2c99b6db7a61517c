"""Starting the editor from the command line (Qt is imported only here, never by the core)."""
from __future__ import annotations

import os
import sys

HEADLESS_HINT = ("to work without a display use `layerloom check FILE`, `layerloom ledger FILE` or "
                 "`layerloom export FILE -o model.py`")


def missing_display(environ=os.environ, platform: str = sys.platform) -> str | None:
    """Why the editor cannot show a window here (one line), or None. On Linux and the BSDs Qt needs
    an X or Wayland display unless another platform plugin (``QT_QPA_PLATFORM``) is chosen."""
    if platform in ("win32", "darwin"):
        return None
    chosen = environ.get("QT_QPA_PLATFORM", "").split(":")[0]
    if chosen and chosen not in ("xcb", "wayland", "wayland-egl"):
        return None  # offscreen, eglfs, linuxfb, vnc, …: Qt needs no display server
    if environ.get("DISPLAY") or environ.get("WAYLAND_DISPLAY"):
        return None
    return "no display to open the editor on (neither DISPLAY nor WAYLAND_DISPLAY is set)"


def run_editor(files: list[str]) -> int:
    """Open the editor window on ``files[0]`` (or a new design); returns the exit code (2 with a
    one-line message when there is no display)."""
    why = missing_display()
    if why is not None:
        print(f"layerloom: {why}; {HEADLESS_HINT}", file=sys.stderr)
        return 2
    from layerloom.gui.main_window import launch

    return launch(files)
