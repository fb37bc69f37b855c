"""Limits: the published (and users') limit tables, how each kind is evaluated, and which
apply to a unit.

- :mod:`~fleetpower.limits.tables`: reading ``data/limits/*.csv``, :class:`ComplianceRow`,
  margins;
- :mod:`~fleetpower.limits.rules`: one evaluator per kind (harmonic emissions, standby,
  external power supplies, IEEE 519, discharge, user sets);
- :mod:`~fleetpower.limits.applicability`: which limits apply to one unit, on its figures.

The public names of ``tables`` and ``rules`` are re-exported here
(``from fleetpower import limits as L; L.load_limit_set(...)``). ``applicability`` is not
imported here: it reads a unit's analysis, and ``tables`` must stay importable from below it.
"""

from .rules import (
    average_active_efficiency,
    evaluate_discharge,
    evaluate_eps,
    evaluate_harmonic_emissions,
    evaluate_ieee519,
    evaluate_ieee519_voltage,
    evaluate_standby,
    evaluate_user_set,
    formula_limit,
    ieee519_row,
)
from .tables import COLUMNS, ComplianceRow, limits_dir, list_limit_sets, load_limit_set, margin

__all__ = [
    "COLUMNS",
    "ComplianceRow",
    "average_active_efficiency",
    "evaluate_discharge",
    "evaluate_eps",
    "evaluate_harmonic_emissions",
    "evaluate_ieee519",
    "evaluate_ieee519_voltage",
    "evaluate_standby",
    "evaluate_user_set",
    "formula_limit",
    "ieee519_row",
    "limits_dir",
    "list_limit_sets",
    "load_limit_set",
    "margin",
]
