"""Locate the bundled data tables and examples, installed or in a source checkout.

Installed, ``data/`` and ``examples/`` sit inside the package (pyproject maps them there);
in a source checkout they sit at the top of the repository.
"""

from __future__ import annotations

import functools
from pathlib import Path

_PACKAGE = Path(__file__).resolve().parent
_REPO = _PACKAGE.parent


@functools.cache
def _locate(name: str) -> Path:
    # the package does not move while it runs: found once (a spread evaluates thousands of
    # units against the limit tables, each load asking for the folder)
    installed = _PACKAGE / name
    return installed if installed.is_dir() else _REPO / name


def data_dir() -> Path:
    """Folder holding the standards tables (``data/`` in the repository)."""
    return _locate("data")


def examples_dir() -> Path:
    """Folder holding the bundled demo scenario (``examples/`` in the repository)."""
    return _locate("examples")
