"""The shipped limit sets in brief, read without pandas (for a quick ``fleetpower limits``).

Owns: the one-row-per-set summary. Reads ``data/limits/*.csv`` with the standard library
only; :func:`fleetpower.limits.tables.list_limit_sets` gives the same rows as a DataFrame
(a test checks they agree), and the tables module stays the one that validates.
May import ``errors`` and ``_resources`` only.
"""

from __future__ import annotations

import csv
from pathlib import Path

from .._resources import data_dir
from ..errors import FleetpowerError

#: the scope table (products, market and mains of each set) beside the limit tables; it
#: is not a limit table (read by tables.load_scopes)
SCOPE_FILE = "scope.csv"
#: defaults of the summary's optional columns (as in tables.OPTIONAL_COLUMNS)
_DEFAULTS = {"title": "", "edition": "", "clause": "", "provenance": "user file"}


def set_summaries(folder: Path | None = None) -> list[dict]:
    """One record per shipped set: set, title, edition, clause(s), provenance, rows.

    Sets are sorted by id; clauses are joined with "; " in the order they first appear.
    """
    folder = folder or data_dir() / "limits"
    files = sorted(f for f in folder.glob("*.csv") if f.name != SCOPE_FILE)
    if not files:
        raise FleetpowerError(f"no limit tables found in {folder}: the installation is "
                              "incomplete (reinstall fleetpower)")
    sets: dict[str, dict] = {}
    for path in files:
        with open(path, encoding="utf-8", newline="") as fh:
            for raw in csv.DictReader(fh, skipinitialspace=True):
                row = {str(k).strip(): (v or "").strip() for k, v in raw.items() if k}
                if not any(row.values()):
                    continue
                rec = sets.get(row["set"])
                if rec is None:
                    rec = sets[row["set"]] = {
                        "set": row["set"],
                        **{k: row.get(k, d) for k, d in _DEFAULTS.items() if k != "clause"},
                        "clauses": {}, "rows": 0,
                    }
                rec["clauses"][row.get("clause", _DEFAULTS["clause"])] = None
                rec["rows"] += 1
    return [{"set": r["set"], "title": r["title"], "edition": r["edition"],
             "clause": "; ".join(r["clauses"]), "provenance": r["provenance"],
             "rows": r["rows"]} for _, r in sorted(sets.items())]
