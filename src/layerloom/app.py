"""Starting the editor from the command line (Qt is imported only here, never by the core)."""
from __future__ import annotations

import sys


def run_editor(files: list[str]) -> int:
    """Open the editor window on ``files[0]`` (or a new design); returns the exit code."""
    try:
        from layerloom.gui.main_window import launch
    except ImportError:
        print("layerloom: the editor is not part of this build yet; use `layerloom check FILE` or "
              "`layerloom ledger FILE`", file=sys.stderr)
        return 2
    return launch(files)
