"""The zener clamp both droppers share: its engine fields, initial guess and bound.

Owns: the zener-clamp part of a dropper's engine row. Imports only the engine.
"""

from __future__ import annotations

import numpy as np

from ..engine import layout as L
from ..engine.devices import zener_knee


def zener_clamp_row(p: np.ndarray, parts, i_pk_limit_a: float | None) -> np.ndarray:
    """Fill the zener fields and the reservoir bound of a dropper; return the initial guess.

    ``p`` must already hold the series resistance, source and diode fields. The reservoir
    cannot exceed the zener's voltage at the largest current the series branch can pass
    (``i_pk_limit_a`` caps that current further, e.g. a series capacitor's).
    """
    vk, s = zener_knee(parts.zener_voltage, parts.zener_test_current, parts.zener_resistance)
    p[L.P_Z_VK], p[L.P_Z_S], p[L.P_Z_RZ] = vk, s, parts.zener_resistance
    p[L.P_ZF_IS] = p[L.P_D_IS]
    p[L.P_ZF_NVT] = p[L.P_D_NVT]
    vpk = p[L.P_VPK]
    i_pk = vpk / max(p[L.P_RSER] + p[L.P_RSRC], 1e-3)
    if i_pk_limit_a is not None:
        i_pk = min(i_pk, i_pk_limit_a)
    p[L.P_VO_MAX] = min(p[L.P_Z_VK] + 2.0 + p[L.P_Z_RZ] * i_pk, 1.05 * vpk)
    x0 = np.zeros(L.N_STATES)
    if p[L.P_RECT] == L.HALF_WAVE:
        x0[L.S_VO] = parts.zener_voltage - parts.diode.forward_voltage
    else:
        x0[L.S_VO] = parts.zener_voltage
    return x0


def check_output_below_zener(design) -> None:
    """The clamp feeds the regulator: its output must be below the zener voltage."""
    from ..errors import InputError

    if design.output.voltage >= design.parts.zener_voltage:
        raise InputError(
            design.source, "output.voltage",
            "must be below parts.zener_voltage (the clamp feeds it)"
        )
