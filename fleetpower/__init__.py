"""fleetpower: what a fleet of small always-on mains supplies really draws.

The library returns plain dataclasses and pandas DataFrames::

    from fleetpower import load_design, analyse_unit, load_fleet, evaluate_fleet, compare

Names are imported lazily so that ``fleetpower --help`` stays quick.
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

_EXPORTS = {
    "load_design": "fleetpower.io.design_file",
    "Design": "fleetpower.io.design_file",
    "analyse_unit": "fleetpower.unit",
    "simulate": "fleetpower.simulate",
    "power_quality": "fleetpower.pq.ieee1459",
    "load_fleet": "fleetpower.io.fleet_file",
    "evaluate_fleet": "fleetpower.fleet",
    "compare": "fleetpower.compare",
    "unit_compliance": "fleetpower.limits.applicability",
    "InputError": "fleetpower.errors",
    "SolverError": "fleetpower.errors",
}

__all__ = sorted(_EXPORTS)


def __getattr__(name: str):
    if name in _EXPORTS:
        return getattr(importlib.import_module(_EXPORTS[name]), name)
    raise AttributeError(f"module 'fleetpower' has no attribute {name!r}")
