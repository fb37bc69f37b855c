"""The numeric layout of the engine: the ONLY home of parameter, state and probe indices.

A circuit variant is one row of ``N_PARAMS`` floats (the *engine row*); its unknowns are
four (``N_STATES``); at every sample the engine records ``N_PROBES`` instantaneous
quantities. The compiled kernels (:mod:`fleetpower.engine.circuits`,
:mod:`fleetpower.engine.solver`) and the topology modules (:mod:`fleetpower.topologies`)
address them by the integer constants below; everything else in the package reads
results by NAME (:func:`probe_table`, :class:`fleetpower.engine.solver.SteadyState`).

Owns: the indices and their names. Imports nothing of the package.

The probe indices are derived from the :data:`PROBES` names (``PR_X = PROBES.index(...)``),
so reordering the names cannot silently swap the figures a kernel writes with the labels
a reader sees.
"""

from __future__ import annotations

import numpy as np

# --- topology and rectifier codes (the engine row's integer fields) ------------------
#: topology codes: the residual keeps one integer branch per circuit family
CAPACITIVE_DROPPER = 0
RESISTIVE_DROPPER = 1
RECTIFIER_SMPS = 2
MAINS_TRANSFORMER = 3
HALF_WAVE = 0
BRIDGE = 1

# --- parameter row ------------------------------------------------------------------
#: names of the parameter row's fields, in order (units in the names where they have one)
PARAMS = (
    "topology_code",  # one of the codes above
    "rectifier_code",  # HALF_WAVE or BRIDGE
    "v_pk_v",  # source peak voltage
    "omega_rad_s",  # angular frequency
    "r_series_ohm",  # series resistance of the supply, dropper resistor included
    "r_source_ohm",  # source resistance
    "l_source_h",  # source inductance (plus any leakage inductance in series)
    "c1_f",  # series (dropper) capacitance
    "r_bleeder_ohm",  # bleeder resistance
    "c_reservoir_f",  # reservoir / bulk capacitance
    "diode_is_a",  # rectifier diode saturation current
    "diode_nvt_v",  # rectifier diode n*V_T
    "zener_vk_v",  # zener knee voltage
    "zener_s_v",  # zener knee width
    "zener_rz_ohm",  # zener dynamic resistance
    "zener_fwd_is_a",  # zener forward saturation current
    "zener_fwd_nvt_v",  # zener forward n*V_T
    "i_load_a",  # regulator output current
    "i_q_a",  # regulator quiescent current
    "v_out_v",  # regulated output voltage
    "v_dropout_v",  # regulator dropout
    "p_converter_in_w",  # converter input power at this state
    "eta_converter",  # converter efficiency at this state [-]
    "v_uvlo_v",  # converter undervoltage lockout
    "c_x_f",  # X capacitance
    "turns_ratio",  # primary:secondary (1 where there is no transformer) [-]
    "l_magnetizing_h",  # magnetizing inductance, primary side
    "r_core_ohm",  # core-loss resistance, primary side
    "v_reservoir_max_v",  # physical upper bound of the reservoir voltage (solver projection)
    "l_mains_h",  # the mains' own share of l_source_h (the rest is inside the supply)
)
(
    P_TOPO, P_RECT, P_VPK, P_OMEGA, P_RSER, P_RSRC, P_LSRC, P_C1, P_RB, P_CO, P_D_IS,
    P_D_NVT, P_Z_VK, P_Z_S, P_Z_RZ, P_ZF_IS, P_ZF_NVT, P_ILOAD, P_IQ, P_VOUT, P_VDO,
    P_PCONV, P_ETA, P_UVLO, P_CX, P_NTURNS, P_LM, P_RC, P_VO_MAX, P_LMAINS,
) = range(len(PARAMS))
N_PARAMS = len(PARAMS)

# --- unknowns -------------------------------------------------------------------------
STATES = ("v_c1_v", "v_o_v", "v_a_v", "i_s_a")
S_VC1, S_VO, S_VA, S_IS = range(len(STATES))
N_STATES = len(STATES)

