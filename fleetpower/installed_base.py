"""Installed base of a product line: units in service per year, and what they draw.

Pure arithmetic on numpy arrays; nothing here simulates, reads files or renders.

Retirement rule (fixed service life)
------------------------------------
A unit sold in year ``s`` (index 0 = the first year of sales) is in service for the whole
of years ``s, s + 1, ..., s + L - 1`` and is retired at the end of year ``s + L - 1``,
where ``L`` is the model's service life in whole years. No unit fails early, none lasts
longer, and a unit counts as in service for the whole of the year it is sold in (it is a
year-end census). So the units in service in year ``y`` are the sales of the ``L`` years
up to and including ``y``:

.. math:: N_y = \\sum_{s = \\max(0, y - L + 1)}^{y} S_s .

Owns: :func:`units_in_service`, :func:`retirements`, :func:`annual_energy_per_unit_kwh`,
:func:`installed_base_energy_kwh`. May import numpy only.
"""

from __future__ import annotations

import numpy as np

#: hours in a (non-leap) year, the billing year of :mod:`fleetpower.economics`
HOURS_PER_YEAR = 8760.0
DAYS_PER_YEAR = 365.0


def units_in_service(sales_per_year, service_life_years: int, horizon_years: int) -> np.ndarray:
    """Units in service in each year under a fixed service life.

    Parameters
    ----------
    sales_per_year : array_like, shape (n,)
        Units sold in years 0..n-1 [unit/year], >= 0. Years past ``n`` sell nothing.
    service_life_years : int
        Service life L [year], >= 1.
    horizon_years : int
        Number of years reported, from year 0 [year], >= 0.

    Returns
    -------
    numpy.ndarray of float, shape (horizon_years,)
        :math:`N_y = \\sum_{s=\\max(0, y-L+1)}^{y} S_s` [unit].

    Notes
    -----
    The sum is the convolution of the sales with a box of L ones (each cohort is counted
    in the L years starting with its year of sale), truncated to the horizon. With
    constant sales S from year 0 the base grows by S a year until year L - 1 and then
    stays at L S, where sales and retirements balance.

    References
    ----------
    .. [1] The stock-and-flow (vintage) model of an installed base with a fixed lifetime:
       every cohort survives exactly L years (common practice in appliance stock models,
       no source; a survival curve would replace the box of ones).
    """
    s = np.asarray(sales_per_year, dtype=float)
    if s.ndim != 1:
        raise ValueError("sales_per_year must be one-dimensional")
    if np.any(s < 0) or not np.all(np.isfinite(s)):
        raise ValueError("sales cannot be negative or non-finite")
    life = int(service_life_years)
    if life < 1:
        raise ValueError("service life must be at least one year")
    horizon = int(horizon_years)
    if horizon < 0:
        raise ValueError("horizon cannot be negative")
    padded = np.zeros(max(horizon, s.size))
    padded[: s.size] = s
    base = np.convolve(padded, np.ones(life))[: padded.size]
    return base[:horizon]


def retirements(sales_per_year, service_life_years: int, horizon_years: int) -> np.ndarray:
    """Units retired at the end of each year [unit]: the cohort sold L - 1 years before.

    Notes
    -----
    Stock balance: :math:`N_y = N_{y-1} + S_y - R_{y-1}`, with
    :math:`R_y = S_{y-L+1}` (zero before the first cohort).
    """
    s = np.asarray(sales_per_year, dtype=float)
    life = int(service_life_years)
    horizon = int(horizon_years)
    out = np.zeros(horizon)
    for y in range(horizon):
        k = y - life + 1
        if 0 <= k < s.size:
            out[y] = s[k]
    return out


def annual_energy_per_unit_kwh(p_w_by_state, occupancy) -> float:
    """Energy one unit draws from the mains in a year [kWh].

    Parameters
    ----------
    p_w_by_state : array_like, shape (n_states,)
        Real input power in each state [W].
    occupancy : array_like, shape (24, n_states)
        Share of each hour of the day spent in each state [-] (rows sum to 1), as built by
        the fleet file's occupancy (hours per state spread evenly, or a 24-hour profile).

    Returns
    -------
    float
        :math:`E = 365 \\sum_{t=0}^{23} \\sum_s o_{t,s} P_s / 1000` [kWh].

    Notes
    -----
    Each hour of the day contributes :math:`\\sum_s o_{t,s} P_s` watt-hours; a day is the
    sum over the 24 hours and a year is 365 such days. With hours per state :math:`h_s`
    (so :math:`o_{t,s} = h_s / 24`) this is :math:`365 \\sum_s h_s P_s / 1000`.

    References
    ----------
    .. [1] Energy as power integrated over time, the definition of the kilowatt-hour
       (SI Brochure, 9th ed., Table 8: 1 kWh = 3.6 MJ).
    """
    p = np.asarray(p_w_by_state, dtype=float)
    occ = np.asarray(occupancy, dtype=float)
    if occ.ndim != 2 or occ.shape[1] != p.size:
        raise ValueError("occupancy must be (24, n_states) matching the powers")
    return float(DAYS_PER_YEAR * np.sum(occ @ p) / 1000.0)


def installed_base_energy_kwh(units, energy_per_unit_kwh: float) -> np.ndarray:
    """Energy of an installed base in each year [kWh]: units in service x energy per unit.

    Notes
    -----
    Every unit in service in year y runs the whole year (the year-end census above), so
    :math:`E_y = N_y \\, e` with e from :func:`annual_energy_per_unit_kwh`.
    """
    return np.asarray(units, dtype=float) * float(energy_per_unit_kwh)


__all__ = ["units_in_service", "retirements", "annual_energy_per_unit_kwh",
           "installed_base_energy_kwh", "HOURS_PER_YEAR", "DAYS_PER_YEAR"]
