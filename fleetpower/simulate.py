"""Simulation: cases from many designs -> one batch -> results, with a cache on content.

A :class:`Case` is (design, state, mains factor, output-current override). :func:`run`
takes cases of any number of designs, looks each up in a :class:`ResultCache` keyed on the
design's VALIDATED CONTENT (a hash of its canonical JSON, not of any file) plus the case,
packs the rest into engine rows through their topologies, hands them to an executor as one
batch and returns one :class:`StateResult` per case, in order. ``unit``, ``fleet``,
``compare`` and the EPS figures all go through here, so a design changed in memory gets its
own result and the same design twice costs one solve.

The executor is the seam for running batches elsewhere: any callable
``run(func, items, on_done=None) -> list`` of :mod:`fleetpower.executors`; each item is one
:class:`Batch` of engine rows and ``func`` is :func:`solve_batch` (a module-level function,
so it pickles to a cluster's workers).

Owns: :class:`Case`, :class:`StateResult`, :class:`Balance`, :class:`ResultCache`, the
default cache and :func:`run`. May import the engine, the topology registry (through
:class:`~fleetpower.io.design_file.Design`), ``pq`` and ``executors``; never ``unit``,
``fleet``, ``compare``, limits or reports.
"""

from __future__ import annotations

import hashlib
from collections import OrderedDict
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from ._heap import frozen_during
from ._records import frozen
from .engine import layout
from .engine.solver import DEFAULT_SAMPLES_PER_CYCLE, SteadyState, solve_periodic
from .errors import InputError, SolverError, suggest
from .executors import local_executor
from .gadget_range import RangeWarning, design_warnings, result_warnings, unique
from .io.design_file import Design
from .pq.ieee1459 import PowerQuality, power_quality_rows
from .pq.spectrum import phasors_vs_voltage

if TYPE_CHECKING:  # pragma: no cover  (pandas is imported where a DataFrame is built)
    import pandas as pd


@dataclass(frozen=True)
class Case:
    """One thing to solve: a design in one state at one mains voltage.

    ``load_a`` overrides the state's output current (the deliverable-current search and
    the EPS load points use it); ``mains_factor`` multiplies the design's mains voltage.
    """

    design: Design
    state: str
    mains_factor: float = 1.0
    load_a: float | None = None


def design_key(design: Design) -> str:
    """Hash of a design's validated content (its canonical JSON; the file path left out)."""
    blob = design.model_dump_json(exclude={"source"}).encode()
    return hashlib.sha256(blob).hexdigest()


def case_key(case: Case, samples_per_cycle: int, periodic_rtol: float | None = None) -> tuple:
    key = (design_key(case.design), case.state, float(case.mains_factor),
           None if case.load_a is None else float(case.load_a), int(samples_per_cycle))
    # an accuracy setting other than the default's periodicity tolerance is its own result
    return key if periodic_rtol is None else (*key, float(periodic_rtol))


@dataclass(frozen=True)
class Balance:
    """Energy balance of one state: input = delivered + losses (+ storage, ~0) [W].

    ``p_in_w`` is measured at the supply's terminals (after the mains' source impedance),
    so the Joule loss in the mains' source resistance, ``source_resistance_w``, is not
    part of the supply's books: it is reported beside them (drawn from the EMF, lost
    before the terminals).
    """

    p_in_w: float
    delivered_w: float
    losses_w: float
    source_resistance_w: float
    storage_w: float

    @property
    def residual_w(self) -> float:
        return self.p_in_w - self.delivered_w - self.losses_w

    @property
    def residual_pct(self) -> float:
        return 100.0 * self.residual_w / self.p_in_w if self.p_in_w else 0.0


