"""Verdicts of one supply: limits applied by product, market and state; one fault, one check;
a supply that cannot power its load fails.

Every case is derived by hand in its comment, with its source: the clause of the standard,
the regulation's article, or the closed form. Values recalled rather than read from the
published text say "from memory".
"""

from __future__ import annotations

import io
import math

import pandas as pd
import pytest
from conftest import example_path, json_report, run_captured, write_design
from rich.console import Console

from fleetpower.limits import applicability as AP
from fleetpower.limits import limits_dir, list_limit_sets, load_scopes

VPK_230 = 230.0 * math.sqrt(2.0)  # peak of 230 V rms [V]
STRESS = 1.10  # stresses and discharge are assessed at +10 % mains (common practice, no source)

VERDICTS = {"pass", "fail", "exempt", "not evaluated", "not applicable", "for information",
            "out of scope"}  # fmt: skip


def _rows(d: dict, prefix: str) -> list[dict]:
    return [r for r in d["compliance"] if r["set"].startswith(prefix)]


# ----------------------------------------------------------------------------------------
# scope recorded in data, with provenance
# ----------------------------------------------------------------------------------------
def test_every_shipped_set_records_its_scope_with_provenance():
    # Each limit set names the products and the mains it covers (issue item 5); the scope
    # table carries edition, clause and provenance like the limit tables themselves.
    scopes = load_scopes()
    sets = set(list_limit_sets()["set"])
    assert sets <= set(scopes["set"]), sets - set(scopes["set"])
    for col in ("products", "market", "edition", "clause", "provenance"):
        assert (scopes[col].str.len() > 0).all(), col
    # IEC 61000-3-2 limits are written for 220-240 V line-to-neutral systems (IEC
    # 61000-3-2:2018 clause 1, scope: "220/380 V ... 240/415 V", from memory)
    iec = scopes.set_index("set").loc["iec61000-3-2-class-a"]
    assert (iec["v_ln_min_v"], iec["v_ln_max_v"]) == (220.0, 240.0)
    # US DOE EPS rules are tested at 115 V 60 Hz (10 CFR 430 Subpart B App. Z, from memory)
    us = scopes.set_index("set").loc["us-doe-level-vi-eps-basic"]
    assert us["frequency_hz"] == 60.0 and us["v_ln_min_v"] <= 115.0 <= us["v_ln_max_v"]
    eu = scopes.set_index("set").loc["eu-2023-826-standby"]
    assert eu["frequency_hz"] == 50.0 and eu["v_ln_min_v"] <= 230.0 <= eu["v_ln_max_v"]
    # the scope file is not itself read as a limit table
    assert "scope" not in {s.split("-")[0] for s in sets}
    assert (limits_dir() / "scope.csv").is_file()


def test_every_compliance_row_carries_scope_beside_verdict():
    d = json_report(example_path("sensor-dropper-230"))
    for r in d["compliance"]:
        assert r["verdict"] in VERDICTS, r
        assert r["scope"] == "in scope" or r["scope"].startswith("out of scope: "), r
        if r["scope"] != "in scope":
            assert r["verdict"] in ("out of scope", "for information"), r
        if r["verdict"] in ("pass", "fail"):
            assert r["scope"] == "in scope" and r["value"] is not None and r["limit"] is not None


# ----------------------------------------------------------------------------------------
# IEC 61000-3-2: mains, lighting and the 75 W exemption
# ----------------------------------------------------------------------------------------
def test_iec_61000_3_2_on_120v_mains_is_for_information(tmp_path):
    # IEC 61000-3-2's limits are written for 220-240 V line-to-neutral systems (clause 1,
    # from memory). The 40 W lighting driver fails Class C on 230 V (test_cli_unit); on
    # 120 V 60 Hz the same figures are shown for information, never pass or fail.
    path = write_design(tmp_path, "led-driver-40w",
                        mains={"voltage": "120 V", "frequency": "60 Hz"},
                        parts={"x_capacitor_voltage_rating": "250 V"})  # fmt: skip
    d = json_report(path, "--state", "full")
    rows = _rows(d, "iec61000-3-2")
    assert rows and all(r["verdict"] == "for information" for r in rows)
    assert all(r["scope"].startswith("out of scope: ") and "220-240 V" in r["scope"]
               for r in rows)  # fmt: skip
    h3 = next(r for r in rows if r["quantity"] == "i_h3_a")
    i1 = d["harmonics"][0]["i_rms_a"]
    # the figure is still the Class C one: 30·λ % of I1 (Table 2, from memory)
    assert h3["limit"] == pytest.approx(0.30 * d["pf"] * i1, rel=1e-6)


