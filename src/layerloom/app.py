"""Starting the editor from the command line (Qt is imported only here, never by the core)."""
from __future__ import annotations


def run_editor(files: list[str]) -> int:
    """Open the editor window on ``files[0]`` (or a new design); returns the exit code."""
    from layerloom.gui.main_window import launch

    return launch(files)
