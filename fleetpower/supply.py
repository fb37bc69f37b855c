"""One supply: from a validated design to waveforms, power quality, losses and stresses.

Data flows one way: :class:`~fleetpower.io.design_file.Design` -> parameter rows
(:func:`circuit_rows`) -> :func:`fleetpower.engine.solver.solve_periodic` -> per-state
:class:`StateResult` (waveform, :class:`~fleetpower.pq.ieee1459.PowerQuality`, loss budget)
-> :class:`UnitAnalysis` with stresses and warnings.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .engine import layout as c
from .engine.solver import DEFAULT_SAMPLES_PER_CYCLE, solve_periodic
from .errors import InputError, suggest
from .io.design_file import Design
from .pq.ieee1459 import PowerQuality, power_quality
from .topologies.base import (  # noqa: F401 (re-exported)
    DISCHARGE_SETS,
    INRUSH_RESISTOR_RANGE_OHM,
    LOSS_LABELS,
    STRESS_MAINS_FACTOR,
    HandEstimate,
    Stress,
    discharge_rules,
    discharge_time_s,
)

NON_ISOLATION_CAUTION = (
    "NOT ISOLATED: a capacitive or resistive dropper connects its output directly to the "
    "mains. Every part of the circuit, the output and anything wired to it sits at mains "
    "potential and can kill. Enclose it fully, never connect it to earthed or "
    "user-touchable equipment, do not probe it with an earthed oscilloscope, and follow "
    "local electrical codes and licensed practice; this tool does not replace them."
)


# ----------------------------------------------------------------------------------
# design -> parameter rows
# ----------------------------------------------------------------------------------
def circuit_rows(
    design: Design, state: str, mains_factor: float = 1.0, load_a: float | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Engine row and initial guess for one (design, state, mains) case.

    Parameters
    ----------
    design : Design
    state : str
        Operating state (its load is taken from the design unless ``load_a`` is given).
    mains_factor : float
        Multiplier on the mains voltage (1.1 for the +10 % stress case) [-].
    load_a : float, optional
        Override of the output current [A] (used to search the largest deliverable load).

    Returns
    -------
    params : ndarray, shape (N_PARAMS,)
    x0 : ndarray, shape (4,)
    """
    return design.topology_impl.engine_row(design, state, mains_factor, load_a)


# ----------------------------------------------------------------------------------
# results
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class Balance:
    """Energy balance of one state: input = delivered + losses (+ storage, ~0) [W]."""

    p_in_w: float
    delivered_w: float
    losses_w: float
    source_resistance_w: float
    storage_w: float

    @property
    def residual_w(self) -> float:
        return self.p_in_w - self.delivered_w - self.losses_w - self.source_resistance_w

    @property
    def residual_pct(self) -> float:
        return 100.0 * self.residual_w / self.p_in_w if self.p_in_w else 0.0


@dataclass(frozen=True)
class StateResult:
    """Periodic steady state of one (design, state) at one mains voltage."""

    state: str
    mains_factor: float
    load_a: float
    t_s: np.ndarray
    v_v: np.ndarray
    i_a: np.ndarray
    pq: PowerQuality
    losses_w: dict[str, float]
    balance: Balance
    v_dc_v: float
    v_dc_min_v: float
    ripple_v_pp: float
    i_dc_a: float  # mean current the load actually receives [A] (less than asked when the
    # regulator drops out)
    v_out_min_v: float
    i_zener_reverse_a: float
    p_zener_w: float
    p_series_resistor_w: float
    p_bleeder_w: float
    v_cap_peak_v: float
    v_cap_rms_v: float
    in_regulation: bool
    iterations: int

    def waveform(self) -> pd.DataFrame:
        """One cycle of source voltage [V] and line current [A]."""
        return pd.DataFrame({"t_s": self.t_s, "v_v": self.v_v, "i_a": self.i_a})


