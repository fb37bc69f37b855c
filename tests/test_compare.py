"""Comparison of candidate designs on one fleet (issue: compare designs over a fleet's life).

Economics themselves are checked against the annuity formula in test_economics.py; here the
comparison's own promises are checked: the same fleet for every design, order independence,
terminal figures equal to JSON figures, and figures written by the plot extra.
"""

from __future__ import annotations

import builtins
import io
import json

import pytest
from rich.console import Console

from fleetpower import economics as E
from fleetpower._resources import examples_dir
from fleetpower.cli import main
from fleetpower.compare import compare
from fleetpower.errors import FleetpowerError, InputError
from fleetpower.report import (
    COMPARE_ROWS,
    compare_cell,
    compare_markdown,
    compare_to_dict,
    render_compare,
)

EX = examples_dir()
FLEET = EX / "harbour-office.toml"
A = EX / "sensor-dropper-230.toml"  # holds its load: a payback baseline (the lean one collapses)
B = EX / "desk-sensor-smps-230.toml"


@pytest.fixture(scope="module")
def ab():
    return compare(FLEET, [A, B])


@pytest.fixture(scope="module")
def ba():
    return compare(FLEET, [B, A])


def _strip(d: dict) -> dict:
    return {k: v for k, v in d.items() if k != "letter"}


def test_swapping_designs_changes_only_column_order(ab, ba):
    # The same fleet, tariff and life for every candidate (issue acceptance 2).
    da, db = compare_to_dict(ab), compare_to_dict(ba)
    assert [x["design"] for x in da["designs"]] == [x["design"] for x in db["designs"][::-1]]
    for x, y in zip(da["designs"], db["designs"][::-1], strict=True):
        assert _strip(x) == _strip(y)
    assert da["recommendation"] == db["recommendation"]


def test_other_groups_are_identical_across_candidates(ab):
    # Only the groups of the candidate's role change: the plug meters and thermostat
    # drivers draw the same in both evaluations (conservation: fleet = sum of groups).
    ga = ab.candidates[0].fleet.groups.set_index("group")
    gb = ab.candidates[1].fleet.groups.set_index("group")
    for g in ("plug meters", "thermostat drivers"):
        assert ga.loc[g, "e_kwh_per_year"] == pytest.approx(gb.loc[g, "e_kwh_per_year"], rel=1e-12)
    assert ga.loc["desk sensors", "design"] != gb.loc["desk sensors", "design"]
    for c in ab.candidates:
        total = c.fleet.groups["e_kwh_per_year"].sum()
        assert total == pytest.approx(c.fleet.e_kwh_per_year, rel=1e-9)


def test_lifetime_cost_is_purchase_plus_discounted_running_cost(ab):
    # Present worth with end-of-year payments escalating at g from year 2 (the documented
    # convention): C = P + A * sum_k (1+g)^(k-1) / (1+r)^k; the annuity check of the
    # factor itself is in test_economics.py (standard uniform-series present worth).
    for c in ab.candidates:
        r, g, n = ab.rate, ab.escalation, ab.years
        by_hand = c.purchase_cost + sum(
            c.annual_cost * (1 + g) ** (k - 1) / (1 + r) ** k for k in range(1, n + 1)
        )
        assert c.lifetime_cost == pytest.approx(by_hand, rel=1e-12)
        assert c.purchase_cost == pytest.approx(c.design.unit_price * c.replaced_units)


def test_payback_is_where_cumulative_costs_cross(ab):
    dearer = max(ab.candidates, key=lambda c: c.purchase_cost)
    cheaper = min(ab.candidates, key=lambda c: c.purchase_cost)
    pb = E.payback_year(dearer.lifetime["cost_cumulative_discounted"].to_numpy(),
                        cheaper.lifetime["cost_cumulative_discounted"].to_numpy())
    rec = next(p for p in ab.paybacks if p["design"] == dearer.label)
    assert rec["payback_year"] == pytest.approx(pb.year)
    k = int(pb.year)  # the crossing lies inside year k+1
    d = (dearer.lifetime["cost_cumulative_discounted"]
         - cheaper.lifetime["cost_cumulative_discounted"]).to_numpy()
    assert d[k] > 0 >= d[k + 1]


def test_recommendation_states_its_reason(ab):
    rec = ab.recommendation
    assert rec.startswith("Choose ")
    assert "cost" in rec or "failed" in rec
    assert ("isolated" in rec)