# --- probes: instantaneous quantities recorded at every sample -----------------------
PROBES = (
    "i_line_a",
    "v_source_v",
    "p_series_resistor_w",
    "p_source_resistance_w",
    "p_bleeder_w",
    "p_zener_w",
    "p_rectifier_w",
    "p_regulator_pass_w",
    "p_regulator_quiescent_w",
    "p_converter_w",
    "p_delivered_w",
    "p_store_series_capacitor_w",
    "p_store_reservoir_w",
    "p_store_x_capacitor_w",
    "p_store_inductance_w",
    "v_c1_v",
    "v_o_v",
    "i_zener_a",
    "v_out_v",
    "p_core_w",
    "p_store_magnetizing_w",
    "v_terminal_v",
)
N_PROBES = len(PROBES)
PR_I_LINE = PROBES.index("i_line_a")
PR_V_SOURCE = PROBES.index("v_source_v")
PR_P_SERIES = PROBES.index("p_series_resistor_w")
PR_P_SOURCE_R = PROBES.index("p_source_resistance_w")
PR_P_BLEEDER = PROBES.index("p_bleeder_w")
PR_P_ZENER = PROBES.index("p_zener_w")
PR_P_RECTIFIER = PROBES.index("p_rectifier_w")
PR_P_REG_PASS = PROBES.index("p_regulator_pass_w")
PR_P_REG_QUIESCENT = PROBES.index("p_regulator_quiescent_w")
PR_P_CONVERTER = PROBES.index("p_converter_w")
PR_P_DELIVERED = PROBES.index("p_delivered_w")
PR_P_STORE_C1 = PROBES.index("p_store_series_capacitor_w")
PR_P_STORE_RESERVOIR = PROBES.index("p_store_reservoir_w")
PR_P_STORE_CX = PROBES.index("p_store_x_capacitor_w")
PR_P_STORE_L = PROBES.index("p_store_inductance_w")
PR_V_C1 = PROBES.index("v_c1_v")
PR_V_O = PROBES.index("v_o_v")
PR_I_ZENER = PROBES.index("i_zener_a")
PR_V_OUT = PROBES.index("v_out_v")
PR_P_CORE = PROBES.index("p_core_w")
PR_P_STORE_LM = PROBES.index("p_store_magnetizing_w")
PR_V_TERMINAL = PROBES.index("v_terminal_v")

#: probes that are losses inside the supply (their means are the loss budget)
LOSS_PROBES = (
    "p_series_resistor_w",
    "p_bleeder_w",
    "p_zener_w",
    "p_rectifier_w",
    "p_regulator_pass_w",
    "p_regulator_quiescent_w",
    "p_converter_w",
    "p_core_w",
)
#: probes of energy storage (mean zero in periodic steady state)
STORAGE_PROBES = (
    "p_store_series_capacitor_w",
    "p_store_reservoir_w",
    "p_store_x_capacitor_w",
    "p_store_inductance_w",
    "p_store_magnetizing_w",
)


def probe_table(probes: np.ndarray) -> dict[str, np.ndarray]:
    """Probe samples by name: ``{name: probes[..., k]}`` (views, no copies).

    Parameters
    ----------
    probes : ndarray, shape (..., N_PROBES)
        Probe samples as the solver records them.
    """
    if probes.shape[-1] != N_PROBES:
        raise ValueError(f"expected {N_PROBES} probes in the last axis, got {probes.shape}")
    return {name: probes[..., k] for k, name in enumerate(PROBES)}


def new_row() -> np.ndarray:
    """A parameter row of zeros with the neutral defaults (turns ratio 1)."""
    p = np.zeros(N_PARAMS)
    p[P_NTURNS] = 1.0
    return p


_PARAM_INDEX = {name: k for k, name in enumerate(PARAMS)}


def param_index(name: str) -> int:
    """Index of the parameter ``name`` (one of :data:`PARAMS`) in an engine row."""
    return _PARAM_INDEX[name]