def test_lighting_with_no_class_named_is_class_c(tmp_path):
    # IEC 61000-3-2 clause 5: lighting equipment is Class C (from memory). With no class
    # named the Class C table applies, and this capacitor-input driver fails its 3rd
    # harmonic limit 30·λ % of I1 (Table 2, from memory).
    path = write_design(tmp_path, "led-driver-40w", equipment_class=None)
    d = json_report(path, "--state", "full")
    h3 = next(r for r in d["compliance"] if r["quantity"] == "i_h3_a")
    assert h3["set"] == "iec61000-3-2-class-c" and h3["scope"] == "in scope"
    assert h3["limit"] == pytest.approx(0.30 * d["pf"] * d["harmonics"][0]["i_rms_a"], rel=1e-6)
    assert h3["verdict"] == "fail"


@pytest.mark.parametrize("cls", ["A", None])
def test_non_lighting_at_most_75w_is_exempt_whether_or_not_a_class_is_named(tmp_path, cls):
    # IEC 61000-3-2 clause 7: no limits apply to equipment (other than lighting) of rated
    # power 75 W or less (from memory). The 1 uF desk sensor draws under 1 W.
    path = write_design(tmp_path, "sensor-dropper-230", equipment_class=cls)
    d = json_report(path, "--state", "active")
    rows = _rows(d, "iec61000-3-2")
    assert len(rows) == 1
    assert rows[0]["verdict"] == "exempt" and rows[0]["scope"] == "in scope"
    assert "75 W" in rows[0]["reason"]


# ----------------------------------------------------------------------------------------
# EU standby: the state the design names, on EU mains
# ----------------------------------------------------------------------------------------
def test_standby_rule_needs_a_named_standby_state(tmp_path):
    # EU 2023/826 applies to the standby mode; which operating state is standby is the
    # designer's statement, never guessed (issue item 5).
    path = write_design(tmp_path, "sensor-dropper-230", standby_state=None)
    d = json_report(path)
    (row,) = _rows(d, "eu-2023-826-standby")
    assert row["verdict"] == "not evaluated" and row["value"] is None
    assert "standby_state" in row["reason"]


def test_standby_rule_evaluates_the_named_state(tmp_path):
    # EU 2023/826 Annex II, standby without display: at most 0.5 W (2025 tier, from memory).
    # The named state's own mains input power is the value, whichever state is lightest.
    path = write_design(tmp_path, "sensor-dropper-230", standby_state="active")
    d = json_report(path)
    (row,) = _rows(d, "eu-2023-826-standby")
    p_active = next(s for s in d["states"] if s["state"] == "active")["p_w"]
    assert row["value"] == pytest.approx(p_active, rel=1e-12)
    assert row["limit"] == 0.5 and row["scope"] == "in scope"
    assert row["verdict"] == ("pass" if p_active <= 0.5 else "fail")
    assert "'active'" in row["reason"]


def test_unknown_standby_state_is_a_one_line_error(tmp_path):
    path = write_design(tmp_path, "sensor-dropper-230", standby_state="sleep")
    rc, out, err = run_captured(["unit", path])
    assert rc == 2 and "Traceback" not in err
    assert err.strip().count("\n") == 0 and "standby_state" in err and "sleep" in err


