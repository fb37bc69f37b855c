"""Markdown rendering of a comparison report (a document a buyer can paste into a tender).

Owns: the Markdown layout. May import ``report.model`` only; it computes nothing.
"""

from __future__ import annotations

from .format import humanize
from .model import COMPARE_ROWS, collapse_notes, marked_cell


def compare_markdown(d: dict) -> str:
    """A report a buyer can paste into a tender file (GitHub-flavoured Markdown)."""
    cur = d["currency"]
    lines = [f"# {d['fleet']}: supply options compared", "",
             f"Service life {d['service_life_years']} years, discount rate "
             f"{100 * d['discount_rate']:.1f} %, energy price escalation "
             f"{100 * d['energy_escalation']:.1f} % per year. Figures from fleetpower "
             "simulations of each design on the same fleet, phases, profiles and tariff.", "",
             "| | " + " | ".join(f"{x['letter']}: {x['name']}" for x in d["designs"]) + " |",
             "|---|" + "---:|" * len(d["designs"])]
    for label, key, digits, unit in COMPARE_ROWS:
        if key is None:
            lines.append(f"| **{label}** |" + " |" * len(d["designs"]))
            continue
        lines.append(f"| {label} | " + " | ".join(marked_cell(x, key, digits, unit, cur)
                                                 for x in d["designs"]) + " |")
    lines.append("| safety | " + " | ".join(x["safety"] for x in d["designs"]) + " |")
    lines.append("| failed checks | " + " | ".join(
        (", ".join(humanize(f) for f in x["failures"]) or "none") for x in d["designs"]) + " |")
    lines += [""] + collapse_notes(d)
    if d.get("shared_failures"):
        lines += ["", "Every candidate (groups they do not replace) fails: "
                  + "; ".join(humanize(f) for f in d["shared_failures"])
                  + " - not counted against any candidate."]
    if d.get("warnings"):
        lines += ["", "## Warnings", ""] + [f"- {humanize(w)}" for w in d["warnings"]]
    lines += ["", "## Recommendation", "", humanize(d["recommendation"]), ""]
    if d.get("basis"):
        lines += [f"Designs enter as: {d['basis']}.", ""]
    if d["paybacks"]:
        lines += ["## Payback", ""] + [f"- {humanize(p['reason'])}" for p in d["paybacks"]] + [""]
    lines += ["## What drives the difference", ""] + \
        [f"- {x['letter']}: {humanize(x['driver'])}" for x in d["designs"]] + [""]
    if d.get("caution"):
        lines += ["## Safety", "", d["caution"], ""]
    lines += ["Limit verdicts use tables recorded in fleetpower's data/limits/ (mostly from "
              "memory); they are an engineering aid, not a certification.", ""]
    return "\n".join(lines)


__all__ = ["compare_markdown"]
