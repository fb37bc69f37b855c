"""Monte Carlo sampling and corners of toleranced parts, against outside statistics.

Sources are named beside each check: the Dvoretzky-Kiefer-Wolfowitz inequality for the
empirical distribution, scipy.stats for the reference distributions, the charge-pump
closed form for a monotone output.
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pytest
from scipy import stats

from fleetpower.executors import chunk_ranges, local_executor
from fleetpower.spread.ageing import charge_pump_current_a
from fleetpower.spread.sampling import (
    corner_values,
    monte_carlo_chunk,
    monte_carlo_values,
    sample_uniforms,
)
from fleetpower.spread.statistics import SpreadStatistics
from fleetpower.spread.tolerance import PartSpread

#: probability that a correct sampler fails a DKW check (the runs are seeded, so a pass
#: is reproducible; this only sizes the band honestly)
DKW_ALPHA = 1e-6


def dkw_epsilon(n: int, alpha: float = DKW_ALPHA) -> float:
    """Half-width of the DKW confidence band of an empirical CDF of ``n`` samples.

    P(sup |F_n - F| > eps) <= 2 exp(-2 n eps^2) (Dvoretzky, Kiefer & Wolfowitz 1956,
    Ann. Math. Statist. 27, 642-669; the constant 2 is Massart 1990, Ann. Probab. 18,
    1269-1283), so eps = sqrt(ln(2 / alpha) / (2 n)).
    """
    return math.sqrt(math.log(2.0 / alpha) / (2.0 * n))


C_SERIES = PartSpread("parts.series_capacitance", 470e-9, "uniform", 0.10)
V_ZENER = PartSpread("parts.zener_voltage", 10.0, "normal", 0.05)  # band = 3 sigma
V_MAINS = PartSpread("mains.voltage", 230.0, "uniform", 0.10)


def test_linear_output_percentiles_match_uniform_quantiles_within_dkw():
    # Output linear in one uniformly distributed part: the charge-pump current
    # f C (2 Vpk - Vz - Vf) at fixed mains and zener is b * C.
    n = 20_000
    c = monte_carlo_values([C_SERIES], seed=2026, start=0, stop=n)[:, 0]
    b = 50.0 * (2 * 230 * math.sqrt(2) - 10.0 - 0.7)
    out = charge_pump_current_a(50.0, c, 230 * math.sqrt(2), 10.0, 0.7)
    np.testing.assert_allclose(out, b * c, rtol=1e-12)  # linear, as stated
    stats_ = SpreadStatistics()
    stats_.add(0, {"i_pump_a": out})
    table = stats_.percentiles((5, 50, 95)).loc["i_pump_a"]
    lo, hi = b * C_SERIES.low, b * C_SERIES.high
    eps = dkw_epsilon(n)
    for p in (5, 50, 95):
        # analytic quantile of U(lo, hi): lo + p (hi - lo) (any probability text); under
        # the DKW event the empirical p-quantile lies within F^-1(p -+ (eps + 1/n))
        exact = lo + p / 100 * (hi - lo)
        assert abs(table[f"p{p}"] - exact) <= (eps + 1.0 / n) * (hi - lo), p
    # and the whole empirical CDF: Kolmogorov-Smirnov distance within the DKW band
    d = stats.kstest(out, stats.uniform(loc=lo, scale=hi - lo).cdf).statistic
    assert d <= eps
    assert table["max"] <= hi and table["min"] >= lo


def test_normal_declaration_is_normal_with_band_at_three_sigma():
    n = 20_000
    v = monte_carlo_values([V_ZENER], seed=11, start=0, stop=n)[:, 0]
    ref = stats.norm(loc=10.0, scale=10.0 * 0.05 / 3.0)  # band 5 % = 3 sigma (declared)
    # DKW against scipy's normal CDF
    assert stats.kstest(v, ref.cdf).statistic <= dkw_epsilon(n)
    # a 1-sigma misreading of the band would be caught by the same check
    wrong = stats.norm(loc=10.0, scale=10.0 * 0.05)
    assert stats.kstest(v, wrong.cdf).statistic > dkw_epsilon(n)


def test_corner_list_draws_each_value_equally():
    s = PartSpread("parts.series_resistance", 47.0, "corners", corners=(44.65, 47.0, 49.35))
    n = 30_000
    v = monte_carlo_values([s], seed=5, start=0, stop=n)[:, 0]
    assert set(np.unique(v)) == {44.65, 47.0, 49.35}
    # empirical CDF at each step within the DKW band of the discrete uniform (DKW holds
    # for any distribution, Massart 1990)
    eps = dkw_epsilon(n)
    assert abs(np.mean(v <= 44.65) - 1 / 3) <= eps
    assert abs(np.mean(v <= 47.0) - 2 / 3) <= eps


def test_corners_bracket_every_monte_carlo_sample_of_a_monotone_output():
    # charge-pump current rises with C and with the mains peak, falls with V_Z
    # (closed form f C (2 Vpk - Vz - Vf), fleetpower.spread.ageing)
    spreads = [C_SERIES, V_ZENER, V_MAINS]
    corners, labels = corner_values(spreads)
    assert len(corners) == 2**3 and len(labels) == 8
    assert labels[0] == "series_capacitance low, zener_voltage low, mains.voltage low"

    def pump(values):
        c, vz, vrms = values[:, 0], values[:, 1], values[:, 2]
        return charge_pump_current_a(50.0, c, vrms * math.sqrt(2), vz, 0.7)

    at_corners = pump(corners)
    samples = pump(monte_carlo_values(spreads, seed=99, start=0, stop=5000))
    assert samples.min() >= at_corners.min()
    assert samples.max() <= at_corners.max()
    # the extremes are the corners monotonicity predicts
    assert labels[int(np.argmin(at_corners))] == \
        "series_capacitance low, zener_voltage high, mains.voltage low"
    assert labels[int(np.argmax(at_corners))] == \
        "series_capacitance high, zener_voltage low, mains.voltage high"


def test_corner_cap_is_a_clear_input_error():
    from fleetpower.errors import InputError

    many = [PartSpread(f"parts.p{i}", 1.0, "uniform", 0.1) for i in range(13)]
    with pytest.raises(InputError, match=r"2\^13 = 8192 corners"):
        corner_values(many, file="d.toml")
    # parts that do not vary are not counted
    fixed = [PartSpread(f"parts.q{i}", 1.0, "uniform", 0.0) for i in range(20)]
    values, labels = corner_values(fixed + many[:2])
    assert values.shape == (4, 22)


def test_seeded_runs_are_reproducible_bit_for_bit_and_independent_of_chunking():
    spreads = [C_SERIES, V_ZENER, V_MAINS]
    whole = monte_carlo_values(spreads, seed=42, start=0, stop=1000)
    again = monte_carlo_values(spreads, seed=42, start=0, stop=1000)
    assert whole.tobytes() == again.tobytes()
    for size in (1, 7, 128, 1000, 4096):
        work = functools.partial(monte_carlo_chunk, spreads, 42)
        parts = local_executor(work, chunk_ranges(1000, size))
        assert np.concatenate(parts).tobytes() == whole.tobytes(), size
    # out-of-order chunks land by index
    s = SpreadStatistics()
    for a, b in reversed(chunk_ranges(1000, 300)):
        s.add(a, {"c_f": monte_carlo_values(spreads, 42, a, b)[:, 0]})
    assert s.values("c_f").tobytes() == whole[:, 0].tobytes()
    assert s.n_samples == 1000
    # another seed gives other samples; adding a part leaves earlier columns unchanged
    assert not np.array_equal(monte_carlo_values(spreads, 43, 0, 1000), whole)
    np.testing.assert_array_equal(monte_carlo_values(spreads[:1], 42, 0, 1000)[:, 0],
                                  whole[:, 0])


def test_sample_stream_is_numpy_seedsequence_spawn():
    # sample i uses the stream SeedSequence(seed).spawn hands its i-th child (numpy,
    # "Parallel random number generation")
    children = np.random.SeedSequence(8).spawn(5)
    ref = np.array([np.random.Generator(np.random.PCG64(c)).random(3) for c in children])
    np.testing.assert_array_equal(sample_uniforms(8, 0, 5, 3), ref)


def test_failure_fractions_and_worst_sample():
    s = SpreadStatistics()
    s.add(10, {"p_w": np.array([0.2, 0.5, 0.3])}, {"p_limit": np.array([False, True, False])})
    s.add(0, {"p_w": np.array([0.1, 0.4])}, {"p_limit": np.array([False, True])})
    assert s.failure_fractions()["p_limit"] == pytest.approx(2 / 5)  # counted by hand
    assert s.worst("p_w") == (11, 0.5)
    assert s.worst("p_w", largest=False) == (0, 0.1)
    assert s.alike("p_w") == 1
    # numpy's percentile of the same five values (linear interpolation, Hyndman-Fan 7)
    assert s.percentiles().loc["p_w", "p50"] == np.percentile([0.1, 0.4, 0.2, 0.5, 0.3], 50)
    with pytest.raises(ValueError):
        s.add(0, {"p_w": np.array([1.0])})
    # units equal to rounding (1e-13 apart): the first is named, the others counted alike
    s.add(20, {"p_w": np.array([0.5 * (1 + 1e-13), 0.5 - 1e-6])},
          {"p_limit": np.array([True, False])})
    assert s.worst("p_w") == (20, 0.5 * (1 + 1e-13)) and s.alike("p_w") == 2


def test_flags_keep_their_meaning_whatever_order_chunks_arrive_in():
    """A flag a chunk does not carry counts as not failing for that chunk's samples (the
    fraction is over every sample recorded, counted by hand), and the order of figures and
    flags is that of sample index, not of arrival (same seed, same report, any worker)."""
    chunks = [(0, {"a": np.array([1.0, 2.0])}, {"x": np.array([True, False])}),
              (2, {"b": np.array([3.0, 4.0]), "a": np.array([5.0, 6.0])},
               {"y": np.array([True, True]), "x": np.array([False, False])})]
    orders = []
    for arrival in (chunks, chunks[::-1]):
        s = SpreadStatistics()
        for c in arrival:
            s.add(*c)
        f = s.failure_fractions()
        assert f["x"] == pytest.approx(1 / 4) and f["y"] == pytest.approx(2 / 4)
        orders.append((list(s.percentiles().index), list(f.index)))
    assert orders[0] == orders[1] == (["a", "b"], ["x", "y"])