def test_eu_standby_rule_is_out_of_scope_on_us_mains(tmp_path):
    # A regional rule applies on its market's mains: EU 2023/826 on the EU's 230 V 50 Hz,
    # not on a 120 V 60 Hz supply (issue item 5).
    path = write_design(tmp_path, "nightlight-dropper", standby_state="idle")
    d = json_report(path)
    (row,) = _rows(d, "eu-2023-826-standby")
    assert row["verdict"] == "out of scope" and row["scope"].startswith("out of scope: ")
    assert "120 V" in row["scope"] and "60 Hz" in row["scope"]


# ----------------------------------------------------------------------------------------
# external power supplies: declared, classed by voltage AND current, on their market
# ----------------------------------------------------------------------------------------
@pytest.mark.parametrize("v_out, p_out, low", [
    (5.0, 3.0, True),     # 600 mA at 5 V
    (5.0, 2.5, False),    # 500 mA: below 550 mA, so basic-voltage despite 5 V
    (5.0, 2.75, True),    # 550 mA exactly: "at least 550 mA"
    (6.0, 6.0, False),    # 6 V is not below 6 V
    (12.0, 12.0, False),  # 1 A at 12 V
    (3.3, 1.65, False),   # 500 mA at 3.3 V
])  # fmt: skip
def test_low_voltage_eps_is_below_6v_and_at_least_550ma(v_out, p_out, low):
    # EU 2019/1782 Article 2(4) and 10 CFR 430.2: a low-voltage external power supply has
    # a nameplate output voltage below 6 V AND a nameplate output current of at least
    # 550 mA (from memory; the EU rows' Annex II text was checked, see eps.csv).
    assert AP.low_voltage_eps(v_out, p_out) is low


def test_eps_rules_only_for_a_declared_external_power_supply():
    # The desk-sensor flyback is a module inside the sensor, not an external power supply:
    # the EPS rules are out of scope (issue item 5).
    d = json_report(example_path("desk-sensor-smps-230"), "--state", "active")
    rows = _rows(d, "eu-2019-1782-eps") + _rows(d, "us-doe-level-vi-eps")
    assert rows and all(r["verdict"] == "out of scope" for r in rows)
    assert all("external_power_supply" in r["scope"] for r in rows)


@pytest.mark.parametrize("p_out, set_id, eff_limit", [
    # EU 2019/1782 Annex II table 1, low voltage, 1 W < P <= 49 W:
    # 0.0834 ln(3) - 0.0014 x 3 + 0.609 = 0.091624 - 0.0042 + 0.609 = 0.696424
    ("3 W", "eu-2019-1782-eps-low-voltage", 0.0834 * math.log(3.0) - 0.0014 * 3.0 + 0.609),
    # 2.5 W at 5 V is 500 mA, so basic voltage:
    # 0.071 ln(2.5) - 0.0014 x 2.5 + 0.67 = 0.065057 - 0.0035 + 0.67 = 0.731557
    ("2.5 W", "eu-2019-1782-eps-basic", 0.071 * math.log(2.5) - 0.0014 * 2.5 + 0.67),
])  # fmt: skip
def test_declared_eps_on_eu_mains_gets_eu_rows_only(tmp_path, p_out, set_id, eff_limit):
    path = write_design(tmp_path, "desk-sensor-smps-230", external_power_supply=True,
                        output={"rated_power": p_out})  # fmt: skip
    d = json_report(path, "--state", "active")
    eu = [r for r in _rows(d, "eu-2019-1782-eps") if r["scope"] == "in scope"]
    assert {r["set"] for r in eu} == {set_id}
    eff = next(r for r in eu if r["quantity"] == "avg_active_eff_frac")
    assert eff["limit"] == pytest.approx(eff_limit, rel=1e-9)
    no_load = next(r for r in eu if r["quantity"] == "no_load_p_w")
    assert no_load["limit"] == 0.1  # Annex II: P <= 49 W, 0.10 W
    us = _rows(d, "us-doe-level-vi-eps")
    assert us and all(r["verdict"] == "out of scope" and "230 V" in r["scope"] for r in us)


