"""A spread study: a production run of one design, sampled or cornered, solved in batches.

Data flows one way: :class:`~fleetpower.io.design_file.Design` (nominals and declared
tolerances) -> :func:`plan_spread` (the toleranced values, the samples or corners, a warm
start from the nominal solution) -> chunks of samples, each solved as ONE batch through
:func:`fleetpower.simulate.run` by :func:`evaluate_chunk` and reduced to per-sample
scalars (never waveforms) -> :class:`~fleetpower.spread.statistics.SpreadStatistics` ->
:class:`SpreadResult`. Chunks are work items of a replaceable executor
(:mod:`fleetpower.executors`: in this process, or on a Dask cluster); a sample's values
depend only on (seed, sample index), so any chunking and any number of workers give the
same result.

Stresses and limits are evaluated on each unit at its own sampled mains (the mains band
takes the place of the fixed +10 % of a nominal ``unit`` run).

Owns: :class:`SpreadPlan`, :class:`SpreadResult`, :class:`AgeingResult`,
:func:`plan_spread`, :func:`run_spread`, :func:`run_ageing`. May import ``simulate``,
``unit``, ``limits``, ``executors`` and the rest of ``spread``; never ``fleet``,
``compare``, reports or the CLI; no engine index.
"""

from __future__ import annotations

import dataclasses
import functools
import itertools
import time
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from .. import simulate as sim
from .._heap import frozen_during
from ..errors import InputError, SolverError
from ..executors import Executor, chunk_ranges, local_executor
from ..gadget_range import RangeWarning, unique
from ..io.design_file import ConverterOutput, Design
from ..topologies.capacitive_dropper import charge_pump_limit_a
from .ageing import DEFAULT_LOSS_PER_YEAR, capacitance_at_year_f, loss_rate_per_year
from .sampling import corner_values, monte_carlo_values
from .statistics import SpreadStatistics
from .tolerance import TOLERANCE_KEYS, PartSpread, default_spreads

#: samples per work item: large enough that a batch keeps every core busy, small enough
#: that a chunk's waveforms (2048 samples x 21 probes x 8 B per case) stay near 100 MB
DEFAULT_CHUNK = 128
#: a spread's accuracy setting: steps (= samples) per mains cycle of each unit's solve
#: (``spread --steps``). Chosen by measurement against the independent reference
#: (benchmarks/bench_accuracy.py, DEVELOPERS.md "Accuracy per cost"): 256 steps keep the
#: worst error of every reference case within 36 % of its tolerance (0.36 % of I rms, the
#: largest; P within 0.011 %), below a 10,000-unit spread's own sampling error of its
#: percentiles, at an eighth of the cost of ``unit``'s 2048
SPREAD_SAMPLES_PER_CYCLE = 256
#: and its periodicity tolerance (|x(T) - x(0)| / V_peak of the settled cycle): the error
#: it leaves (a stored-energy change of ~1e-5 of P over a cycle) is two orders below the
#: discretisation error at 256 steps; ``unit`` keeps the engine's 1e-9
SPREAD_PERIODIC_RTOL = 1e-6
#: the fewest and most steps per cycle ``--steps`` accepts (the harmonics up to H_MAX = 50
#: need more than 100 samples per cycle)
STEPS_RANGE = (128, 16384)
#: fraction of units that must still deliver the heaviest state: the P5 unit
P5_FRACTION = 0.95
#: EPS load points as fractions of the rated output (as in the unit analysis)
EPS_LOADS = (0.0, 0.25, 0.5, 0.75, 1.0)

Progress = Callable[[int, int], None]


def nominal_values(design: Design) -> dict[str, float]:
    """Key path -> nominal SI value of every toleranceable key the design has."""
    out = {}
    for key in TOLERANCE_KEYS:
        table, name = key.split(".", 1)
        value = getattr(design.parts if table == "parts" else design.mains, name, None)
        if isinstance(value, float):
            out[key] = value
    return out


def study_spreads(
    design: Design,
    mains_band: list[PartSpread] | None = None,
    class_defaults: bool | None = None,
) -> list[PartSpread]:
    """Every toleranced value of a run: declared, the mains band, then class defaults.

    Parameters
    ----------
    design : Design
    mains_band : list of PartSpread, optional
        A band for this run (replaces any the design declares).
    class_defaults : bool, optional
        Whether undeclared parts take their class's usual band (default: the design's
        ``[spread] part_class_defaults``, itself true by default).
    """
    spec = design.spread
    out = [s for s in spec.parts if not (mains_band and s.key.startswith("mains."))]
    out += list(mains_band) if mains_band else list(spec.mains_band)
    use_defaults = spec.part_class_defaults if class_defaults is None else class_defaults
    if use_defaults:
        out += default_spreads(nominal_values(design), out)
    return out


