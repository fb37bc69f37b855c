"""Installed-base arithmetic against cases worked by hand in the comments.

Source of the method: the fixed-service-life stock model documented in
fleetpower/installed_base.py (common practice in appliance stock models, no source), and
energy = power x time (SI Brochure, 9th ed., 1 kWh = 1000 W x 3600 s).
"""

from __future__ import annotations

import numpy as np
import pytest

from fleetpower.installed_base import (
    annual_energy_per_unit_kwh,
    installed_base_energy_kwh,
    retirements,
    units_in_service,
)


def test_units_in_service_by_hand():
    # sales 100, 200, 300 in years 0..2, life 2 years: a unit sold in year s serves in
    # years s and s+1.  year 0: 100; year 1: 100 + 200 = 300; year 2: 200 + 300 = 500;
    # year 3: 300 (the year-2 cohort's second year); year 4: 0.
    n = units_in_service([100, 200, 300], 2, 5)
    np.testing.assert_array_equal(n, [100, 300, 500, 300, 0])


def test_constant_sales_plateau_at_life_times_sales():
    # constant S from year 0 with life L: the base grows by S a year to L*S in year L-1
    # and stays there while sales continue (sales and retirements balance).
    n = units_in_service(np.full(10, 7.0), 4, 10)
    np.testing.assert_array_equal(n, [7, 14, 21, 28, 28, 28, 28, 28, 28, 28])


def test_stock_balance_holds_every_year():
    # N_y = N_{y-1} + S_y - R_{y-1}: nothing appears or vanishes
    rng = np.random.default_rng(12)
    sales = rng.integers(0, 1000, 6).astype(float)
    life, horizon = 3, 11
    n = units_in_service(sales, life, horizon)
    r = retirements(sales, life, horizon)
    s = np.zeros(horizon)
    s[: sales.size] = sales
    prev_n, prev_r = 0.0, 0.0
    for y in range(horizon):
        assert n[y] == pytest.approx(prev_n + s[y] - prev_r)
        prev_n, prev_r = n[y], r[y]
    assert r.sum() == pytest.approx(sales.sum())  # every unit sold is retired in the horizon


def test_annual_energy_by_hand():
    # 1.5 W for 4 h and 0.5 W for 20 h a day: 6 Wh + 10 Wh = 16 Wh/day;
    # x 365 = 5840 Wh = 5.84 kWh a year
    occ = np.zeros((24, 2))
    occ[:, 0] = 4 / 24
    occ[:, 1] = 20 / 24
    assert annual_energy_per_unit_kwh([1.5, 0.5], occ) == pytest.approx(5.84, rel=1e-12)
    # the same hours as a 24-hour profile (active 08:00-12:00) give the same energy
    prof = np.zeros((24, 2))
    prof[:, 1] = 1.0
    prof[8:12] = [1.0, 0.0]
    assert annual_energy_per_unit_kwh([1.5, 0.5], prof) == pytest.approx(5.84, rel=1e-12)


def test_installed_base_energy_is_units_times_hours_times_power():
    # sum of units x sum of hours x power: sales 1000 then 2000, life 2: units 1000,
    # 3000, 2000 (6000 unit-years); always in one 0.4 W state: 0.4 x 8760 = 3.504 kWh a
    # unit-year; total 6000 x 3.504 = 21024 kWh
    units = units_in_service([1000, 2000], 2, 3)
    e_unit = annual_energy_per_unit_kwh([0.4], np.ones((24, 1)))
    e = installed_base_energy_kwh(units, e_unit)
    np.testing.assert_allclose(e, [3504.0, 10512.0, 7008.0])
    assert e.sum() == pytest.approx(21024.0)


@pytest.mark.parametrize("sales, life, horizon", [([-1.0], 2, 3), ([1.0], 0, 3),
                                                  ([1.0], 2, -1), ([np.nan], 2, 2)])
def test_bad_arguments_are_refused(sales, life, horizon):
    with pytest.raises(ValueError):
        units_in_service(sales, life, horizon)
