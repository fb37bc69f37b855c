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

import importlib

#: public name -> the submodule that defines it; imported on first use, so that a quick
#: command (``fleetpower limits``) does not pay for pandas
_EXPORTS = {
    **dict.fromkeys(
        ("average_active_efficiency", "evaluate_discharge", "evaluate_discharge_rules",
         "evaluate_eps",
         "evaluate_harmonic_emissions", "evaluate_ieee519", "evaluate_ieee519_voltage",
         "evaluate_standby", "evaluate_user_set", "formula_limit", "ieee519_row"),
        "rules"),
    **dict.fromkeys(("COLUMNS", "ComplianceRow", "limits_dir", "list_limit_sets",
                     "load_limit_set", "load_scopes", "margin", "limit_frame", "limit_records",
                     "scope_record", "scope_set_ids"), "tables"),
}


def __getattr__(name: str):
    if name in _EXPORTS:
        value = getattr(importlib.import_module(f".{_EXPORTS[name]}", __name__), name)
        globals()[name] = value  # resolved once: later lookups are plain attributes
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


__all__ = [
    "COLUMNS",
    "ComplianceRow",
    "average_active_efficiency",
    "evaluate_discharge",
    "evaluate_discharge_rules",
    "evaluate_eps",
    "evaluate_harmonic_emissions",
    "evaluate_ieee519",
    "evaluate_ieee519_voltage",
    "evaluate_standby",
    "evaluate_user_set",
    "formula_limit",
    "ieee519_row",
    "limit_frame",
    "limit_records",
    "limits_dir",
    "list_limit_sets",
    "load_limit_set",
    "load_scopes",
    "scope_record",
    "scope_set_ids",
    "margin",
]