def sample_design(design: Design, spreads: tuple[PartSpread, ...], row: np.ndarray) -> Design:
    """The design with each toleranced value replaced by this sample's."""
    parts, mains = {}, {}
    for s, v in zip(spreads, row, strict=True):
        table, name = s.key.split(".", 1)
        (parts if table == "parts" else mains)[name] = float(v)
    return design.model_copy(update={"parts": design.parts.model_copy(update=parts),
                                     "mains": design.mains.model_copy(update=mains)})


@dataclass(frozen=True)
class SpreadPlan:
    """Everything a worker needs to evaluate any chunk of a run (pickles to a cluster)."""

    design: Design
    spreads: tuple[PartSpread, ...]
    mode: str  # "monte-carlo" | "corners"
    seed: int
    n: int
    corner_table: np.ndarray | None
    corner_labels: tuple[str, ...]
    samples_per_cycle: int
    #: nominal solution's unknowns at t = 0 per case of a sample (warm start)
    warm: tuple[tuple[float, ...], ...]
    limits_file: str | None = None
    #: evaluate every unit against the limit sets (the slowest per-unit step: ~0.17 ms a
    #: unit of the lean dropper, against ~0.2 ms for its solve)
    check_limits: bool = True
    #: periodicity tolerance of each unit's solve (None: the engine's default)
    periodic_rtol: float | None = None
    #: the fit of each case's settled unknowns at t = 0 on a sample's deviations from the
    #: nominals (:class:`WarmFit`), made on pilot samples; None: the samples start from
    #: the nominal solution ``warm``
    warm_fit: WarmFit | None = None
    #: the nominal unit's inputs and results outside the range of small mains gadgets
    range_warnings: tuple[RangeWarning, ...] = ()
    #: per case of a sample, the nominal solution's unknowns over its settled cycle
    #: (:attr:`~fleetpower.simulate.StateResult.x_cycle`), which guide the samples' time
    #: steps where a device switches; () when the samples start cold (no ``warm``)
    warm_cycles: tuple[np.ndarray, ...] = ()

    def starts(self, values: np.ndarray) -> list[tuple[float, ...]] | None:
        """Fitted starting unknowns of every case of the samples ``values`` (flat, sample
        by sample), or None without a fit (then the nominal's solution ``warm``, if any)."""
        if not self.warm or self.warm_fit is None:
            return None
        x = self.warm_fit.predict(self.spreads, values)  # per case: (samples, 4)
        return [tuple(float(v) for v in x[c][s]) for s in range(len(values))
                for c in range(len(x))]

    def values(self, start: int, stop: int) -> np.ndarray:
        """Toleranced values of samples ``start .. stop-1`` (one row each) [SI]."""
        if self.mode == "corners":
            return self.corner_table[start:stop]
        return monte_carlo_values(self.spreads, self.seed, start, stop)


def _sample_cases(design: Design) -> list[sim.Case]:
    """The cases solved for one unit: every state, then the EPS load points if any."""
    cases = [sim.Case(design, s) for s in design.states]
    if isinstance(design.output, ConverterOutput):
        state = next(iter(design.states))
        out = design.output
        cases += [sim.Case(design, state, 1.0, f * out.rated_power / out.voltage)
                  for f in EPS_LOADS]
    return cases


#: a nominal solve needing more shooting cycles than this warm-starts the samples (a
#: dropper's cold start takes about 9; a switch-mode supply's about 3, which a warm start
#: from another unit's solution does not improve and can lead astray)
WARM_START_ABOVE_CYCLES = 4


def _warm_start(design: Design, samples_per_cycle: int, nominal=None
                ) -> tuple[tuple[float, ...], ...]:
    """The nominal solution's unknowns at t = 0 per case of a unit, or () for a cold start."""
    # decided on the cold start's cycles (the engine's coarse first solve left out: a
    # warm-started sample skips it, and it would blur the dropper/switch-mode contrast)
    if nominal is None:
        nominal = _nominal(design, samples_per_cycle)
    if max(r.iterations for r in nominal) <= WARM_START_ABOVE_CYCLES:
        return ()
    return tuple(r.x_start for r in nominal)


#: pilot samples the warm-start fit is made on: at least this many, and at least two per
#: fitted coefficient
PILOT_SAMPLES = 16
#: a fit beyond the linear one (quadratic, or cubic in a few values) is made when its
#: pilots are at most this fraction of the run (else the next lower order): its pilots
#: are solved twice, once from the nominal to fit on
QUADRATIC_PILOT_SHARE = 0.25
#: the cubic fit adds every third-order product of this many toleranced values: those the
#: pilots' quadratic fit finds most curved (a full cubic in 7 values has 120 coefficients)
CUBIC_VALUES = 3


