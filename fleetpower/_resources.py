"""Locate the bundled data tables and examples, installed or in a source checkout."""

from __future__ import annotations

from importlib import resources
from pathlib import Path

_REPO = Path(__file__).resolve().parent.parent


def _locate(package: str, fallback: str) -> Path:
    try:
        path = Path(str(resources.files(package)))
        if path.is_dir():
            return path
    except (ModuleNotFoundError, TypeError):
        pass
    return _REPO / fallback


def data_dir() -> Path:
    """Folder holding the standards tables (``data/`` in the repository)."""
    return _locate("fleetpower.data", "data")


def examples_dir() -> Path:
    """Folder holding the bundled demo scenario (``examples/`` in the repository)."""
    return _locate("fleetpower.examples", "examples")
