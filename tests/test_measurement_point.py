"""Where the input power is measured: at the supply's terminals, after the mains' source
impedance (README "Where P is measured").

IEEE Std 1459-2010, 3.1.2.3: active power is the mean of v(t) i(t) over the cycle at the
point where voltage and current are measured. The supply's terminals see the source EMF
less the drop across the source resistance (Ohm's law, v_t = e - R_src i), so

    P_terminals = mean(e i) - R_src mean(i^2) = P_EMF - I_rms^2 R_src,

and the supply's own books (delivered + losses) balance P at the terminals, not at the EMF.
The EMF is rebuilt here from the design alone (e = sqrt(2) V sin(2 pi f t), the engine's
documented source), so the check does not read the engine's own voltage probe.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from conftest import load_example

from fleetpower.io.design_file import design_from_dict
from fleetpower.simulate import simulate


def _lobby(r_src: str):
    data = load_example("lobby-bridge-dropper")
    data["mains"]["source_resistance"] = r_src
    return design_from_dict(data)


@pytest.mark.parametrize("r_src_ohm", [0.4, 40.0])
def test_power_is_measured_at_the_terminals(r_src_ohm):
    d = _lobby(f"{r_src_ohm} ohm")
    (r,) = simulate(d, ["measuring"], (1.0,))
    emf = math.sqrt(2.0) * 230.0 * np.sin(2.0 * math.pi * 50.0 * r.t_s)
    i = r.i_a
    # the voltage reported is the terminals': EMF less R_src i (Ohm's law)
    np.testing.assert_allclose(r.v_v, emf - r_src_ohm * i, atol=1e-9 * 325.0)
    p_emf = float(np.mean(emf * i))
    i_rms = float(np.sqrt(np.mean(i * i)))
    # P_terminals = P_EMF - I_rms^2 R_src (derived in the module docstring)
    assert r.pq.p_w == pytest.approx(p_emf - i_rms**2 * r_src_ohm, rel=1e-9)
    assert r.pq.p_w < p_emf  # not the EMF's figure: the difference is I^2 R_src > 0
    assert r.balance.source_resistance_w == pytest.approx(i_rms**2 * r_src_ohm, rel=1e-3)
    # the supply's books close on P at the terminals (energy conservation; the project's
    # 0.5 % acceptance tolerance), the source resistance's loss not among them
    books = r.balance.delivered_w + r.balance.losses_w
    assert books == pytest.approx(r.pq.p_w, rel=5e-3)
    assert abs(r.balance.residual_pct) < 0.5
    # the rms voltage at the terminals is the waveform's own (IEEE 1459 rms definition)
    assert r.pq.v_rms_v == pytest.approx(float(np.sqrt(np.mean(r.v_v**2))), rel=1e-9)


def test_a_larger_source_resistance_moves_p_by_i_squared_r():
    # with 40 ohm in the mains the difference between the EMF's and the terminals' P is
    # large enough to matter (tens of mW), so a reading at the wrong point cannot pass
    (r,) = simulate(_lobby("40 ohm"), ["measuring"], (1.0,))
    emf = math.sqrt(2.0) * 230.0 * np.sin(2.0 * math.pi * 50.0 * r.t_s)
    gap = float(np.mean(emf * r.i_a)) - r.pq.p_w
    assert gap > 1e-3 * r.pq.p_w
    assert gap == pytest.approx(40.0 * r.pq.i_rms_a**2, rel=1e-9)
