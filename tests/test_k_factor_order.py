"""The K-factor states the highest order it sums and warns when orders above it matter.

Closed-form Fourier series (any table of Fourier series, e.g. Kreyszig, *Advanced
Engineering Mathematics*, ch. 11): a square wave has odd harmonics I_h = I_1 / h, a
triangle wave I_h = I_1 / h^2. K = sum I_h^2 h^2 / sum I_h^2 (UL 1561, IEEE C57.110, from
memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from tolerances import REL_EXACT

from fleetpower.pq.derating import K_MATERIAL_PCT, k_factor_to_order

H_TOP = 1023  # spectrum to order 1023, as an FFT of 2048 samples per cycle gives


def _odd(power: float) -> np.ndarray:
    s = np.zeros(H_TOP + 1, dtype=complex)
    h = np.arange(1, H_TOP + 1, 2)
    s[h] = 1.0 / h**power
    return s


def test_square_wave_k_factor_is_stated_to_order_50_and_flagged():
    # Square wave: every odd order adds I_1^2 to sum I_h^2 h^2, so K summed to 49 is
    # 25 / sum_{odd h<=49} 1/h^2 = 25 / 1.2236 = 20.43, and to 1023 it is
    # 512 / sum_{odd h<=1023} 1/h^2 = 415.2: the orders above 50 carry under 1 % of the
    # squared current (sum_{odd h>50} 1/h^2 ~ 1/100 of pi^2/8) but raise K twenty-fold.
    r = k_factor_to_order(_odd(1), 50)
    s49 = sum(1 / h**2 for h in range(1, 50, 2))
    s_all = sum(1 / h**2 for h in range(1, H_TOP + 1, 2))
    assert r.h_max == 50 and r.h_available == H_TOP
    assert r.k_factor == pytest.approx(25 / s49, rel=REL_EXACT)
    assert r.above_energy_pct == pytest.approx(100 * (s_all - s49) / s_all, rel=REL_EXACT)
    assert r.above_energy_pct < 1.0
    assert r.above_k_pct == pytest.approx(100 * ((512 / s_all) / (25 / s49) - 1), rel=REL_EXACT)
    assert r.material


def test_triangle_wave_k_factor_converges_and_is_not_flagged():
    # Triangle wave: K = sum 1/h^2 / sum 1/h^4 over odd h -> (pi^2/8) / (pi^4/96) = 12/pi^2
    # = 1.2159; the orders above 50 add about 0.8 %, under the stated threshold.
    r = k_factor_to_order(_odd(2), 50)
    assert r.k_factor == pytest.approx(12 / math.pi**2, rel=0.01)
    assert 0 < r.above_k_pct < K_MATERIAL_PCT
    assert not r.material