def test_terminal_summary_at_80_columns_matches_json(ab):
    d = compare_to_dict(ab)
    buf = io.StringIO()
    render_compare(d, Console(file=buf, width=80, color_system=None, force_terminal=False))
    text = buf.getvalue()
    assert max(len(line) for line in text.splitlines()) <= 80
    for label, key, digits, unit in COMPARE_ROWS:
        if key is None:
            continue
        row = next(line for line in text.splitlines() if line.strip().startswith(label))
        for x in d["designs"]:
            assert compare_cell(x, key, digits, unit, d["currency"]) in row, (label, row)
    # verdicts readable without colour
    assert "passes" in text or "FAILS" in text
    assert d["recommendation"].split(":")[0] in " ".join(text.split())


def test_markdown_report_has_every_design_and_the_recommendation(ab):
    md = compare_markdown(compare_to_dict(ab))
    for c in ab.candidates:
        assert c.design.name in md
    assert "## Recommendation" in md


def test_plots_are_valid_png_and_svg_with_expected_axes(ab, tmp_path):
    # matplotlib comes with the test extra (pyproject: test = [..., "matplotlib"])
    from fleetpower.report.plots import comparison_figures

    paths = comparison_figures(ab, tmp_path)
    n = len(ab.candidates)
    # axes per figure: waveforms has a twin axis per design, spectrum one per design
    expected = {"waveforms": 2 * n, "spectrum": n, "lifetime_cost": 1}
    for p in paths:
        data = p.read_bytes()
        if p.suffix == ".png":
            assert data[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG spec, ISO 15948)
        else:
            text = data.decode()
            assert "<svg" in text
            assert text.count('id="axes_') == expected[p.stem], p.name
    assert {p.stem for p in paths} == set(expected)
    assert not list(tmp_path.glob(".*tmp*"))


def test_plots_without_matplotlib_say_how_to_get_it(monkeypatch):
    real_import = builtins.__import__

    def no_mpl(name, *args, **kwargs):
        if name.startswith("matplotlib"):
            raise ImportError("no matplotlib")
        return real_import(name, *args, **kwargs)

    monkeypatch.setattr(builtins, "__import__", no_mpl)
    from fleetpower.report.plots import require_matplotlib

    with pytest.raises(FleetpowerError, match=r"pip install 'fleetpower\[plot\]'"):
        require_matplotlib()


def test_candidate_without_matching_role_is_a_clear_error(tmp_path):
    bad = tmp_path / "x.toml"
    bad.write_text(A.read_text().replace('role = "sensor-supply"', 'role = "lamp-driver"'))
    with pytest.raises(InputError, match="matches no group"):
        compare(FLEET, [bad])


def test_demo_json_runs_end_to_end(capsys):
    assert main(["demo", "--json"]) == 0
    d = json.loads(capsys.readouterr().out)
    assert len(d["designs"]) == 4
    assert d["recommendation"].startswith("Choose ")
    assert any(not x["isolated"] for x in d["designs"]) and d["caution"]


def test_a_candidate_listing_its_states_in_another_order_is_the_same_fleet(tmp_path):
    """A group's daily profile names states; a candidate that lists the same states in
    another order (and one more it never uses) must give the fleet the same figures as the
    design it replaces (project invariant: fleet = sum of units, each in the state its
    profile names; found when the occupancy columns kept the replaced design's order)."""
    from conftest import write_design

    from fleetpower.compare import replace_role
    from fleetpower.fleet import evaluate_fleet, unit_catalogue
    from fleetpower.io.design_file import load_design
    from fleetpower.io.fleet_file import load_fleet

    spec = load_fleet(examples_dir() / "harbour-office.toml")
    same = tmp_path / "same.toml"
    same.write_text((examples_dir() / "sensor-dropper-230.toml").read_text())
    reordered = write_design(tmp_path, "sensor-dropper-230", filename="reordered.toml",
                             replace_states={"off": "0 mA", "idle": "3 mA",
                                             "active": "18 mA"})
    figures = []
    for path in (same, reordered):
        design = load_design(path)
        new, replaced = replace_role(spec, path, design)
        assert replaced == 3000
        r = evaluate_fleet(new, unit_catalogue(new.designs))
        figures.append((r.p_kw, r.q1_kvar, r.e_kwh_per_year))
    assert figures[0] == pytest.approx(figures[1], rel=1e-9)