@dataclass(frozen=True)
class StateResult:
    """Periodic steady state of one (design, state) at one mains voltage."""

    state: str
    mains_factor: float
    load_a: float | None  # output current of the case [A] (None: not known, measured)
    t_s: np.ndarray
    v_v: np.ndarray
    i_a: np.ndarray
    pq: PowerQuality
    # circuit-only figures: None for a topology the engine does not solve (a measured
    # gadget), whose reports say "not known" (``unknown_note``) instead
    losses_w: dict[str, float] | None = None
    balance: Balance | None = None
    v_dc_v: float | None = None
    v_dc_min_v: float | None = None
    ripple_v_pp: float | None = None
    i_dc_a: float | None = None  # mean current the load actually receives [A] (less than
    # asked when the regulator drops out)
    v_out_min_v: float | None = None
    i_zener_reverse_a: float | None = None
    p_zener_w: float | None = None
    p_series_resistor_w: float | None = None
    p_bleeder_w: float | None = None
    v_cap_peak_v: float | None = None
    v_cap_rms_v: float | None = None
    in_regulation: bool | None = None
    iterations: int = 0
    #: circuit residual evaluations the engine spent on this case (its cost measure)
    residual_evaluations: int = 0
    #: engine unknowns at the start of the settled cycle (v_c1 [V], v_o [V], v_a [V],
    #: i_s [A]): a warm start for variants of this case (spread samples)
    x_start: tuple[float, ...] = ()
    #: the engine unknowns at every sample of the settled cycle, shape (n, 4) (None: not
    #: simulated): a guide for the time steps of variants of this case (spread samples;
    #: ``guides`` of :func:`run`)
    x_cycle: np.ndarray | None = None
    #: where the figures come from when not simulated (file, window, scaling model)
    basis: str | None = None
    #: quality flags of the source data (shown as warnings)
    notes: tuple[str, ...] = ()
    #: voltage-scaling model applied to reach these mains (measured gadgets), or None
    voltage_scaling: str | None = None
    #: how reports show the circuit-only figures above when they are None
    unknown_note: str | None = None
    #: the design's inputs and this state's line current and input power that lie outside
    #: the range of small mains gadgets (:mod:`fleetpower.gadget_range`)
    range_warnings: tuple[RangeWarning, ...] = ()

    @property
    def circuit_known(self) -> bool:
        """Whether losses, output and the energy balance are known (simulated)."""
        return self.balance is not None

    @property
    def i_h_vs_v_a(self) -> np.ndarray:
        """Current phasors [A] by harmonic order, phase against the unit's own voltage."""
        return phasors_vs_voltage(self.v_v, self.i_a)[1]

    def waveform(self) -> pd.DataFrame:
        """One cycle of source voltage [V] and line current [A]."""
        import pandas as pd

        return pd.DataFrame({"t_s": self.t_s, "v_v": self.v_v, "i_a": self.i_a})


