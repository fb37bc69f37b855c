"""One supply, everything ``fleetpower unit`` reports: :func:`analyse_unit`.

Data flows one way: :class:`~fleetpower.io.design_file.Design` -> cases solved by
:func:`fleetpower.simulate.run` (states at nominal and +10 % mains, the deliverable-current
search, the EPS load points) -> :class:`~fleetpower.simulate.StateResult` per state ->
:class:`UnitAnalysis` with stresses (the topology's), warnings, the hand estimate, EPS
figures and compliance rows.

Owns: :class:`UnitAnalysis`, :func:`analyse_unit`, :func:`max_deliverable_current_a`.
May import ``simulate``, ``topologies`` (through the design) and ``limits``; never
``fleet``, ``compare`` or reports; no engine index.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import TYPE_CHECKING

import numpy as np

from .errors import InputError, suggest
from .gadget_range import RangeWarning, unique
from .io.design_file import ConverterOutput, Design
from .limits.applicability import eps_figures, unit_compliance
from .simulate import (  # noqa: F401
    Balance,
    Case,
    StateResult,
    circuit_rows,
    run,
    simulate,
    simulate_cases,
)
from .topologies.base import (  # noqa: F401 (re-exported)
    INRUSH_RESISTOR_RANGE_OHM,
    LOSS_LABELS,
    STRESS_MAINS_FACTOR,
    HandEstimate,
    Stress,
)

if TYPE_CHECKING:  # pragma: no cover  (pandas is imported where a DataFrame is built)
    import pandas as pd

NON_ISOLATION_CAUTION = (
    "NOT ISOLATED: a capacitive or resistive dropper connects its output directly to the "
    "mains. Every part of the circuit, the output and anything wired to it sits at mains "
    "potential and can kill. Enclose it fully, never connect it to earthed or "
    "user-touchable equipment, do not probe it with an earthed oscilloscope, and follow "
    "local electrical codes and licensed practice; this tool does not replace them."
)

ISOLATION_UNKNOWN_CAUTION = (
    "ISOLATION NOT KNOWN: the design file does not say whether this supply's output is "
    "isolated from the mains (isolated = true/false). Until its documentation says so, "
    "treat its output and anything wired to it as possibly at mains potential."
)


# ----------------------------------------------------------------------------------
# deliverable current and the hand estimate
# ----------------------------------------------------------------------------------
def _deliverable_search(design: Design, rounds: int, points: int):
    """The bracketing search of :func:`max_deliverable_current_a` as a generator.

    It yields each load [A] it needs to know about and is sent back whether the supply
    holds regulation at it; its return value is the answer. Written this way, the search
    of one design and the lockstep search of many (:func:`max_deliverable_currents_a`)
    are the same code, and ask for the same loads.
    """
    hi = design.topology_impl.deliverable_ceiling_a(design)
    lo = 0.0
    known: dict[float, bool] = {}
    for _ in range(rounds):
        loads = np.linspace(lo, hi, points)

        def ok(i: int, loads=loads):
            x = float(loads[i])
            if x not in known:
                known[x] = bool((yield x))
            return known[x]

        if not (yield from ok(0)):
            return 0.0
        if (yield from ok(points - 1)):
            return float(loads[-1])
        good, bad = 0, points - 1  # ok(good), not ok(bad)
        while bad - good > 1:
            mid = (good + bad) // 2
            good, bad = (mid, bad) if (yield from ok(mid)) else (good, mid)
        lo, hi = float(loads[good]), float(loads[bad])
    return lo


def max_deliverable_currents_a(
    designs: list[Design], mains_factor: float = 1.0, rounds: int = 2, points: int = 12
) -> list[float]:
    """Largest output current [A] each of several supplies sustains in regulation.

    The searches of :func:`max_deliverable_current_a` run in lockstep: each step solves
    the next load of every design still searching in ONE :func:`fleetpower.simulate.run`
    batch, so n designs cost the steps of the longest search, not n times them. Each
    design's answer (and every case it solves) is exactly its search alone.
    """
    searches = [_deliverable_search(d, rounds, points) for d in designs]
    answers: list[float] = [0.0] * len(designs)
    pending: dict[int, float] = {}

    def advance(k: int, holds: bool | None) -> None:
        try:
            pending[k] = searches[k].send(holds)
        except StopIteration as done:
            answers[k] = float(done.value)

    for k in range(len(designs)):
        advance(k, None)
    while pending:
        asked = dict(pending)
        pending.clear()
        results = run([Case(designs[k], next(iter(designs[k].states)), mains_factor, x)
                       for k, x in asked.items()])
        for k, r in zip(asked, results, strict=True):
            advance(k, bool(r.in_regulation))
    return answers


def max_deliverable_current_a(
    design: Design, mains_factor: float = 1.0, rounds: int = 2, points: int = 12
) -> float:
    """Largest output current [A] a supply sustains in regulation.

    Found by bracketing: each round lays ``points`` loads evenly between the last bracket's
    ends and narrows to the last load whose reservoir minimum stays above output voltage +
    dropout (linear regulator) or the converter's undervoltage lockout. Within a round the
    grid is searched by bisection (the regulation margin falls as the load rises), so a
    round costs about log2(points) solves instead of ``points``, and the answer is the same
    grid load an exhaustive scan finds.
    """
    return max_deliverable_currents_a([design], mains_factor, rounds, points)[0]


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
    #: no-load input power [W], average active efficiency [-], efficiencies at 25-100 %
    #: (external power supplies only)
    eps: tuple[float, float, list[float]] | None = None
    #: rows against every applicable limit set (:func:`fleetpower.limits.applicability.unit_compliance`)
    compliance: tuple[dict, ...] = ()
    #: inputs and results outside the range of small mains gadgets (also in ``warnings``)
    range_warnings: tuple[RangeWarning, ...] = ()

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
        import pandas as pd

        return pd.DataFrame(rows)


def analyse_unit(design: Design, states: list[str] | None = None,
                 limits_file=None, report_deliverable: bool = True) -> UnitAnalysis:
    """Simulate, analyse and stress-check one design (the library behind ``fleetpower unit``).

    All requested states are solved at nominal mains and all states at +10 % mains (for
    stresses) in one batch. The largest deliverable current (a search of about ten
    solves) is found when a state cannot hold its load, and also for a topology that
    always reports it (a capacitive dropper) unless ``report_deliverable`` is False --
    for callers that read it only when a state fails (a product line).
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
        if any(not r.in_regulation for r in nominal) or (
                report_deliverable and design.topology_impl.always_report_deliverable):
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
        if any(r.in_regulation is False for r in nominal):
            max_a = max_deliverable_current_a(design)
        for r in nominal:
            if r.in_regulation is False:
                warnings.append(
                    f"state '{r.state}': the bulk capacitor falls to {r.v_dc_min_v:.1f} V, "
                    f"below the converter's lockout ({design.output.undervoltage_lockout:.1f} V)"
                )
    for r in nominal:
        warnings += [f"state '{r.state}': {note}" for note in r.notes]
        if abs(r.pq.i_dc_a) > 1e-3 * max(r.pq.i_rms_a, 1e-12) and abs(r.pq.i_dc_a) > 1e-4:
            why = design.topology_impl.dc_bias_reason
            warnings.append(
                f"state '{r.state}': draws {r.pq.i_dc_a * 1e3:.2f} mA DC from the mains ({why})"
            )
        if r.balance is not None and abs(r.balance.residual_pct) > 0.5:
            warnings.append(
                f"state '{r.state}': energy balance closes only to {r.balance.residual_pct:.2f} %"
            )
    outside = tuple(unique(w for r in nominal for w in r.range_warnings))
    warnings[:0] = [w.message for w in outside]
    st = stresses(design, stressed)
    for s in st:
        if s.verdict == "fail":
            warnings.append(f"stress: {s.item} {s.value:.3g} {s.unit} fails ({s.note or s.condition})")
    unit = UnitAnalysis(
        design=design,
        states=nominal,
        stresses=st,
        warnings=warnings,
        caution=(None if design.is_isolated else NON_ISOLATION_CAUTION
                 if design.is_isolated is False else ISOLATION_UNKNOWN_CAUTION),
        max_deliverable_a=max_a,
        hand=hand,
        eps=(eps_figures(design) if design.external_power_supply
             and isinstance(design.output, ConverterOutput) else None),
        range_warnings=outside,
    )
    rows = unit_compliance(design, unit, limits_file=limits_file)
    return replace(unit, compliance=tuple(rows))
