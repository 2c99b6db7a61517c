"""Where the shipped resources (schema, icons, style sheet) are: inside the installed package, or
the repository's ``resources/`` folder when running from a source checkout."""
from __future__ import annotations

from pathlib import Path

_HERE = Path(__file__).resolve().parent


def resource(name: str) -> Path:
    """Path of resource ``name`` (e.g. ``loom.schema.json``)."""
    for folder in (_HERE / "resources", _HERE.parents[1] / "resources"):
        path = folder / name
        if path.exists():
            return path
    raise FileNotFoundError(f"resource {name!r} is missing from this installation of Layerloom")