def test_declared_eps_on_us_mains_gets_us_rows_only(tmp_path):
    # The 5 V 5 W corridor flyback on 120 V 60 Hz: 1 A, low voltage; US DOE Level VI rows in
    # scope (10 CFR 430.32(w), from memory), EU rows out of scope.
    path = write_design(tmp_path, "corridor-smps", external_power_supply=True)
    d = json_report(path, "--state", "active")
    us = [r for r in _rows(d, "us-doe-level-vi-eps") if r["scope"] == "in scope"]
    assert {r["set"] for r in us} == {"us-doe-level-vi-eps-low-voltage"}
    assert all(r["verdict"] in ("pass", "fail") for r in us)
    eu = _rows(d, "eu-2019-1782-eps")
    assert eu and all(r["verdict"] == "out of scope" for r in eu)


# ----------------------------------------------------------------------------------------
# one fault, one check: the plug-pin discharge
# ----------------------------------------------------------------------------------------
def _discharge(d: dict) -> list[dict]:
    return [r for r in d["compliance"] if r["quantity"] == "tau_discharge_s"]


def test_slow_discharge_is_one_failed_check_citing_the_rule_it_breaks():
    # RC discharge V(t) = V0 exp(-t/RC) (closed form). 1 uF x 470 kohm: tau = 0.47 s.
    # V0 is the capacitor's peak at +10 % mains, at most 1.1 x 230 sqrt(2) = 357.8 V and
    # above 300 V. IEC 60335-1 cl. 22.5 (34 V within 1 s, from memory) allows
    # tau <= 1 / ln(V0/34), between 1/ln(357.8/34) = 0.425 s and 1/ln(300/34) = 0.460 s:
    # broken. IEC 62368-1 cl. 5.5.2.2 (60 V within 2 s, from memory) allows
    # tau <= 2 / ln(V0/60) >= 2/ln(357.8/60) = 1.12 s: met. So one failed check, citing
    # IEC 60335-1 and not IEC 62368-1, and no second copy in the stress table.
    d = json_report(example_path("sensor-dropper-230"))
    (row,) = _discharge(d)
    assert row["value"] == pytest.approx(1e-6 * 470e3, rel=1e-9)
    assert 1 / math.log(STRESS * VPK_230 / 34) <= row["limit"] <= 1 / math.log(300 / 34)
    assert row["verdict"] == "fail"
    assert "60335-1" in row["set"] + row["edition"] and "22.5" in row["clause"]
    assert "62368" not in row["edition"] + row["clause"]
    assert not [s for s in d["stresses"] if "discharge" in s["item"]]
    fails = [r for r in d["compliance"] if r["verdict"] == "fail" and "discharge" in
             (r["set"] + r["quantity"])]  # fmt: skip
    assert len(fails) == 1


def test_discharge_cites_every_rule_it_breaks():
    # The nightlight: 3.3 uF x 1 Mohm = 3.3 s (closed form RC); V0 <= 1.1 x 120 sqrt(2) =
    # 186.7 V. IEC 62368-1 allows tau <= 2/ln(186.7/60) = 1.76 s and IEC 60335-1 tau <=
    # 1/ln(186.7/34) = 0.587 s (both from memory): both broken, one check names both.
    d = json_report(example_path("nightlight-dropper"), "--state", "active")
    (row,) = _discharge(d)
    assert row["value"] == pytest.approx(3.3, rel=1e-9)
    assert row["verdict"] == "fail"
    cited = row["edition"] + " " + row["clause"]
    assert "60335-1" in cited and "62368-1" in cited


def test_small_x_capacitor_discharge_passes_under_the_rule_that_covers_it():
    # 33 nF x 2.2 Mohm = 72.6 ms (closed form). IEC 60335-1 cl. 22.5 covers capacitance
    # above 0.1 uF only (from memory), so only IEC 62368-1 applies: 72.6 ms is far below
    # 2/ln(357.8/60) = 1.12 s: pass.
    d = json_report(example_path("desk-sensor-smps-230"), "--state", "active")
    (row,) = _discharge(d)
    assert row["value"] == pytest.approx(33e-9 * 2.2e6, rel=1e-9)
    assert row["verdict"] == "pass"
    assert "62368-1" in row["edition"] and "60335-1" not in row["edition"]