def _state_results(cases: list[Case], sol: SteadyState) -> list[StateResult]:
    idx = {name: k for k, name in enumerate(layout.PROBES)}
    # over the whole batch at once: per case, numpy's call overhead dominated a spread
    pr_all = sol.probes
    means = pr_all.mean(axis=1)
    v_all, i_all = pr_all[:, :, idx["v_terminal_v"]], pr_all[:, :, idx["i_line_a"]]
    pqs = power_quality_rows(v_all, i_all)
    vo_all = pr_all[:, :, idx["v_o_v"]]
    vo_min, vo_max = vo_all.min(axis=1), vo_all.max(axis=1)
    v_out_all = pr_all[:, :, idx["v_out_v"]]
    iz_rev = np.mean(np.clip(pr_all[:, :, idx["i_zener_a"]], 0.0, None), axis=1)
    vcap_all = pr_all[:, :, idx["v_c1_v"]]
    vx_all = pr_all[:, :, idx["v_source_v"]]  # the X capacitor sits on the EMF (engine)
    k_delivered, k_source = idx["p_delivered_w"], idx["p_source_resistance_w"]
    k_zener, k_series, k_bleeder = idx["p_zener_w"], idx["p_series_resistor_w"], idx["p_bleeder_w"]
    k_losses = [idx[k] for k in layout.LOSS_PROBES]
    k_storage = [idx[k] for k in layout.STORAGE_PROBES]
    always = [k in ("p_series_resistor_w", "p_rectifier_w") for k in layout.LOSS_PROBES]
    # per case in Python floats, column by column: the batch's columns as lists and zipped
    # (numpy's scalars, and indexing a list per field, cost a call each, ~40 per case)
    columns = zip(
        cases, pqs, list(v_all), list(i_all), means[:, k_losses].tolist(),
        means[:, k_storage].tolist(), means[:, k_delivered].tolist(),
        means[:, k_source].tolist(), means[:, k_zener].tolist(),
        means[:, k_series].tolist(), means[:, k_bleeder].tolist(),
        means[:, idx["v_o_v"]].tolist(), vo_min.tolist(), (vo_max - vo_min).tolist(),
        means[:, idx["v_out_v"]].tolist(), v_out_all.min(axis=1).tolist(), iz_rev.tolist(),
        np.max(np.abs(vcap_all), axis=1).tolist(),
        np.sqrt(np.mean(vcap_all * vcap_all, axis=1)).tolist(),
        np.max(np.abs(vx_all), axis=1).tolist(),
        np.sqrt(np.mean(vx_all * vx_all, axis=1)).tolist(),
        sol.iterations.tolist(), sol.residual_evaluations.tolist(),
        map(tuple, sol.states[:, 0].tolist()), list(sol.states), strict=True)
    inputs_of: dict[int, tuple[RangeWarning, ...]] = {}  # a design's inputs: once a batch
    labels_of: dict[int, list[str]] = {}  # loss labels, in LOSS_PROBES order, per topology
    t_s = sol.t_s
    results = []
    for (case, pq, v, i, loss_means, storage, delivered, source, p_zener, p_series,
         p_bleeder, v_dc, v_dc_min, ripple, v_out_mean, v_out_min, i_rev, vcap_peak,
         vcap_rms, vx_peak, vx_rms, iterations, evaluations, x_start, x_cycle) in columns:
        design, state = case.design, case.state
        inputs = inputs_of.get(id(design))
        if inputs is None:
            inputs = inputs_of[id(design)] = design_warnings(design)
        impl = design.topology_impl
        labels = labels_of.get(id(impl))
        if labels is None:
            names = impl.loss_labels()
            # a loss this topology has no label for is exactly 0 in its engine rows (the
            # probes of other circuit families): left out below; named by its probe if not
            labels = labels_of[id(impl)] = [names.get(k, k) for k in layout.LOSS_PROBES]
        load_a = design.load_current_a(state) if case.load_a is None else case.load_a
        # measured at the supply's terminals (README "Where P is measured")
        losses = {label: m for label, m, keep in zip(labels, loss_means, always,
                                                                   strict=True)
                  if keep or abs(m) > 0.0}
        bal = frozen(Balance, dict(
            p_in_w=pq.p_w,
            delivered_w=delivered,
            losses_w=float(sum(losses.values())),
            source_resistance_w=source,
            storage_w=float(sum(storage)),
        ))
        output = design.output
        regulated = design.has_linear_regulator
        if regulated:
            ok = v_dc_min >= output.voltage + output.dropout - 1e-9
        else:
            ok = v_dc_min >= output.undervoltage_lockout
            vcap_peak, vcap_rms = vx_peak, vx_rms
        results.append(
            frozen(StateResult, dict(
                state=state,
                mains_factor=case.mains_factor,
                load_a=load_a,
                t_s=t_s,
                v_v=v,
                i_a=i,
                pq=pq,
                losses_w=losses,
                balance=bal,
                v_dc_v=v_dc,
                v_dc_min_v=v_dc_min,
                ripple_v_pp=ripple,
                i_dc_a=(load_a * v_out_mean / output.voltage if regulated else load_a),
                v_out_min_v=v_out_min,
                i_zener_reverse_a=i_rev,
                p_zener_w=p_zener,
                p_series_resistor_w=p_series,
                p_bleeder_w=p_bleeder,
                v_cap_peak_v=vcap_peak,
                v_cap_rms_v=vcap_rms,
                in_regulation=ok,
                iterations=iterations,
                residual_evaluations=evaluations,
                x_start=x_start,
                x_cycle=x_cycle,
                range_warnings=_range_warnings(design, state, pq, inputs),
            ))
        )
    return results


def _range_warnings(design: Design, state: str, pq: PowerQuality,
                    inputs: tuple[RangeWarning, ...] | None = None) -> tuple[RangeWarning, ...]:
    """What of a case lies outside the range of small mains gadgets: the design's inputs
    (``inputs`` when already known) and the state's line current and input power."""
    if inputs is None:
        inputs = design_warnings(design)
    results = result_warnings(design.name, state, pq.i_rms_a, pq.p_w)
    return inputs + results if results else inputs



def _direct_result(case: Case, samples_per_cycle: int) -> StateResult:
    """A case of a topology the engine does not solve, from the topology's own figures."""
    impl = case.design.topology_impl
    d = impl.direct_state(case.design, case.state, case.mains_factor, samples_per_cycle)
    return StateResult(
        state=case.state, mains_factor=case.mains_factor,
        load_a=case.load_a,
        t_s=d.t_s, v_v=d.v_v, i_a=d.i_a, pq=d.pq, basis=d.basis, notes=d.notes,
        voltage_scaling=d.voltage_scaling, unknown_note=impl.unknown_note,
        range_warnings=_range_warnings(case.design, case.state, d.pq))