def _state_results(design, cases, sol) -> list[StateResult]:
    idx = {name: k for k, name in enumerate(c.PROBES)}
    results = []
    for b, (state, factor, load_a, _params) in enumerate(cases):
        pr = sol.probes[b]
        mean = pr.mean(axis=0)
        v = pr[:, idx["v_source_v"]]
        i = pr[:, idx["i_line_a"]]
        pq = power_quality(v, i)
        labels = design.topology_impl.loss_labels()
        losses = {
            labels[k]: float(mean[idx[k]])
            for k in c.LOSS_PROBES
            if abs(mean[idx[k]]) > 0.0 or k in ("p_series_resistor_w", "p_rectifier_w")
        }
        bal = Balance(
            p_in_w=pq.p_w,
            delivered_w=float(mean[idx["p_delivered_w"]]),
            losses_w=float(sum(losses.values())),
            source_resistance_w=float(mean[idx["p_source_resistance_w"]]),
            storage_w=float(sum(mean[idx[k]] for k in c.STORAGE_PROBES)),
        )
        vo = pr[:, idx["v_o_v"]]
        v_out = pr[:, idx["v_out_v"]]
        iz = pr[:, idx["i_zener_a"]]
        if design.has_linear_regulator:
            need = design.output.voltage + design.output.dropout
            ok = bool(vo.min() >= need - 1e-9)
            vcap = pr[:, idx["v_c1_v"]]
            v_cap_peak = float(np.max(np.abs(vcap)))
            v_cap_rms = float(np.sqrt(np.mean(vcap * vcap)))
        else:
            ok = bool(vo.min() >= design.output.undervoltage_lockout)
            v_cap_peak = float(np.max(np.abs(v)))
            v_cap_rms = float(np.sqrt(np.mean(v * v)))
        results.append(
            StateResult(
                state=state,
                mains_factor=factor,
                load_a=load_a,
                t_s=sol.t_s,
                v_v=v,
                i_a=i,
                pq=pq,
                losses_w=losses,
                balance=bal,
                v_dc_v=float(vo.mean()),
                v_dc_min_v=float(vo.min()),
                ripple_v_pp=float(vo.max() - vo.min()),
                i_dc_a=(load_a * float(np.mean(v_out)) / design.output.voltage
                        if design.has_linear_regulator else load_a),
                v_out_min_v=float(v_out.min()),
                i_zener_reverse_a=float(np.mean(np.clip(iz, 0.0, None))),
                p_zener_w=float(mean[idx["p_zener_w"]]),
                p_series_resistor_w=float(mean[idx["p_series_resistor_w"]]),
                p_bleeder_w=float(mean[idx["p_bleeder_w"]]),
                v_cap_peak_v=v_cap_peak,
                v_cap_rms_v=v_cap_rms,
                in_regulation=ok,
                iterations=int(sol.iterations[b]),
            )
        )
    return results


def simulate_cases(
    design: Design,
    cases: list[tuple[str, float, float | None]],
    samples_per_cycle: int = DEFAULT_SAMPLES_PER_CYCLE,
) -> list[StateResult]:
    """Solve (state, mains factor, output-current override or None) cases in one batch."""
    rows, x0s, full = [], [], []
    for state, factor, load in cases:
        if state not in design.states:
            raise InputError(
                design.source, "states", f"unknown state {state!r}{suggest(state, design.states)}"
            )
        p, x0 = circuit_rows(design, state, factor, load)
        load_a = design.load_current_a(state) if load is None else load
        full.append((state, factor, load_a, p))
        rows.append(p)
        x0s.append(x0)
    labels = [f"{design.name} / {s} at {f:.2f}x mains" for s, f, _, _ in full]
    sol = solve_periodic(np.array(rows), np.array(x0s), samples_per_cycle, labels)
    return _state_results(design, full, sol)


def simulate(
    design: Design,
    states: list[str] | None = None,
    mains_factors: tuple[float, ...] = (1.0,),
    samples_per_cycle: int = DEFAULT_SAMPLES_PER_CYCLE,
) -> list[StateResult]:
    """Simulate states of a design to periodic steady state, all in one batch.

    Parameters
    ----------
    design : Design
    states : list of str, optional
        States to simulate (default: all, in file order).
    mains_factors : tuple of float
        Mains voltage multipliers; every state is solved at each.
    samples_per_cycle : int
        Samples (and integration steps) per mains cycle.

    Returns
    -------
    list of StateResult
        Ordered by mains factor, then state.
    """
    states = list(design.states) if states is None else list(states)
    cases = [(s, f, None) for f in mains_factors for s in states]
    return simulate_cases(design, cases, samples_per_cycle)


# ----------------------------------------------------------------------------------
# deliverable current and the hand estimate
# ----------------------------------------------------------------------------------
def max_deliverable_current_a(
    design: Design, mains_factor: float = 1.0, rounds: int = 2, points: int = 12
) -> float:
    """Largest output current [A] a dropper sustains in regulation.

    Found by bracketing: each round solves ``points`` loads in one batch and narrows to
    the last load whose reservoir minimum stays above output voltage + dropout.
    """
    if not design.has_linear_regulator:
        raise ValueError("only linear-regulator supplies have a current limit set by their parts")
    state = next(iter(design.states))
    hi = design.topology_impl.deliverable_ceiling_a(design)
    lo = 0.0
    for _ in range(rounds):
        loads = np.linspace(lo, hi, points)
        res = simulate_cases(design, [(state, mains_factor, float(x)) for x in loads])
        ok = np.array([r.in_regulation for r in res])
        if not ok[0]:
            return 0.0
        last = int(np.flatnonzero(ok)[-1])
        if last == points - 1:
            return float(loads[-1])
        lo, hi = float(loads[last]), float(loads[last + 1])
    return lo


