"""Reports: the JSON model of a unit, a fleet and a comparison, and its renderings.

- :mod:`~fleetpower.report.model`: JSON-ready dictionaries (the shape ``--json`` prints);
- :mod:`~fleetpower.report.format`: the number format and the labels of every rendering
  (light: imports nothing of fleetpower);
- :mod:`~fleetpower.report.terminal`: rich terminal summaries drawn from those dictionaries;
- :mod:`~fleetpower.report.markdown`: the comparison as Markdown;
- :mod:`~fleetpower.report.plots`: comparison figures (optional matplotlib extra; not
  imported here).

The bottom of the data flow: it may import any other module; none imports it but ``cli``.
The names below are loaded on first use, so ``report.format`` imports without the engine.
"""

from __future__ import annotations

import importlib

_WHERE = {
    "COMPARE_ROWS": "model", "compare_cell": "model", "compare_to_dict": "model",
    "fleet_to_dict": "model", "state_to_dict": "model", "unit_to_dict": "model",
    "fmt": "format", "compare_markdown": "markdown",
    "render_compare": "terminal", "render_fleet": "terminal", "render_unit": "terminal",
}


def __getattr__(name: str):
    if name in _WHERE:
        return getattr(importlib.import_module(f".{_WHERE[name]}", __name__), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = sorted(_WHERE)