#: results the process-wide cache keeps (least recently used dropped first). One result
#: holds three waveforms of 2048 samples and its figures, about 60 kB, so this is about
#: 250 MB at most; a product line of 50 designs x 8 markets x every state fits.
CACHE_MAX_RESULTS = 4096


class ResultCache:
    """Results by case key, in process, least recently used dropped past ``max_results``.

    ``solves`` counts cases actually solved, ``hits`` cases answered from the cache,
    ``evicted`` results dropped to stay within ``max_results`` (a dropped case is solved
    again when next asked: the bound costs time, never a figure).
    """

    def __init__(self, max_results: int = CACHE_MAX_RESULTS) -> None:
        if max_results < 1:
            raise ValueError("max_results must be at least 1")
        self._results: OrderedDict[tuple, StateResult] = OrderedDict()
        self.max_results = int(max_results)
        self.solves = 0
        self.hits = 0
        self.evicted = 0

    def get(self, key: tuple) -> StateResult | None:
        r = self._results.get(key)
        if r is not None:
            self.hits += 1
            self._results.move_to_end(key)
        return r

    def put(self, key: tuple, result: StateResult) -> None:
        self._results[key] = result
        self._results.move_to_end(key)
        while len(self._results) > self.max_results:
            self._results.popitem(last=False)
            self.evicted += 1

    def clear(self) -> None:
        self._results.clear()
        self.solves = self.hits = self.evicted = 0

    def __len__(self) -> int:
        return len(self._results)


#: the process-wide cache every caller shares unless it passes its own (or None)
CACHE = ResultCache()


@dataclass(frozen=True)
class Batch:
    """One executor work item: engine rows, initial guesses and their labels."""

    params: np.ndarray  # (n, N_PARAMS)
    x0: np.ndarray  # (n, N_STATES)
    samples_per_cycle: int
    labels: list[str]
    #: steps per cycle of the engine's coarse first solve (None: its default; 0: none)
    coarse_start: int | None = None
    #: periodicity tolerance of the engine (None: its default, ``PERIODIC_RTOL``)
    periodic_rtol: float | None = None
    #: per row a near solution's cycle of unknowns (n, 4), NaN rows for none (None: none)
    guides: np.ndarray | None = None


def solve_batch(batch: Batch) -> SteadyState:
    """Solve one batch of engine rows (the function executors run)."""
    extra = {} if batch.periodic_rtol is None else {"periodic_rtol": batch.periodic_rtol}
    return solve_periodic(batch.params, batch.x0, batch.samples_per_cycle, batch.labels,
                          coarse_start=batch.coarse_start, guides=batch.guides, **extra)


