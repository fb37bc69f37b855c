"""Reports: the JSON model of a unit, a fleet and a comparison, and its renderings.

- :mod:`~fleetpower.report.model`: JSON-ready dictionaries (the shape ``--json`` prints);
- :mod:`~fleetpower.report.terminal`: rich terminal summaries drawn from those dictionaries;
- :mod:`~fleetpower.report.markdown`: the comparison as Markdown;
- :mod:`~fleetpower.report.plots`: comparison figures (optional matplotlib extra; not
  imported here).

The bottom of the data flow: it may import any other module; none imports it but ``cli``.
"""

from .markdown import compare_markdown
from .model import (
    COMPARE_ROWS,
    compare_cell,
    compare_to_dict,
    fleet_to_dict,
    fmt,
    state_to_dict,
    unit_to_dict,
)
from .terminal import render_compare, render_fleet, render_unit

__all__ = [
    "COMPARE_ROWS",
    "compare_cell",
    "compare_markdown",
    "compare_to_dict",
    "fleet_to_dict",
    "fmt",
    "render_compare",
    "render_fleet",
    "render_unit",
    "state_to_dict",
    "unit_to_dict",
]