def hand_estimate(design: Design, simulated_max_a: float) -> HandEstimate | None:
    """The topology's rule of thumb beside the simulated deliverable current (or None)."""
    return design.topology_impl.hand_estimate(design, simulated_max_a)


def stresses(design: Design, stressed: list[StateResult]) -> list[Stress]:
    """Component stresses from the states simulated at +10 % mains (the topology's)."""
    return design.topology_impl.stresses(design, stressed)


# ----------------------------------------------------------------------------------
# the whole unit
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class UnitAnalysis:
    """Everything ``fleetpower unit`` reports for one design."""

    design: Design
    states: list[StateResult]
    stresses: list[Stress]
    warnings: list[str]
    caution: str | None
    max_deliverable_a: float | None
    hand: HandEstimate | None
    extra: dict = field(default_factory=dict)

    def summary(self) -> pd.DataFrame:
        """One row per state: the headline power-quality figures with units in names."""
        rows = []
        for r in self.states:
            q = r.pq
            rows.append({
                "state": r.state, "v_rms_v": q.v_rms_v, "i_rms_a": q.i_rms_a,
                "i_peak_a": q.i_peak_a, "crest_factor": q.crest_factor, "p_w": q.p_w,
                "s_va": q.s_va, "q1_var": q.q1_var, "dpf": q.dpf, "pf": q.pf,
                "thd_i_pct": q.thd_i_pct, "v_dc_v": r.v_dc_v, "ripple_v_pp": r.ripple_v_pp,
                "i_dc_a": r.i_dc_a,
            })
        return pd.DataFrame(rows)


def analyse_unit(design: Design, states: list[str] | None = None) -> UnitAnalysis:
    """Simulate, analyse and stress-check one design (the library behind ``fleetpower unit``).

    All requested states are solved at nominal mains and all states at +10 % mains (for
    stresses) in one batch.
    """
    chosen = list(design.states) if states is None else list(states)
    all_states = list(design.states)
    for s in chosen:
        if s not in design.states:
            raise InputError(design.source, "--state",
                             f"unknown state {s!r}{suggest(s, design.states)}")
    results = simulate(design, all_states, (1.0, STRESS_MAINS_FACTOR))
    nominal = [r for r in results if r.mains_factor == 1.0 and r.state in chosen]
    stressed = [r for r in results if r.mains_factor != 1.0]
    warnings: list[str] = []
    max_a = None
    hand = None
    if design.has_linear_regulator:
        if any(not r.in_regulation for r in nominal) or \
                design.topology_impl.always_report_deliverable:
            max_a = max_deliverable_current_a(design)
        for r in nominal:
            if not r.in_regulation:
                warnings.append(
                    f"state '{r.state}': the reservoir falls to {r.v_dc_min_v:.2f} V, below "
                    f"output + dropout ({design.output.voltage + design.output.dropout:.2f} V);"
                    f" the supply cannot deliver {r.load_a * 1e3:.1f} mA — the largest "
                    f"load it holds in regulation is {max_a * 1e3:.1f} mA"
                )
        hand = hand_estimate(design, max_a) if max_a is not None else None
    else:
        for r in nominal:
            if not r.in_regulation:
                warnings.append(
                    f"state '{r.state}': the bulk capacitor falls to {r.v_dc_min_v:.1f} V, "
                    f"below the converter's lockout ({design.output.undervoltage_lockout:.1f} V)"
                )
    for r in nominal:
        if abs(r.pq.i_dc_a) > 1e-3 * max(r.pq.i_rms_a, 1e-12) and abs(r.pq.i_dc_a) > 1e-4:
            why = design.topology_impl.dc_bias_reason
            warnings.append(
                f"state '{r.state}': draws {r.pq.i_dc_a * 1e3:.2f} mA DC from the mains ({why})"
            )
        if abs(r.balance.residual_pct) > 0.5:
            warnings.append(
                f"state '{r.state}': energy balance closes only to {r.balance.residual_pct:.2f} %"
            )
    st = stresses(design, stressed)
    for s in st:
        if s.verdict == "fail":
            warnings.append(f"stress: {s.item} {s.value:.3g} {s.unit} fails ({s.note or s.condition})")
    return UnitAnalysis(
        design=design,
        states=nominal,
        stresses=st,
        warnings=warnings,
        caution=None if design.is_isolated else NON_ISOLATION_CAUTION,
        max_deliverable_a=max_a,
        hand=hand,
    )
