"""Life-cycle economics of a fleet: energy, demand, reactive and carbon cost over a life.

All functions are pure; nothing is global.

Conventions
-----------
* Money is in one arbitrary currency, named ``cost`` (no unit suffix: the currency is the
  user's). Prices carry their billing unit: ``price_per_kwh``, ``price_per_kvarh``,
  ``price_per_kw_month``.
* Rates are fractions per year: ``0.05`` is 5 %/year.
* **Timing** (end-of-year convention): the purchase is paid at year 0; the running cost of
  year ``k`` (``k = 1..n``) is paid at the end of year ``k`` and discounted by
  ``(1 + r)**-k``.
* **Escalation**: the running cost given is the cost of year 1; year ``k`` costs
  ``A_1 (1 + g)**(k - 1)``. If a price is quoted at today's (year-0) level and already
  rises during year 1, multiply it by ``(1 + g)`` first.
* Consumer sign for power: ``P > 0`` drawn from the mains; ``Q > 0`` lagging (inductive),
  ``Q < 0`` leading (capacitive).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = [
    "Payback",
    "present_value_factor",
    "annuity_factor",
    "escalated_annuity_factor",
    "lifetime_cost",
    "payback_year",
    "annual_energy_kwh",
    "energy_cost",
    "energy_cost_from_kwh",
    "demand_cost",
    "reactive_energy_cost",
    "co2_kg",
    "rate_problem",
    "life_problem",
    "horizon_problem",
]


#: lowest usable rate [1/year]: at -50 %/year a year's present worth doubles year on year;
#: no tariff trend or cost of capital comes near it (common practice, no source)
RATE_MIN = -0.5


def rate_problem(rate_per_year: float) -> str | None:
    """Why a discount or escalation rate is not usable, or None when it is.

    Parameters
    ----------
    rate_per_year : float
        Rate as a fraction per year [1/year] (0.06 is 6 %/year).

    Returns
    -------
    str or None
        A short reason: not finite; at or below -100 %/year (the discount factor
        ``(1 + r)**-k`` is undefined or changes sign there); or 100 %/year or more, which
        is almost certainly a percentage written as a whole number (6 for 6 %).

    Notes
    -----
    The bounds are this project's reading of "absurd": a rate of 1.0 doubles money every
    year, one of -0.5 doubles a year's present worth year on year; no utility tariff or
    cost of capital comes near either (common practice, no source). Rates between -50 %
    and 0 are accepted (falling energy prices, negative real rates).
    """
    r = float(rate_per_year)
    if not np.isfinite(r):
        return f"must be a finite number, got {rate_per_year!r}"
    if r <= -1.0:
        return f"{r:g} is -100 %/year or less; give a rate as a fraction above -1"
    if r <= RATE_MIN:
        return (f"{r:g} is {RATE_MIN:.0%}/year or less: each year would be worth at least "
                "twice the one before; give a rate as a fraction above "
                f"{RATE_MIN:g} (e.g. -0.02 for prices falling 2 % a year)")
    if r >= 1.0:
        return (f"{r:g} means {r * 100:g} %/year; give a rate as a fraction "
                f"({r:g} % is {r / 100:g})")
    return None


def life_problem(years: float) -> str | None:
    """Why a service life is not usable (must be a whole number of years >= 1), or None."""
    y = float(years)
    if not np.isfinite(y) or y < 1 or not y.is_integer():
        return f"must be a whole number of years, at least 1, got {years!r}"
    return None


#: the largest natural log of a year's present-worth factor (1 + g)**(k-1) / (1 + r)**k
#: accepted: e**575 ~ 1e250 leaves room for costs up to 1e50 below the float64 maximum
#: (~1.8e308, IEEE 754) in sums of up to 1e8 years
LOG_FACTOR_MAX = 575.0


def horizon_problem(rate_per_year: float, escalation_per_year: float, years: int) -> str | None:
    """Why discounting at ``rate`` with ``escalation`` over ``years`` cannot be represented,
    or None when it can.

    Each rate may be usable (:func:`rate_problem`) and yet their combination over a long
    life give present-worth factors beyond floating point: -98 %/year over 168 years
    multiplies the last year's cost by 50**168 ~ 1e285.

    Notes
    -----
    The factor of year k is ``(1 + g)**(k-1) (1 + r)**-k``; its natural log is linear in k,
    so its largest magnitude over k = 1..n is at k = 1 or k = n. Both are checked against
    :data:`LOG_FACTOR_MAX`, and so is the undiscounted escalation ``(1 + g)**(n-1)`` (the
    nominal cost column). :func:`lifetime_cost` takes each year's factor whole, in logs, so
    its two parts may each be beyond floating point.
    """
    r, g, n = float(rate_per_year), float(escalation_per_year), int(years)
    if rate_problem(r) or rate_problem(g) or n < 1:
        return None  # told apart by rate_problem / life_problem
    # the discounted factor of year 1 or n, and the undiscounted escalation of year n
    worst = max(*(abs((k - 1) * np.log1p(g) - k * np.log1p(r)) for k in (1, n)),
                abs((n - 1) * np.log1p(g)))
    if worst > LOG_FACTOR_MAX:
        return (f"discounting at {r:.1%} a year with energy {g:+.1%} a year over {n} years "
                f"scales a year's cost by about 1e{worst / np.log(10):.0f}, too large to "
                "represent; check the rates and the life")
    return None


def _check_rate(rate_per_year) -> np.ndarray:
    r = np.asarray(rate_per_year, dtype=float)
    if np.any(r <= -1.0):
        raise ValueError("rates must be greater than -1 (i.e. -100 %/year)")
    return r


def present_value_factor(rate_per_year, years) -> np.ndarray:
    """Single-payment present-worth factor (P/F).

    Parameters
    ----------
    rate_per_year : float or array_like
        Discount rate [1/year], > -1.
    years : float or array_like
        Time from now to the payment [year].

    Returns
    -------
    numpy.ndarray of float
        ``(1 + r)**-n`` [-].

    Notes
    -----
    A sum F paid n years from now is worth ``P = F (1 + r)**-n`` today, because P invested
    at rate r grows to F. Computed as ``exp(-n log1p(r))`` for accuracy at small r.

    References
    ----------
    .. [1] Standard single-payment present-worth factor; e.g. W. G. Sullivan, E. M. Wicks,
       C. P. Koelling, *Engineering Economy*, Pearson (compound interest factors).
    """
    r = _check_rate(rate_per_year)
    n = np.asarray(years, dtype=float)
    return np.exp(-n * np.log1p(r))


def annuity_factor(rate_per_year, years) -> np.ndarray:
    """Uniform-series present-worth factor (P/A).

    Parameters
    ----------
    rate_per_year : float or array_like
        Discount rate [1/year], > -1.
    years : int or array_like of int
        Number of equal end-of-year payments [year], >= 0.

    Returns
    -------
    numpy.ndarray of float
        ``((1 + r)**n - 1) / (r (1 + r)**n)`` [year]; exactly ``n`` at ``r = 0``.

    Notes
    -----
    ``sum_{k=1..n} (1 + r)**-k`` is a geometric series with ratio ``x = 1/(1 + r)``:
    ``x (1 - x**n) / (1 - x) = (1 - (1 + r)**-n) / r``, identical to the form above.
    It is evaluated as ``-expm1(-n log1p(r)) / r``, which keeps full precision near
    r = 0; r = 0 itself is taken from the limit ``n`` with no division by zero.

    References
    ----------
    .. [1] Standard uniform-series present-worth factor; e.g. Sullivan, Wicks, Koelling,
       *Engineering Economy* (compound interest tables).
    """
    r = _check_rate(rate_per_year)
    n = np.asarray(years, dtype=float)
    if np.any(n < 0):
        raise ValueError("years must not be negative")
    zero = r == 0.0
    r_safe = np.where(zero, 1.0, r)
    general = -np.expm1(-n * np.log1p(r_safe)) / r_safe
    return np.where(zero, n, general)


def escalated_annuity_factor(rate_per_year, escalation_per_year, years) -> np.ndarray:
    """Present-worth factor of a geometrically escalating series (P/A1, g, r, n).

    Parameters
    ----------
    rate_per_year : float or array_like
        Discount rate r [1/year], > -1.
    escalation_per_year : float or array_like
        Escalation g of the running cost [1/year], > -1.
    years : int or array_like of int
        Number of end-of-year payments n [year], >= 0.

    Returns
    -------
    numpy.ndarray of float
        Present worth of payments ``(1 + g)**(k - 1)``, ``k = 1..n`` [year].

    Notes
    -----
    ``PW = sum_{k=1..n} (1 + g)**(k-1) / (1 + r)**k
    = 1/(1 + r) * sum_{m=0..n-1} x**m`` with ``x = (1 + g)/(1 + r)``
    ``= (1 - x**n) / (r - g)`` for r != g (using ``(1 + r)(1 - x) = r - g``)
    ``= n / (1 + r)`` for r == g.
    The first payment is at the end of year 1 and equals A_1 (not ``A_1 (1 + g)``). The
    geometric sum is evaluated as ``expm1(n log x) / expm1(log x)``, exact at x = 1 by its
    limit n, and accurate when r is close to g. With g = 0 it reduces to
    :func:`annuity_factor`.

    References
    ----------
    .. [1] Standard geometric-gradient series present-worth factor; e.g. Sullivan, Wicks,
       Koelling, *Engineering Economy* (geometric gradient).
    """
    r = _check_rate(rate_per_year)
    g = _check_rate(escalation_per_year)
    n = np.asarray(years, dtype=float)
    if np.any(n < 0):
        raise ValueError("years must not be negative")
    log_x = np.log1p(g) - np.log1p(r)
    equal = log_x == 0.0
    log_x_safe = np.where(equal, 1.0, log_x)
    series = np.where(equal, n, np.expm1(n * log_x_safe) / np.expm1(log_x_safe))
    return series / (1.0 + r)


def lifetime_cost(
    purchase_cost: float,
    annual_cost,
    rate_per_year: float,
    years: int,
    escalation_per_year: float = 0.0,
) -> pd.DataFrame:
    """Year-by-year undiscounted and discounted cost of owning a design.

    Parameters
    ----------
    purchase_cost : float
        Cost paid at year 0 [cost].
    annual_cost : float or array_like, shape (years,)
        Running cost of year 1 (scalar), or of each year 1..n [cost/year]. The escalation
        is applied on top in both cases: year k is ``annual_cost_k (1 + g)**(k - 1)``.
    rate_per_year : float
        Discount rate [1/year].
    years : int
        Life [year], >= 0.
    escalation_per_year : float
        Escalation of the running cost [1/year]; default 0.

    Returns
    -------
    pandas.DataFrame
        Index ``year`` 0..n; columns ``cost`` (undiscounted, nominal), ``cost_cumulative``,
        ``cost_discounted``, ``cost_cumulative_discounted`` [cost].

    Notes
    -----
    ``C_0 = purchase``, ``C_k = A_k (1 + g)**(k-1)``; discounted ``C_k (1 + r)**-k``.
    The last cumulative discounted value is the life-cycle cost (net present cost); for a
    constant scalar A it equals ``purchase + A * escalated_annuity_factor(r, g, n)``.
    A combination of rates and life whose factors leave floating point
    (:func:`horizon_problem`) raises ValueError rather than giving infinities.

    References
    ----------
    .. [1] Present-worth analysis, e.g. Sullivan, Wicks, Koelling, *Engineering Economy*.
    """
    years = int(years)
    if years < 0:
        raise ValueError("years must not be negative")
    a = np.asarray(annual_cost, dtype=float)
    if a.ndim == 0:
        a = np.full(years, float(a))
    elif a.shape != (years,):
        raise ValueError(f"annual_cost must be a scalar or have {years} values")
    why = horizon_problem(rate_per_year, escalation_per_year, years)
    if why:
        raise ValueError(why)
    k = np.arange(1, years + 1)
    log_g = np.log1p(_check_rate(escalation_per_year))
    log_r = np.log1p(_check_rate(rate_per_year))
    with np.errstate(over="raise", invalid="raise"):
        running = a * np.exp((k - 1) * log_g)
        cost = np.concatenate([[float(purchase_cost)], running])
        # each year's factor (1 + g)**(k-1) / (1 + r)**k taken whole: its two parts may each
        # leave floating point (-98 %/year over 171 years: (1 + r)**-k ~ 1e309) while the
        # product does not
        discounted = np.concatenate([[float(purchase_cost)],
                                     a * np.exp((k - 1) * log_g - k * log_r)])
    return pd.DataFrame(
        {
            "cost": cost,
            "cost_cumulative": np.cumsum(cost),
            "cost_discounted": discounted,
            "cost_cumulative_discounted": np.cumsum(discounted),
        },
        index=pd.Index(np.arange(years + 1), name="year"),
    )


@dataclass(frozen=True)
class Payback:
    """Result of a payback search.

    Attributes
    ----------
    year : float or None
        Year at which the dearer-to-buy design's cumulative cost falls to the other's
        [year]; None if it never does within the life.
    dearer : str or None
        ``"a"`` or ``"b"``: which design costs more at year 0 (None if equal).
    reason : str
        One line explaining the result.
    """

    year: float | None
    dearer: str | None
    reason: str


def payback_year(cum_cost_a, cum_cost_b) -> Payback:
    """Payback year of the dearer-to-buy design against the cheaper one.

    Parameters
    ----------
    cum_cost_a, cum_cost_b : array_like, shape (n + 1,)
        Cumulative (discounted or not) cost at years 0..n [cost], year 0 = purchase.

    Returns
    -------
    Payback

    Notes
    -----
    Let ``d_k`` be the dearer design's cumulative cost minus the other's (``d_0 > 0``).
    The payback is the first year k with ``d_k <= 0``; if ``d_k == 0`` it is exactly k,
    otherwise the crossing is interpolated linearly within the year:
    ``t = (k - 1) + d_{k-1} / (d_{k-1} - d_k)``. Linear interpolation treats the year's
    running cost as spread evenly over the year (a departure from the end-of-year
    payment timing, which would put the crossing at k itself).

    References
    ----------
    .. [1] Simple/discounted payback period, e.g. Sullivan, Wicks, Koelling,
       *Engineering Economy*.
    """
    a = np.asarray(cum_cost_a, dtype=float)
    b = np.asarray(cum_cost_b, dtype=float)
    if a.shape != b.shape or a.ndim != 1 or a.size == 0:
        raise ValueError("both cumulative cost series must be 1-D and of equal length")
    if a[0] == b[0]:
        return Payback(0.0, None, "equal purchase cost: nothing to pay back")
    dearer = "a" if a[0] > b[0] else "b"
    d = (a - b) if dearer == "a" else (b - a)
    hits = np.flatnonzero(d <= 0.0)
    if hits.size == 0:
        return Payback(
            None,
            dearer,
            f"design {dearer} never recovers its higher purchase cost within {a.size - 1} years",
        )
    k = int(hits[0])
    if d[k] == 0.0:
        t = float(k)
    else:
        t = (k - 1) + d[k - 1] / (d[k - 1] - d[k])
    return Payback(float(t), dearer, f"design {dearer} pays back in year {t:.3g}")


def annual_energy_kwh(p_w, hours_per_year=8760.0) -> np.ndarray:
    """Energy drawn in a year by a constant load.

    Parameters
    ----------
    p_w : float or array_like
        Active power [W].
    hours_per_year : float
        Hours of operation [h/year]; default 8760 (365 days, always on).

    Returns
    -------
    numpy.ndarray of float
        ``p_w * hours / 1000`` [kWh/year].
    """
    return np.asarray(p_w, dtype=float) * np.asarray(hours_per_year, dtype=float) / 1000.0


def energy_cost_from_kwh(e_kwh, price_per_kwh) -> np.ndarray:
    """Cost of an energy at a flat price.

    Parameters
    ----------
    e_kwh : float or array_like
        Energy [kWh].
    price_per_kwh : float or array_like
        Price [cost/kWh].

    Returns
    -------
    numpy.ndarray of float
        ``e_kwh * price`` [cost].
    """
    return np.asarray(e_kwh, dtype=float) * np.asarray(price_per_kwh, dtype=float)


def energy_cost(p_w, price_per_kwh, days_per_year: float = 365.0) -> np.ndarray:
    """Annual energy cost with a flat or time-of-use (24 hourly bands) price.

    Parameters
    ----------
    p_w : float or array_like, shape (24,)
        Active power, constant or one mean value per hour of day 0..23 [W].
    price_per_kwh : float or array_like, shape (24,)
        Flat price or price of each hour of day 0..23 [cost/kWh].
    days_per_year : float
        Days billed [day/year]; default 365.

    Returns
    -------
    numpy.ndarray of float
        ``days * sum_{hour} p_kw[hour] * 1 h * price[hour]`` [cost/year].

    Notes
    -----
    The same daily profile is assumed every day of the year.
    """
    p = np.asarray(p_w, dtype=float)
    price = np.asarray(price_per_kwh, dtype=float)
    for name, arr in (("p_w", p), ("price_per_kwh", price)):
        if arr.ndim not in (0, 1) or (arr.ndim == 1 and arr.shape != (24,)):
            raise ValueError(f"{name} must be a scalar or 24 hourly values")
    daily_cost = np.sum(np.broadcast_to(p / 1000.0 * price, (24,)))
    return daily_cost * float(days_per_year)


def demand_cost(peak_demand_kw, price_per_kw_month, months: int = 12) -> np.ndarray:
    """Annual demand (capacity) charge.

    Parameters
    ----------
    peak_demand_kw : float or array_like, shape (months,)
        Billed peak demand, one value for every month or one per month [kW or kVA,
        whichever the tariff bills].
    price_per_kw_month : float or array_like
        Demand price [cost/(kW month)] in the same unit as the demand.
    months : int
        Months billed; default 12.

    Returns
    -------
    numpy.ndarray of float
        ``sum_months peak * price`` [cost/year].
    """
    peak = np.broadcast_to(np.asarray(peak_demand_kw, dtype=float), (months,))
    price = np.broadcast_to(np.asarray(price_per_kw_month, dtype=float), (months,))
    return np.sum(peak * price)


def reactive_energy_cost(q_var, hours, price_per_kvarh, bill: str = "magnitude") -> np.ndarray:
    """Cost of reactive energy.

    Parameters
    ----------
    q_var : float or array_like
        Fundamental reactive power of each interval [var] (consumer sign: lagging > 0,
        leading/capacitive < 0).
    hours : float or array_like
        Duration of each interval [h].
    price_per_kvarh : float
        Price [cost/kvarh].
    bill : {"magnitude", "lagging", "leading"}
        Which reactive energy the tariff bills: ``|Q|`` (default), only ``Q > 0``, or only
        ``Q < 0`` (billed as a positive quantity).

    Returns
    -------
    numpy.ndarray of float
        ``sum billed_kvar * hours * price`` [cost].
    """
    q = np.asarray(q_var, dtype=float)
    if bill == "magnitude":
        billed = np.abs(q)
    elif bill == "lagging":
        billed = np.clip(q, 0.0, None)
    elif bill == "leading":
        billed = np.clip(-q, 0.0, None)
    else:
        raise ValueError("bill must be 'magnitude', 'lagging' or 'leading'")
    return np.sum(billed / 1000.0 * np.asarray(hours, dtype=float)) * float(price_per_kvarh)


def co2_kg(e_kwh, intensity_kg_per_kwh) -> np.ndarray:
    """Emissions attributed to an energy.

    Parameters
    ----------
    e_kwh : float or array_like
        Energy [kWh].
    intensity_kg_per_kwh : float or array_like
        Emission intensity of the supply [kg CO2e/kWh].

    Returns
    -------
    numpy.ndarray of float
        ``e_kwh * intensity`` [kg CO2e].
    """
    return np.asarray(e_kwh, dtype=float) * np.asarray(intensity_kg_per_kwh, dtype=float)