def circuit_rows(design: Design, state: str, mains_factor: float = 1.0,
                 load_a: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Engine row and initial guess of one (design, state, mains, load) case."""
    return engine_row(Case(design, state, mains_factor, load_a))


def engine_row(case: Case) -> tuple[np.ndarray, np.ndarray]:
    """Engine row and initial guess of one case (its topology packs them)."""
    d = case.design
    if case.state not in d.states:
        raise InputError(d.source, "states",
                         f"unknown state {case.state!r}{suggest(case.state, d.states)}")
    return d.topology_impl.engine_row(d, case.state, case.mains_factor, case.load_a)


@frozen_during
def run(
    cases: list[Case],
    samples_per_cycle: int = DEFAULT_SAMPLES_PER_CYCLE,
    cache: ResultCache | None = CACHE,
    executor=local_executor,
    initial: list[tuple[float, ...] | None] | None = None,
    coarse_start: int | None = None,
    periodic_rtol: float | None = None,
    guides: list[np.ndarray | None] | None = None,
) -> list[StateResult]:
    """Solve cases (of any number of designs) in one batch; results in the order of cases.

    Cases found in ``cache`` are not solved again; duplicates within ``cases`` are solved
    once (with ``cache=None``: duplicates of the same design object). ``executor`` runs
    the batch (:mod:`fleetpower.executors`). ``initial`` gives, per
    case, a starting guess of the engine unknowns in place of the topology's (a near
    solution's :attr:`StateResult.x_start`); the engine's coarse first solve starts from
    it, and the result does not depend on it beyond the solver's periodicity tolerance.
    ``samples_per_cycle`` is the accuracy setting (steps per mains cycle; the default is
    chosen by measurement, DEVELOPERS.md "Accuracy per cost"). ``coarse_start`` sets the
    steps of the engine's coarse first solve (None: the engine's default; 0: none); it
    changes the cost, not the result (beyond the periodicity tolerance), so it is not part
    of the cache key. ``periodic_rtol`` (None: the engine's default) is the other half of
    an accuracy setting (the periodicity tolerance); it is part of the key. ``guides``
    gives, per case, a near solution's :attr:`StateResult.x_cycle` at the same
    ``samples_per_cycle`` (or None), along which the engine predicts its time steps where
    a device switches: like ``initial``, it changes the cost, not the result beyond the
    tolerances.
    """
    # without a cache, duplicates are found by object (hashing each design's content costs
    # ~40 us a case, a sixth of a spread sample's solve at its accuracy setting)
    keys = ([case_key(c, samples_per_cycle, periodic_rtol) for c in cases]
            if cache is not None else
            [(id(c.design), c.state, float(c.mains_factor), c.load_a) for c in cases])
    out: list[StateResult | None] = [None] * len(cases)
    todo: dict[tuple, list[int]] = {}
    for k, key in enumerate(keys):
        hit = cache.get(key) if cache is not None else None
        if hit is not None:
            out[k] = hit
        else:
            todo.setdefault(key, []).append(k)
    # the one dispatch on the kind of topology: direct ones give their figures themselves
    simulated = {id(d): d.topology_impl.simulated for d in {id(c.design): c.design
                                                             for c in cases}.values()}
    for key in [k for k, idx in todo.items() if not simulated[id(cases[idx[0]].design)]]:
        idx = todo.pop(key)
        res = _direct_result(cases[idx[0]], samples_per_cycle)
        if cache is not None:
            cache.put(key, res)
        for k in idx:
            out[k] = res
    if todo:
        first = [idx[0] for idx in todo.values()]
        rows, x0s = zip(*(engine_row(cases[k]) for k in first), strict=True)
        x0 = np.array(x0s)
        if initial is not None:
            given = [r for r, k in enumerate(first) if initial[k]]
            if given:
                x0[given] = np.array([initial[first[r]] for r in given], dtype=float)
        labels = [f"{cases[k].design.name} / {cases[k].state} at "
                  f"{cases[k].mains_factor:.2f}x mains" for k in first]
        guide_rows = None
        if guides is not None and any(guides[k] is not None for k in first):
            guide_rows = np.full((len(first), samples_per_cycle, layout.N_STATES), np.nan)
            for r, k in enumerate(first):
                if guides[k] is not None:
                    guide_rows[r] = guides[k]
        try:
            (sol,) = executor(solve_batch, [Batch(np.array(rows), x0, samples_per_cycle, labels,
                                                  coarse_start, periodic_rtol, guide_rows)])
        except SolverError as exc:
            raise _explained(exc, [cases[k].design for k in first]) from None
        solved = _state_results([cases[k] for k in first], sol)
        if cache is not None:
            cache.solves += len(first)
        for key, res in zip(todo, solved, strict=True):
            if cache is not None:
                cache.put(key, res)
            for k in todo[key]:
                out[k] = res
    return out  # type: ignore[return-value]


def _explained(exc: SolverError, designs: list[Design]) -> SolverError:
    """The solver's refusal, with the inputs outside the range of small mains gadgets
    named when there are any (the likely reason)."""
    outside = unique(w for d in designs for w in design_warnings(d))
    if not outside:
        return exc
    return SolverError(f"{exc}; outside the range of small mains gadgets: "
                       + "; ".join(f"design '{w.design}' {w.short}" for w in outside))


def simulate_cases(
    design: Design,
    cases: list[tuple[str, float, float | None]],
    samples_per_cycle: int = DEFAULT_SAMPLES_PER_CYCLE,
) -> list[StateResult]:
    """Solve (state, mains factor, output-current override or None) cases of one design."""
    return run([Case(design, s, f, load) for s, f, load in cases], samples_per_cycle)


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
    return simulate_cases(design, [(s, f, None) for f in mains_factors for s in states],
                          samples_per_cycle)