# ----------------------------------------------------------------------------------------
# a supply that cannot power its load fails
# ----------------------------------------------------------------------------------------
# A 220 nF half-wave dropper on 230 V 50 Hz: the capacitor moves at most
# C (2 Vpk - Vz - Vf) of charge per cycle into the clamp (charge-pump bound, closed form;
# derivation in supply.charge_pump_limit_a): 50 x 220e-9 x (650.5 - 10 - 0.7) = 7.04 mA,
# of which the regulator's 3 mA quiescent current is taken first: at most 4.04 mA reaches
# the load. 18 mA active cannot be carried; 1 mA idle can.
STARVED = dict(parts={"series_capacitance": "220 nF"},
               replace_states={"active": "18 mA", "idle": "1 mA"})  # fmt: skip
PUMP_A = 50 * 220e-9 * (2 * VPK_230 - 10 - 0.7)


def test_starved_dropper_fails_cannot_power_its_load(tmp_path):
    path = write_design(tmp_path, "sensor-dropper-230", **STARVED)
    d = json_report(path)
    rows = {r["reason"].split("'")[1]: r for r in d["compliance"]
            if r["quantity"] == "v_reservoir_min_v"}  # fmt: skip
    assert set(rows) == {"active", "idle"}
    act, idle = rows["active"], rows["idle"]
    # a linear regulator needs its input at least output + dropout: 5 V + 1.5 V = 6.5 V
    # (regulator datasheet definition of dropout; common practice, no source)
    assert act["limit"] == pytest.approx(6.5) and idle["limit"] == pytest.approx(6.5)
    assert act["verdict"] == "fail" and act["value"] < 6.5
    assert idle["verdict"] == "pass" and idle["value"] >= 6.5
    assert "cannot power its load in state 'active'" in act["reason"]
    held_ma = float(act["reason"].split("holds ")[1].split(" mA")[0])
    assert 0 < held_ma < (PUMP_A - 3e-3) * 1e3
    assert "of 18.0 mA" in act["reason"]


def test_transformer_too_low_a_secondary_fails(tmp_path):
    # A 5 V regulator with 1.5 V dropout needs 6.5 V at its input. A 5.2 V (open-circuit
    # rms) secondary peaks at 5.2 sqrt(2) = 7.35 V; a bridge takes two diode drops (about
    # 0.7 V each, common practice, no source), leaving at most about 5.95 V before any
    # winding drop or ripple: the reservoir can never reach 6.5 V.
    path = write_design(tmp_path, "desk-sensor-transformer-230",
                        parts={"secondary_voltage": "5.2 V"})  # fmt: skip
    d = json_report(path, "--state", "active")
    (row,) = [r for r in d["compliance"] if r["quantity"] == "v_reservoir_min_v"]
    assert row["verdict"] == "fail" and row["value"] < 6.5
    assert "cannot power its load in state 'active'" in row["reason"]


# ----------------------------------------------------------------------------------------
# terminal view: out-of-scope rows dimmed, never shown as failures
# ----------------------------------------------------------------------------------------
def test_terminal_dims_out_of_scope_rows():
    from fleetpower.report import render_unit

    d = json_report(example_path("nightlight-dropper"), "--state", "active")
    console = Console(file=io.StringIO(), width=140, force_terminal=True, color_system="standard")
    render_unit(d, console)
    text = console.file.getvalue()
    eu = [ln for ln in text.splitlines() if "out of scope" in ln]
    assert eu, text
    dim = "\x1b[2m"
    assert all(dim in ln for ln in eu)
    assert all("FAIL" not in ln.upper().replace("FAILS", "") for ln in eu)


def test_scope_table_rows_agree_with_limit_tables():
    # every scope row names a shipped set and nothing else (no orphan scope rows)
    scopes = load_scopes()
    sets = set(list_limit_sets()["set"])
    assert set(scopes["set"]) <= sets
    assert isinstance(scopes, pd.DataFrame)