def _deviations(spreads, values: np.ndarray) -> np.ndarray:
    """[1, relative deviation of each toleranced value from its nominal] per sample."""
    nominal = np.array([s.nominal for s in spreads], dtype=float)
    rel = np.asarray(values, dtype=float) / np.where(nominal != 0.0, nominal, 1.0) - 1.0
    return np.column_stack([np.ones(len(rel)), rel])


def _pairs(k: int) -> list[tuple[int, int]]:
    """Columns (of [1, u_1 .. u_k]) of every second-order product u_i u_j, i <= j."""
    return [(i, j) for i in range(1, k + 1) for j in range(i, k + 1)]


def _features(u: np.ndarray, order: int, cubic: tuple[int, ...] = ()) -> np.ndarray:
    """The fit's regressors: [1, u_i]; from order 2 every u_i u_j (i <= j); at order 3
    also every u_a u_b u_c (a <= b <= c) of the columns ``cubic``."""
    if order < 2:
        return u
    products = [u[:, i] * u[:, j] for i, j in _pairs(u.shape[1] - 1)]
    if order >= 3:
        products += [u[:, a] * u[:, b] * u[:, c]
                     for a, b, c in itertools.combinations_with_replacement(cubic, 3)]
    return np.column_stack([u, *products])


def _n_features(k: int, order: int) -> int:
    n = 1 + k + (k * (k + 1) // 2 if order >= 2 else 0)
    if order >= 3:
        m = min(CUBIC_VALUES, k)
        n += m * (m + 1) * (m + 2) // 6
    return n


def _pilot_size(n: int, k: int) -> tuple[int, int | None]:
    """Pilot samples and the fit's order: 3 (quadratic and cubic in :data:`CUBIC_VALUES`
    values), 2 or 1 (None: no fit, too few samples)."""
    for order in (3, 2):
        m = max(PILOT_SAMPLES, 2 * _n_features(k, order))
        if m <= QUADRATIC_PILOT_SHARE * n:
            return m, order
    lin = max(PILOT_SAMPLES, 2 * _n_features(k, 1))
    return (lin, 1) if lin <= n else (0, None)


def _most_curved(u: np.ndarray, xs: list[np.ndarray], count: int) -> tuple[int, ...]:
    """The ``count`` columns of ``u`` (1..k) along which the settled unknowns ``xs`` (per
    case, (samples, 4)) bend most: by the quadratic fit's second-order terms, each term's
    coefficient times the spread of its factors over the spread of the unknown (the
    largest of the four unknowns), summed over the terms a value appears in and over the
    cases. Third-order terms are largest
    where the second-order ones are; the linear terms say nothing of that (a sample's
    reservoir voltage follows its zener's almost linearly). Ties: the earlier column."""
    k = u.shape[1] - 1
    a = _features(u, 2)
    su = u[:, 1:].std(axis=0)
    curved = np.zeros(k)
    for x in xs:
        fit, *_ = np.linalg.lstsq(a, x, rcond=None)
        sx = x.std(axis=0)
        sx = np.where(sx > 0.0, sx, 1.0)
        for n, (i, j) in enumerate(_pairs(k)):
            w = float(np.max(np.abs(fit[1 + k + n]) / sx)) * su[i - 1] * su[j - 1]
            curved[i - 1] += w
            if j != i:
                curved[j - 1] += w
    ranked = np.argsort(-curved, kind="stable")[:count]
    return tuple(sorted(int(c) + 1 for c in ranked))


@dataclass(frozen=True)
class WarmFit:
    """Per case of a sample, the least-squares fit of the settled unknowns at t = 0 on the
    sample's relative deviations from the nominals (see :func:`_warm_fit`)."""

    #: 1 linear, 2 quadratic, 3 quadratic and cubic in the values ``cubic``
    order: int
    #: per case, shape (features, 4)
    coefficients: tuple[np.ndarray, ...]
    #: columns of the deviations (1..k, in the order of the plan's spreads) whose
    #: third-order products are fitted (order 3)
    cubic: tuple[int, ...] = ()

    def predict(self, spreads, values: np.ndarray) -> list[np.ndarray]:
        a = _features(_deviations(spreads, values), self.order, self.cubic)
        return [a @ c for c in self.coefficients]


def _warm_fit(design: Design, spreads, n: int, values_of, warm, samples_per_cycle: int,
              periodic_rtol, guides=()) -> WarmFit | None:
    """Per case, the least-squares fit of the pilot samples' settled unknowns on their
    deviations: cubic in the :data:`CUBIC_VALUES` most curved values and quadratic in all
    when the run is large enough to pay for its pilots, else quadratic, else linear; a
    model of the solution around the nominal.

    Started from it, a sample's first cycle is within the fit's residual of its fixed
    point: with the cubic fit (92 pilots), 98 % of the lean desk-sensor dropper's samples
    are periodic to 1e-6 after one cycle (the quadratic fit, 72 pilots: 80 %; the linear
    fit: 1.5 %; the nominal's own start took three cycles on average and up to 25 near a
    zener's knee; DEVELOPERS.md "Accuracy per cost"). It changes where each solve starts,
    not where it ends (the same fixed point to the periodicity tolerance); it depends only
    on the plan, so any chunking gives the same samples.
    """
    m, order = _pilot_size(n, len(spreads))
    if not warm or order is None:
        return None
    values = values_of(0, m)
    designs = [sample_design(design, spreads, r) for r in values]
    solved = _solve_units(designs, warm, samples_per_cycle, periodic_rtol, guides=guides)
    if any(r is None for r in solved):
        return None
    u = _deviations(spreads, values)
    xs = [np.array([res[c].x_start for res in solved], dtype=float) for c in range(len(warm))]
    cubic = _most_curved(u, xs, min(CUBIC_VALUES, len(spreads))) if order == 3 else ()
    a = _features(u, order, cubic)
    fits = tuple(np.linalg.lstsq(a, x, rcond=None)[0] for x in xs)
    return WarmFit(order, fits, cubic)


def _nominal(design: Design, samples_per_cycle: int) -> list[sim.StateResult]:
    """The nominal unit's cases solved cold (the warm start and the range check read it)."""
    return sim.run(_sample_cases(design), samples_per_cycle, cache=None, coarse_start=0)


def plan_spread(
    design: Design,
    *,
    samples: int = 500,
    seed: int = 0,
    corners: bool = False,
    mains_band: list[PartSpread] | None = None,
    class_defaults: bool | None = None,
    samples_per_cycle: int = SPREAD_SAMPLES_PER_CYCLE,
    limits_file: str | None = None,
    check_limits: bool = True,
    periodic_rtol: float | None = SPREAD_PERIODIC_RTOL,
) -> SpreadPlan:
    """Decide the toleranced values and the samples (or corners) of a run.

    Solves the nominal design once (its solution warm-starts every sample).
    ``samples_per_cycle`` and ``periodic_rtol`` are the run's accuracy setting (defaults
    :data:`SPREAD_SAMPLES_PER_CYCLE`, :data:`SPREAD_PERIODIC_RTOL`; ``unit``'s are
    2048 steps and the engine's 1e-9).

    Raises
    ------
    InputError
        On a bad sample count or seed, or more corners than a corner analysis enumerates.
    """
    if not design.topology_impl.simulated:
        raise InputError(design.source, "topology",
                         f"a {design.topology} supply has no parts whose tolerances could be "
                         "spread (it is known only by what was measured)")
    if not corners and samples < 1:
        raise InputError(design.source, "--samples", "needs at least one sample")
    if seed < 0:
        raise InputError(design.source, "--seed", "must be a non-negative integer")
    lo, hi = STEPS_RANGE
    if not (lo <= samples_per_cycle <= hi and samples_per_cycle % 2 == 0):
        raise InputError(design.source, "--steps",
                         f"{samples_per_cycle} steps per cycle: an even number from {lo} to "
                         f"{hi} (default {SPREAD_SAMPLES_PER_CYCLE})")
    spreads = tuple(study_spreads(design, mains_band, class_defaults))
    table, labels = None, ()
    if corners:
        table, lab = corner_values(spreads, file=design.source, where="--corners")
        labels = tuple(lab)
        n = len(table)
    else:
        n = int(samples)
    nominal = _nominal(design, samples_per_cycle)
    outside = tuple(unique(w for r in nominal[:len(design.states)] for w in r.range_warnings))
    warm = _warm_start(design, samples_per_cycle, nominal)
    plan = SpreadPlan(design, spreads, "corners" if corners else "monte-carlo", int(seed), n,
                      table, labels, samples_per_cycle, warm,
                      limits_file, check_limits, periodic_rtol, range_warnings=outside,
                      warm_cycles=tuple(r.x_cycle for r in nominal) if warm else ())
    fit = _warm_fit(design, spreads, n, plan.values, plan.warm, samples_per_cycle,
                    periodic_rtol, plan.warm_cycles)
    return dataclasses.replace(plan, warm_fit=fit) if fit is not None else plan


@functools.lru_cache(maxsize=1024)
def _slug(text: str) -> str:
    """``text`` as a figure-name part (loss labels, stress items and units: a few dozen
    texts asked ~24 times per unit, half of a unit's figures when built each time)."""
    return "_".join("".join(c if c.isalnum() else " " for c in text.lower()).split())


def _unit_figures(design: Design, results: list, limits_file,
                  check_limits: bool = True) -> tuple[dict, dict]:
    """Scalars and failure flags of one unit from its solved cases."""
    from ..limits.applicability import unit_compliance
    from ..unit import UnitAnalysis

    n_states = len(design.states)
    states, eps_res = results[:n_states], results[n_states:]
    figures, failing = {}, {}
    for r in states:
        q = r.pq
        for name, value in (("p_w", q.p_w), ("s_va", q.s_va), ("i_rms_a", q.i_rms_a),
                            ("pf", q.pf), ("thd_i_pct", q.thd_i_pct),
                            ("v_out_min_v", r.v_out_min_v), ("v_dc_min_v", r.v_dc_min_v)):
            figures[f"{r.state}|{name}"] = value
        for label, w in r.losses_w.items():
            figures[f"{r.state}|loss_{_slug(label)}_w"] = w
        failing[f"regulation|state '{r.state}' out of regulation"] = not r.in_regulation
    stresses = design.topology_impl.stresses(design, states)
    for s in stresses:
        figures[f"stress|{_slug(s.item)}_{_slug(s.unit)}"] = s.value
        if s.verdict in ("pass", "fail"):
            failing[f"stress|{s.item}"] = s.verdict == "fail"
    eps = None
    if eps_res:
        from ..limits import average_active_efficiency

        effs = [r.balance.delivered_w / r.pq.p_w for r in eps_res[1:]]
        eps = (eps_res[0].pq.p_w, average_active_efficiency(effs), effs)
        figures["eps|no_load_p_w"] = eps[0]
        figures["eps|average_efficiency"] = eps[1]
    if not check_limits:
        return figures, failing
    unit = UnitAnalysis(design=design, states=states, stresses=stresses, warnings=[],
                        caution=None, max_deliverable_a=None, hand=None, eps=eps)
    for row in unit_compliance(design, unit, limits_file=limits_file):
        if row["verdict"] in ("pass", "fail"):
            # a row citing several rules ("a + b": the plug-pin discharge) names the rules it
            # breaks when it fails, every rule applied when it passes: one flag per rule, so
            # a check keeps one name whichever rules a unit breaks
            for rule in row["set"].split(" + "):
                key = f"limit|{rule}: {row['quantity']}"
                failing[key] = failing.get(key, False) or row["verdict"] == "fail"
    return figures, failing


@dataclass(frozen=True)
class ChunkOutcome:
    """Per-sample scalars and flags of one chunk (what travels back from a worker)."""

    start: int
    figures: dict[str, np.ndarray]
    failing: dict[str, np.ndarray]
    values: np.ndarray


def _solve_units(designs: list[Design], warm, samples_per_cycle, periodic_rtol=None,
                 starts=None, guides=()):
    """Every case of every unit in one batch; per unit its results (None if unsolved).

    Warm-started from ``starts`` (per case, flat: :meth:`SpreadPlan.starts`) or else the
    nominal solution ``warm`` when the plan has one, its time steps guided by the nominal
    cycles ``guides`` (per case of a unit: :attr:`SpreadPlan.warm_cycles`); if any unit
    then finds no steady state, the chunk is solved again from the topologies' own
    initial guesses (one batch), and only if that fails too unit by unit, marking the
    failing ones.
    """
    per = [_sample_cases(d) for d in designs]
    cases = [c for cs in per for c in cs]
    attempts = [None]
    if starts:
        attempts.insert(0, list(starts))
    elif warm:
        attempts.insert(0, [w for cs in per for w in warm[: len(cs)]])
    along = [g for cs in per for g in guides[: len(cs)]] if guides else None
    for initial in attempts:
        try:
            # from the nominal's solution, straight at the run's resolution: a coarse
            # first solve saves nothing at a spread's few steps (DEVELOPERS.md)
            flat = sim.run(cases, samples_per_cycle, cache=None, initial=initial,
                           coarse_start=0 if initial else None, periodic_rtol=periodic_rtol,
                           guides=along if initial else None)
        except SolverError:
            continue
        out, k = [], 0
        for cs in per:
            out.append(flat[k:k + len(cs)])
            k += len(cs)
        return out
    # one unit without a steady state must not sink the chunk
    out = []
    for cs in per:
        try:
            out.append(sim.run(cs, samples_per_cycle, cache=None, periodic_rtol=periodic_rtol))
        except SolverError:
            out.append(None)
    return out


@frozen_during
def evaluate_chunk(plan: SpreadPlan, bounds: tuple[int, int]) -> ChunkOutcome:
    """Solve the samples ``bounds`` = (start, stop) of a run as one batch; keep scalars.

    A module-level function of picklable arguments: the executors' work item.
    """
    start, stop = bounds
    values = plan.values(start, stop)
    designs = [sample_design(plan.design, plan.spreads, row) for row in values]
    solved = _solve_units(designs, plan.warm, plan.samples_per_cycle, plan.periodic_rtol,
                          plan.starts(values), plan.warm_cycles)
    from ..limits.tables import tables_held

    rows_fig, rows_fail = [], []
    with tables_held():  # the limit tables' files checked once a chunk, not per unit
        for d, res in zip(designs, solved, strict=True):
            if res is None:
                rows_fig.append({})
                rows_fail.append({"solver|no periodic steady state": True})
                continue
            f, x = _unit_figures(d, res, plan.limits_file, plan.check_limits)
            x["solver|no periodic steady state"] = False
            rows_fig.append(f)
            rows_fail.append(x)
    fig_names = list(dict.fromkeys(k for r in rows_fig for k in r))
    fail_names = list(dict.fromkeys(k for r in rows_fail for k in r))
    figures = {k: np.array([r.get(k, np.nan) for r in rows_fig], dtype=float)
               for k in fig_names}
    failing = {k: np.array([r.get(k, True if k.startswith("solver|") else False)
                            for r in rows_fail], dtype=bool) for k in fail_names}
    return ChunkOutcome(start, figures, failing, values)


@dataclass(frozen=True)
class AgeingResult:
    """Year-by-year delivery of the heaviest state as the series capacitor ages."""

    state: str
    load_a: float
    loss_per_year: float
    voltage_accelerated: bool
    years: tuple[int, ...]
    capacitance_factor: tuple[float, ...]
    delivering_fraction: tuple[float, ...]
    v_dc_min_p5_v: tuple[float, ...]
    charge_pump_nominal_a: tuple[float, ...]
    units: int
    #: first year at which fewer than 95 % of units deliver (the P5 unit fails), or None
    p5_fails_year: int | None


@dataclass(frozen=True)
class SpreadResult:
    """A spread run: its plan, the per-sample statistics, and ageing if asked."""

    plan: SpreadPlan
    statistics: SpreadStatistics
    requested: int
    done: int
    interrupted: bool
    #: wall time of the run [s]: the solves, each unit's figures and stresses and its limit
    #: checks (JSON `solve_s`)
    solve_s: float
    ageing: AgeingResult | None = None
    values: dict[int, np.ndarray] = field(default_factory=dict)

    def sample_values(self, index: int) -> dict[str, float]:
        """Toleranced values of sample ``index`` (key path -> SI value)."""
        row = self.values[index]
        return {s.key: float(v) for s, v in zip(self.plan.spreads, row, strict=True)}

    def label(self, index: int) -> str:
        """How to name a sample: its corner, or its index."""
        if self.plan.mode == "corners":
            return self.plan.corner_labels[index]
        return f"sample {index}"


def run_spread(
    plan: SpreadPlan,
    *,
    executor: Executor = local_executor,
    chunk_size: int = DEFAULT_CHUNK,
    progress: Progress | None = None,
) -> SpreadResult:
    """Solve every sample of a plan, chunk by chunk, through ``executor``.

    An interrupt (Ctrl-C) ends the run after the chunk in flight; the result then holds
    the samples done so far, ``interrupted`` set.
    """
    chunks = chunk_ranges(plan.n, chunk_size)
    stats = SpreadStatistics()
    values: dict[int, np.ndarray] = {}
    done = 0

    def on_done(i, outcome: ChunkOutcome):
        nonlocal done
        stats.add(outcome.start, outcome.figures, outcome.failing)
        for j, row in enumerate(outcome.values):
            values[outcome.start + j] = row
        done += len(outcome.values)
        if progress is not None:
            progress(done, plan.n)

    t0 = time.perf_counter()
    interrupted = False
    try:
        executor(functools.partial(evaluate_chunk, plan), chunks, on_done=on_done)
    except KeyboardInterrupt:
        interrupted = True
    return SpreadResult(plan, stats, plan.n, done, interrupted or done < plan.n,
                        time.perf_counter() - t0, values=values)


# ----------------------------------------------------------------------------------
# ageing
# ----------------------------------------------------------------------------------
def heaviest_state(design: Design) -> str:
    """The state drawing the largest output current (first in file order on a tie)."""
    return max(design.states, key=design.load_current_a)


def ageing_rate(design: Design) -> float:
    """The design's capacitance loss rate [1/year] (declared or default; accelerated by
    the voltage on the capacitor's ac rating when the design asks)."""
    spec = design.spread
    base = DEFAULT_LOSS_PER_YEAR if spec.capacitor_loss_per_year is None \
        else spec.capacitor_loss_per_year
    rating = getattr(design.parts, "capacitor_voltage_rating", None)
    kind = getattr(design.parts, "capacitor_rating_type", "ac")
    if spec.capacitor_loss_voltage_accelerated and rating is not None and kind == "ac":
        return loss_rate_per_year(base, design.mains.voltage, rating)
    return loss_rate_per_year(base)


@frozen_during
def evaluate_ageing_chunk(plan: SpreadPlan, years: tuple[int, ...], rate: float,
                          bounds: tuple[int, int]) -> tuple[int, np.ndarray, np.ndarray]:
    """Heaviest state of samples ``bounds`` at every year, in one batch.

    Returns (start, in_regulation (samples, years), v_dc_min_v (samples, years)).
    """
    start, stop = bounds
    state = heaviest_state(plan.design)
    k = list(plan.design.states).index(state)
    values = plan.values(start, stop)
    cases = []
    for row in values:
        d = sample_design(plan.design, plan.spreads, row)
        for y in years:
            c = capacitance_at_year_f(d.parts.series_capacitance, y, rate)
            aged = d.model_copy(update={"parts": d.parts.model_copy(
                update={"series_capacitance": c})})
            cases.append(sim.Case(aged, state))
    ok, vmin = np.zeros(len(cases), bool), np.full(len(cases), np.nan)
    attempts = ([[plan.warm[k]] * len(cases)] if plan.warm else []) + [None]
    along = [plan.warm_cycles[k]] * len(cases) if plan.warm_cycles else None
    for initial in attempts:
        try:
            res = sim.run(cases, plan.samples_per_cycle, cache=None, initial=initial,
                          periodic_rtol=plan.periodic_rtol,
                          guides=along if initial else None)
        except SolverError:
            continue
        ok = np.array([r.in_regulation for r in res])
        vmin = np.array([r.v_dc_min_v for r in res])
        break
    else:
        for j, c in enumerate(cases):
            try:
                (r,) = sim.run([c], plan.samples_per_cycle, cache=None,
                               periodic_rtol=plan.periodic_rtol)
                ok[j], vmin[j] = r.in_regulation, r.v_dc_min_v
            except SolverError:
                pass  # no steady state: counted as not delivering
    shape = (stop - start, len(years))
    return start, ok.reshape(shape), vmin.reshape(shape)


def run_ageing(
    plan: SpreadPlan,
    years: int,
    *,
    units: int | None = None,
    executor: Executor = local_executor,
    chunk_size: int = DEFAULT_CHUNK,
    progress: Progress | None = None,
) -> AgeingResult:
    """Whether each unit still delivers its heaviest state, year by year.

    Parameters
    ----------
    plan : SpreadPlan
        Its samples (or corners) are the units aged.
    years : int
        Last year evaluated; years 0..``years`` are solved.
    units : int, optional
        Age only the first ``units`` samples (default: all of the plan's).

    Raises
    ------
    InputError
        When the design has no series capacitor to age.
    """
    design = plan.design
    if not hasattr(design.parts, "series_capacitance"):
        raise InputError(design.source, "--years",
                         "ageing applies to the series capacitor of a capacitive dropper; "
                         f"a {design.topology} has none that sets its output")
    if years < 0:
        raise InputError(design.source, "--years", "cannot be negative")
    n = plan.n if units is None else min(plan.n, units)
    grid = tuple(range(years + 1))
    rate = ageing_rate(design)
    ok = np.zeros((n, len(grid)), bool)
    vmin = np.full((n, len(grid)), np.nan)
    done = 0

    def on_done(i, out):
        nonlocal done
        start, o, v = out
        ok[start:start + len(o)] = o
        vmin[start:start + len(o)] = v
        done += len(o)
        if progress is not None:
            progress(done, n)

    work = functools.partial(evaluate_ageing_chunk, plan, grid, rate)
    executor(work, chunk_ranges(n, max(1, chunk_size // len(grid))), on_done=on_done)
    frac = ok.mean(axis=0)
    p5_year = next((y for y, f in zip(grid, frac, strict=True) if f < P5_FRACTION), None)
    state = heaviest_state(design)
    factors = tuple(float(capacitance_at_year_f(1.0, y, rate)) for y in grid)
    pump = tuple(charge_pump_limit_a(design.model_copy(update={"parts": design.parts.model_copy(
        update={"series_capacitance": design.parts.series_capacitance * f})})) for f in factors)
    return AgeingResult(
        state=state, load_a=design.load_current_a(state), loss_per_year=rate,
        voltage_accelerated=design.spread.capacitor_loss_voltage_accelerated,
        years=grid, capacitance_factor=factors,
        delivering_fraction=tuple(float(f) for f in frac),
        v_dc_min_p5_v=tuple(float(np.nanpercentile(vmin[:, j], 5)) if np.isfinite(
            vmin[:, j]).any() else float("nan") for j in range(len(grid))),
        charge_pump_nominal_a=pump, units=n, p5_fails_year=p5_year)


# ----------------------------------------------------------------------------------
# a design at a percentile of its own spread (for fleets and comparisons)
# ----------------------------------------------------------------------------------
def parse_percentile(text: str, *, file: str = "<input>", key: str = "--at") -> float:
    """Read ``"P95"`` (or ``"95"``) as 95.0; one-line InputError otherwise."""
    raw = str(text).strip().upper().removeprefix("P")
    try:
        value = float(raw)
    except ValueError:
        raise InputError(file, key, f"{text!r} is not a percentile such as P95") from None
    if not 0.0 <= value <= 100.0:
        raise InputError(file, key, f"{text!r} is not a percentile between P0 and P100")
    return value


def percentile_design(
    design: Design, percentile: float, *, samples: int = 100, seed: int = 0,
    executor: Executor = local_executor,
) -> tuple[Design, str]:
    """The unit of a design's production spread at ``percentile`` of its input power.

    The design's parts spread as declared (with the part-class defaults unless the design
    turns them off); its mains stay as given (a fleet's site sets them). Units are ranked
    by their input power averaged over the design's states; the unit of rank
    ``round(percentile / 100 * (n - 1))`` (nearest rank) is returned as a design.

    Returns
    -------
    design : Design
        The percentile unit (same name and source; its parts are the unit's values).
    note : str
        One line saying which unit entered and how it was chosen.
    """
    spreads = [s for s in study_spreads(design) if not s.key.startswith("mains.")]
    plan = SpreadPlan(design, tuple(spreads), "monte-carlo", int(seed), int(samples), None, (),
                      sim.DEFAULT_SAMPLES_PER_CYCLE,
                      _warm_start(design, sim.DEFAULT_SAMPLES_PER_CYCLE),
                      check_limits=False)
    res = run_spread(plan, executor=executor)
    if res.interrupted:
        raise KeyboardInterrupt
    p_mean = np.mean([res.statistics.values(f"{s}|p_w") for s in design.states], axis=0)
    p_mean = np.where(np.isfinite(p_mean), p_mean, np.inf)  # unsolved units rank last
    order = np.argsort(p_mean, kind="stable")
    rank = int(round(percentile / 100.0 * (len(order) - 1)))
    idx = int(res.statistics.sample_indices()[order[rank]])
    unit = sample_design(design, plan.spreads, res.values[idx])
    note = (f"{design.name}: the unit at P{percentile:g} of its own spread of input power "
            f"({samples} units, seed {seed}, {len(spreads)} toleranced parts; sample {idx}, "
            f"{p_mean[order[rank]]:.4g} W averaged over its states)")
    return unit, note


_PERCENTILE_UNITS: dict[tuple, tuple[Design, str]] = {}


def fleet_at_percentile(spec, percentile: float, *, samples: int = 100, seed: int = 0):
    """A fleet whose every design enters at ``percentile`` of its own spread.

    Parameters
    ----------
    spec : FleetSpec
        The fleet (its designs already on the site's mains).
    percentile : float
        E.g. 95 for the P95 unit (:func:`percentile_design`).

    Returns
    -------
    spec : FleetSpec
        The same fleet with each design replaced by its percentile unit.
    notes : list of str
        One line per design saying so (for the report).
    """
    from dataclasses import replace

    designs, notes = {}, []
    for path, design in spec.designs.items():
        key = (sim.design_key(design), float(percentile), int(samples), int(seed))
        if key not in _PERCENTILE_UNITS:
            _PERCENTILE_UNITS[key] = percentile_design(design, percentile, samples=samples,
                                                       seed=seed)
        designs[path], note = _PERCENTILE_UNITS[key]
        notes.append(note)
    return replace(spec, designs=designs), notes
