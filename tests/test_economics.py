"""Checks of fleetpower.economics against standard factors and explicit sums."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from fleetpower import economics as ec


def test_present_value_factor_table_value():
    # Single-payment present worth (P/F, 5 %, 10) = 1/1.05^10 = 0.6139 (standard interest
    # tables, any engineering-economics text, from memory).
    assert ec.present_value_factor(0.05, 10) == pytest.approx(0.6139, abs=1e-4)
    assert ec.present_value_factor(0.05, 10) == pytest.approx(1.05**-10)


def test_annuity_factor_table_value():
    # Uniform-series present worth (P/A, 5 %, 10) = (1.05^10 - 1)/(0.05 * 1.05^10) = 7.7217
    # (standard uniform-series present-worth factor, any engineering-economics text,
    # from memory).
    assert ec.annuity_factor(0.05, 10) == pytest.approx(7.7217, abs=1e-4)
    assert ec.annuity_factor(0.05, 10) == pytest.approx((1.05**10 - 1) / (0.05 * 1.05**10))
    # (P/A, 10 %, 5) = 3.7908 (same tables, from memory)
    assert ec.annuity_factor(0.10, 5) == pytest.approx(3.7908, abs=1e-4)


def test_annuity_factor_zero_rate_is_plain_count():
    # At r = 0 discounting vanishes: P/A = n (limit of the standard formula).
    assert ec.annuity_factor(0.0, 12) == 12.0
    assert ec.annuity_factor(np.array([0.0, 0.05]), 10)[0] == 10.0
    # Continuity near zero: tiny r stays close to n (limit, same formula).
    assert ec.annuity_factor(1e-12, 12) == pytest.approx(12.0, rel=1e-9)


@settings(max_examples=100, deadline=None)
@given(
    r=st.floats(min_value=-0.5, max_value=0.5),
    n=st.integers(min_value=0, max_value=60),
)
def test_annuity_factor_equals_explicit_sum(r, n):
    # P/A is the sum of (1 + r)^-k for k = 1..n (definition; numpy as reference).
    k = np.arange(1, n + 1)
    assert ec.annuity_factor(r, n) == pytest.approx(np.sum((1 + r) ** -k), rel=1e-9, abs=1e-12)


@settings(max_examples=100, deadline=None)
@given(
    r=st.floats(min_value=-0.5, max_value=0.5),
    g=st.floats(min_value=-0.5, max_value=0.5),
    n=st.integers(min_value=0, max_value=60),
)
def test_escalated_factor_equals_explicit_sum(r, g, n):
    # Geometric-gradient present worth: sum_{k=1..n} (1+g)^(k-1)/(1+r)^k (definition of
    # the series with first payment A1 at the end of year 1; numpy as reference).
    k = np.arange(1, n + 1)
    ref = np.sum((1 + g) ** (k - 1) / (1 + r) ** k)
    assert ec.escalated_annuity_factor(r, g, n) == pytest.approx(ref, rel=1e-9, abs=1e-12)


def test_escalated_factor_special_cases():
    # r == g: every term is 1/(1+r), so the factor is n/(1+r) (geometric series limit).
    assert ec.escalated_annuity_factor(0.04, 0.04, 20) == pytest.approx(20 / 1.04)
    # g = 0 reduces to the uniform series factor (standard texts, from memory).
    assert ec.escalated_annuity_factor(0.05, 0.0, 10) == pytest.approx(7.7217, abs=1e-4)
    # Closed form (1 - ((1+g)/(1+r))^n)/(r - g), hand case r = 8 %, g = 3 %, n = 10:
    # ln x = ln 1.03 - ln 1.08 = 0.0295588 - 0.0769610 = -0.0474022, x^10 = e^-0.474022
    # = 0.622493, (1 - 0.622493)/0.05 = 7.5501 (hand).
    assert ec.escalated_annuity_factor(0.08, 0.03, 10) == pytest.approx(7.5501, abs=1e-4)


def test_lifetime_cost_zero_rate_is_plain_sum():
    # No discounting, no escalation: cumulative = purchase + n * annual (arithmetic).
    df = ec.lifetime_cost(100.0, 12.5, 0.0, 8)
    assert list(df.index) == list(range(9))
    assert df["cost"].iloc[0] == 100.0
    assert df["cost_cumulative_discounted"].iloc[-1] == pytest.approx(100.0 + 8 * 12.5)
    assert np.allclose(df["cost_discounted"], df["cost"])


def test_lifetime_cost_escalated_against_explicit_sum_and_factor():
    # Year k cost A (1+g)^(k-1), discounted (1+r)^-k; numpy sum as reference, and the
    # closed-form geometric-gradient factor for the total.
    r, g, n, a, c0 = 0.06, 0.025, 15, 40.0, 250.0
    df = ec.lifetime_cost(c0, a, r, n, escalation_per_year=g)
    k = np.arange(1, n + 1)
    ref_year = a * (1 + g) ** (k - 1) / (1 + r) ** k
    assert np.allclose(df["cost_discounted"].to_numpy()[1:], ref_year)
    assert df["cost_cumulative_discounted"].iloc[-1] == pytest.approx(c0 + ref_year.sum())
    assert df["cost_cumulative_discounted"].iloc[-1] == pytest.approx(
        c0 + a * ec.escalated_annuity_factor(r, g, n)
    )
    assert np.allclose(df["cost_cumulative"], np.cumsum(df["cost"]))


def test_lifetime_cost_per_year_array():
    # Irregular running costs: discounted values are C_k / (1+r)^k (definition).
    annual = np.array([10.0, 0.0, 30.0])
    df = ec.lifetime_cost(5.0, annual, 0.10, 3)
    ref = [5.0, 10 / 1.1, 0.0, 30 / 1.1**3]
    assert np.allclose(df["cost_discounted"], ref)
    with pytest.raises(ValueError):
        ec.lifetime_cost(5.0, annual, 0.10, 4)


def test_payback_exactly_on_year_boundary():
    # Hand case: A costs 100 + 10/year, B costs 130 + 0/year, no discounting.
    # Cumulative A: 100, 110, 120, 130, 140; B: 130 flat -> equal at exactly year 3.
    a = ec.lifetime_cost(100.0, 10.0, 0.0, 4)["cost_cumulative_discounted"]
    b = ec.lifetime_cost(130.0, 0.0, 0.0, 4)["cost_cumulative_discounted"]
    res = ec.payback_year(a, b)
    assert res.year == 3.0
    assert res.dearer == "b"


def test_payback_interpolated_within_year():
    # Hand case: B costs 125: difference 25, 15, 5, -5 -> crossing at 2 + 5/10 = 2.5.
    a = ec.lifetime_cost(100.0, 10.0, 0.0, 4)["cost_cumulative_discounted"]
    b = ec.lifetime_cost(125.0, 0.0, 0.0, 4)["cost_cumulative_discounted"]
    assert ec.payback_year(a, b).year == pytest.approx(2.5)
    # Symmetric in argument order.
    assert ec.payback_year(b, a).year == pytest.approx(2.5)
    assert ec.payback_year(b, a).dearer == "a"


def test_payback_never_within_life():
    # B costs 200 and saves 10/year over 4 years: never pays back (hand).
    a = ec.lifetime_cost(100.0, 10.0, 0.0, 4)["cost_cumulative_discounted"]
    b = ec.lifetime_cost(200.0, 0.0, 0.0, 4)["cost_cumulative_discounted"]
    res = ec.payback_year(a, b)
    assert res.year is None
    assert "never" in res.reason


def test_energy_flat_and_time_of_use():
    # 1 W always on: 8.76 kWh/year (1 W x 8760 h, arithmetic).
    assert ec.annual_energy_kwh(1.0) == pytest.approx(8.76)
    # Flat price 0.30/kWh: 2 W -> 17.52 kWh -> 5.256 per year (arithmetic).
    assert ec.energy_cost(2.0, 0.30) == pytest.approx(17.52 * 0.30)
    assert ec.energy_cost_from_kwh(17.52, 0.30) == pytest.approx(5.256)
    # Time of use: 0.20 for 8 night hours, 0.40 for 16 day hours; 1 kW constant:
    # daily 8*0.2 + 16*0.4 = 8.0; year 365*8 = 2920 (hand).
    price = np.array([0.20] * 8 + [0.40] * 16)
    assert ec.energy_cost(1000.0, price) == pytest.approx(2920.0)
    # Flat ToU array equals the flat price (consistency of the two forms).
    assert ec.energy_cost(3.0, np.full(24, 0.25)) == pytest.approx(ec.energy_cost(3.0, 0.25))


def test_demand_reactive_and_co2():
    # Demand: 2 kW x 5/kW-month x 12 = 120 (arithmetic).
    assert ec.demand_cost(2.0, 5.0) == pytest.approx(120.0)
    assert ec.demand_cost(np.arange(1.0, 13.0), 1.0) == pytest.approx(78.0)
    # Reactive: -500 var (leading) for 8760 h at 0.01/kvarh -> 4380 kvarh -> 43.8 (hand).
    assert ec.reactive_energy_cost(-500.0, 8760.0, 0.01) == pytest.approx(43.8)
    assert ec.reactive_energy_cost(-500.0, 8760.0, 0.01, bill="lagging") == 0.0
    assert ec.reactive_energy_cost(-500.0, 8760.0, 0.01, bill="leading") == pytest.approx(43.8)
    mixed = ec.reactive_energy_cost([200.0, -100.0], [10.0, 10.0], 1.0, bill="lagging")
    assert mixed == pytest.approx(2.0)
    # CO2: 100 kWh x 0.4 kg/kWh = 40 kg (arithmetic).
    assert ec.co2_kg(100.0, 0.4) == pytest.approx(40.0)


def test_horizon_beyond_floating_point_is_named():
    """Rates each usable, whose combination over a long life leaves float64.

    Year n's present-worth factor is (1 + r)**-n (textbook P/F, Sullivan et al.); at
    r = -45 %/year and n = 1000 it is 0.55**-1000 = e**597.8 ~ 1e260, beyond the bound kept
    for costs (float64 max ~1.8e308, IEEE 754).
    """
    from fleetpower.economics import horizon_problem

    why = horizon_problem(-0.45, 0.0, 1000)
    assert why and "-45.0%" in why and "1000 years" in why and "1e260" in why
    assert horizon_problem(0.06, 0.02, 10) is None
    assert horizon_problem(-0.45, 0.0, 10) is None  # 0.55**-10 ~ 400: fine
    assert horizon_problem(0.05, 0.99, 2000)  # the nominal cost alone: 1.99**1999
    with pytest.raises(ValueError, match="too large to represent"):
        ec.lifetime_cost(1.0, 1.0, -0.45, 1000)


def test_each_years_factor_is_taken_whole():
    """(1 + g)**(k-1) / (1 + r)**k at r = -45 %, g = -20 % and k = 1300: the discount part
    alone is 0.55**-1300 = e**777 (beyond float64), the product e**(1299 ln 0.8 - 1300 ln
    0.55) = e**487.3 is not; the last discounted cost is that product (closed form,
    computed in logs with the standard library)."""
    import math

    df = ec.lifetime_cost(0.0, 1.0, -0.45, 1300, -0.2)
    last = float(df["cost_discounted"].iloc[-1])
    expect = math.exp(1299 * math.log1p(-0.2) - 1300 * math.log1p(-0.45))
    assert math.isfinite(last) and last == pytest.approx(expect, rel=1e-12)


def test_horizon_problem_named_where_the_rate_came_from(tmp_path, capsys):
    """From the command line: --rate is named; exit 2, one line (README "Bad input")."""
    from fleetpower.cli import main

    code = main(["compare", "examples/harbour-office.toml", "--design",
                 "examples/desk-sensor-smps-230.toml", "--rate", "-0.45", "--years", "1000"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2 and len(err) == 1 and "--rate" in err[0] and "represent" in err[0]
