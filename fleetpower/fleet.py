"""Fleets: many units of several designs on a site's phases, over a day, and their cost.

Data flow: fleet file -> :class:`FleetSpec` (validated groups, site, tariff) ->
each distinct (design, state) simulated once on the site's mains (:func:`unit_catalogue`)
-> hourly occupancy tensor ``W[hour, phase, design-state]`` (units in each state per hour)
-> per-phase spectra ``W @ I[design-state, h]`` -> neutral, totals, energy, cost, limits.

The cost of evaluation grows with the number of distinct design-states and phases, not
with the number of units: a million units in a thousand groups is one small tensor product.

Conventions as in :mod:`fleetpower.analysis` and :mod:`fleetpower.aggregate`: consumer
sign, line-to-neutral voltages, complex rms phasors with a cosine reference, each phase's
spectrum referred to its own voltage and rotated into L1's frame for the neutral.
"""

from __future__ import annotations

import hashlib
import os
import sys
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from . import aggregate as A
from . import economics as E
from . import limits as L
from .analysis import H_MAX, phasors_vs_voltage
from .errors import InputError, suggest
from .inputs import Design, Mains, load_design
from .supply import simulate
from .units import parse_quantity

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

SYSTEMS = {"single-phase": "single", "split-phase": "split", "three-phase-wye": "wye"}
SUMMATIONS = ("phasor", "iec61000-3-6")
HOURS = 24
DAYS_PER_YEAR = 365.0
MONTHS_PER_YEAR = 12


# ----------------------------------------------------------------------------------
# specification
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class Site:
    """The supply the fleet hangs on."""

    system: str  # "single" | "split" | "wye" (aggregate's names)
    system_label: str
    v_ln_v: float
    f_hz: float
    isc_a: float | None = None
    isc_source: str = ""
    demand_current_a: float | None = None
    phase_rating_a: float | None = None
    neutral_rating_a: float | None = None
    currency: str = ""

    @property
    def phases(self) -> list[str]:
        return list(A.system_phases(self.system))


@dataclass(frozen=True)
class Tariff:
    """Prices; all optional except the energy price."""

    energy_price_by_hour: np.ndarray  # per kWh, 24 values
    demand_price: float = 0.0  # per kW (or kVA) per month
    demand_basis: str = "kW"
    reactive_price: float = 0.0  # per kvarh
    reactive_billing: str = "magnitude"
    co2_kg_per_kwh: float = 0.0


@dataclass(frozen=True)
class Group:
    """Units of one design on one phase (or spread over all) with one daily profile."""

    name: str
    design_path: Path
    count: int
    phase: str  # a phase name or "balanced"
    occupancy: np.ndarray  # (24, n_states): fraction of the group's units in each state
    peak_occupancy: np.ndarray | None  # (n_states,) coincident case from diversity
    states: tuple[str, ...]
    where: str  # for messages


@dataclass(frozen=True)
class FleetSpec:
    name: str
    file: str
    site: Site
    tariff: Tariff
    groups: list[Group]
    summation: str = "phasor"
    designs: dict[Path, Design] = field(default_factory=dict)
    nominal_mains: dict[Path, Mains] = field(default_factory=dict)
    economics: dict = field(default_factory=dict)


_SITE_KEYS = {"system", "voltage", "frequency", "short_circuit_current", "transformer_rating",
              "transformer_impedance_pct", "demand_current", "phase_conductor_rating",
              "neutral_conductor_rating", "currency"}
_TARIFF_KEYS = {"energy_price", "energy_price_by_hour", "demand_price", "demand_basis",
                "reactive_price", "reactive_billing", "co2_kg_per_kwh"}
_GROUP_KEYS = {"name", "design", "count", "phase", "hours", "profile", "diversity"}
_TOP_KEYS = {"name", "site", "tariff", "group", "inventory", "summation", "economics"}
_ECON_KEYS = {"service_life_years", "discount_rate", "energy_escalation"}


def _unknown(file, where, data, known):
    for k in data:
        if k not in known:
            raise InputError(file, f"{where}{k}", f"unknown key{suggest(k, known)}")


def _number(file, key, value, *, lo=None, positive=False, integer=False):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(file, key, f"expected a number, got {value!r}")
    if integer and (not float(value).is_integer()):
        raise InputError(file, key, f"must be a whole number, got {value!r}")
    if positive and value <= 0:
        raise InputError(file, key, f"must be greater than zero, got {value!r}")
    if lo is not None and value < lo:
        raise InputError(file, key, f"must be at least {lo}, got {value!r}")
    return float(value)


def _site(file: str, d: Any) -> Site:
    if not isinstance(d, dict):
        raise InputError(file, "site", "expected a table")
    _unknown(file, "site.", d, _SITE_KEYS)
    for k in ("system", "voltage", "frequency"):
        if k not in d:
            raise InputError(file, f"site.{k}", "missing key")
    if d["system"] not in SYSTEMS:
        raise InputError(file, "site.system", f"unknown system {d['system']!r}"
                         f"{suggest(str(d['system']), SYSTEMS)}; choose one of "
                         f"{', '.join(SYSTEMS)}")
    system = SYSTEMS[d["system"]]

    def q(key, dim):
        if key not in d:
            return None
        v = parse_quantity(d[key], dim, file=file, key=f"site.{key}")
        if v <= 0:
            raise InputError(file, f"site.{key}", "must be greater than zero")
        return v

    v_ln = q("voltage", "voltage")
    f = q("frequency", "frequency")
    isc = q("short_circuit_current", "current")
    src = "given short-circuit current" if isc else ""
    s_tr = q("transformer_rating", "power") if "transformer_rating" in d else None
    if "transformer_rating" in d and isc is None:
        z = d.get("transformer_impedance_pct")
        if z is None:
            raise InputError(file, "site.transformer_impedance_pct",
                             "missing key (needed with transformer_rating)")
        z = _number(file, "site.transformer_impedance_pct", z, positive=True) / 100.0
        n_ph = {"single": 1, "split": 2, "wye": 3}[system]
        isc = s_tr / (n_ph * v_ln * z)
        src = f"transformer {s_tr / 1e3:.0f} kVA, {z * 100:.1f} % Z"
    return Site(
        system=system, system_label=d["system"], v_ln_v=v_ln, f_hz=f, isc_a=isc,
        isc_source=src, demand_current_a=q("demand_current", "current"),
        phase_rating_a=q("phase_conductor_rating", "current"),
        neutral_rating_a=q("neutral_conductor_rating", "current"),
        currency=str(d.get("currency", "")),
    )


def _tariff(file: str, d: Any) -> Tariff:
    if not isinstance(d, dict):
        raise InputError(file, "tariff", "expected a table")
    _unknown(file, "tariff.", d, _TARIFF_KEYS)
    if "energy_price_by_hour" in d:
        prices = d["energy_price_by_hour"]
        if not isinstance(prices, list) or len(prices) != HOURS:
            raise InputError(file, "tariff.energy_price_by_hour", "needs 24 prices, one per hour")
        arr = np.array([_number(file, f"tariff.energy_price_by_hour[{k}]", p, lo=0)
                        for k, p in enumerate(prices)])
    elif "energy_price" in d:
        arr = np.full(HOURS, _number(file, "tariff.energy_price", d["energy_price"], lo=0))
    else:
        raise InputError(file, "tariff.energy_price", "missing key (or energy_price_by_hour)")
    basis = d.get("demand_basis", "kW")
    if basis not in ("kW", "kVA"):
        raise InputError(file, "tariff.demand_basis", "must be \"kW\" or \"kVA\"")
    billing = d.get("reactive_billing", "magnitude")
    if billing not in ("magnitude", "lagging", "leading"):
        raise InputError(file, "tariff.reactive_billing",
                         "must be \"magnitude\", \"lagging\" or \"leading\"")
    return Tariff(
        energy_price_by_hour=arr,
        demand_price=_number(file, "tariff.demand_price", d.get("demand_price", 0.0), lo=0),
        demand_basis=basis,
        reactive_price=_number(file, "tariff.reactive_price", d.get("reactive_price", 0.0), lo=0),
        reactive_billing=billing,
        co2_kg_per_kwh=_number(file, "tariff.co2_kg_per_kwh", d.get("co2_kg_per_kwh", 0.0), lo=0),
    )


def _occupancy(file, where, design: Design, hours, profile, diversity):
    states = tuple(design.states)
    light = states.index(min(states, key=design.load_current_a))
    heavy = states.index(max(states, key=design.load_current_a))
    occ = np.zeros((HOURS, len(states)))
    peak = None
    if (hours is None) == (profile is None):
        raise InputError(file, f"{where}hours", "give either hours (per state) or profile "
                         "(24 state names), not both or neither")
    d = 1.0 if diversity is None else _number(file, f"{where}diversity", diversity)
    if not 0.0 < d <= 1.0:
        raise InputError(file, f"{where}diversity", "must be in (0, 1]")
    if hours is not None:
        if not isinstance(hours, dict) or not hours:
            raise InputError(file, f"{where}hours", "expected a table such as "
                             "{ active = 2, idle = 22 }")
        total = 0.0
        for s, h in hours.items():
            if s not in design.states:
                raise InputError(file, f"{where}hours.{s}", f"unknown state {s!r} of design "
                                 f"'{design.name}'{suggest(s, design.states)}")
            h = _number(file, f"{where}hours.{s}", h, lo=0)
            occ[:, states.index(s)] = h / HOURS
            total += h
        if abs(total - HOURS) > 1e-9:
            raise InputError(file, f"{where}hours", f"hours per day sum to {total:g}, not 24")
        if diversity is not None:
            peak = np.zeros(len(states))
            peak[heavy] = d
            peak[light] += 1.0 - d
    else:
        if not isinstance(profile, list) or len(profile) != HOURS:
            raise InputError(file, f"{where}profile", "needs 24 state names, one per hour")
        for t, s in enumerate(profile):
            if s not in design.states:
                raise InputError(file, f"{where}profile[{t}]", f"unknown state {s!r} of "
                                 f"design '{design.name}'{suggest(str(s), design.states)}")
            occ[t, states.index(s)] += d
            occ[t, light] += 1.0 - d
    return occ, peak, states


def _design(file, where, ref, base: Path, site: Site, cache: dict) -> tuple[Path, Design]:
    if not isinstance(ref, str) or not ref:
        raise InputError(file, f"{where}design", "expected the path of a design file")
    path = (base / ref).resolve()
    if not path.is_file():
        raise InputError(file, f"{where}design", f"design file not found: {ref}")
    if path not in cache:
        d = load_design(path)
        site_mains = d.mains.model_copy(update={"voltage": site.v_ln_v, "frequency": site.f_hz})
        cache[path] = d.model_copy(update={"mains": site_mains})
        cache[(path, "nominal")] = d.mains
    return path, cache[path]


def _group(file, where, g: dict, base: Path, site: Site, cache: dict, index: int) -> Group:
    _unknown(file, where, g, _GROUP_KEYS)
    for k in ("design", "count", "phase"):
        if k not in g:
            raise InputError(file, f"{where}{k}", "missing key")
    path, design = _design(file, where, g["design"], base, site, cache)
    count = _number(file, f"{where}count", g["count"], positive=True, integer=True)
    phase = g["phase"]
    allowed = site.phases + ["balanced"]
    if phase not in allowed:
        raise InputError(file, f"{where}phase", f"unknown phase {phase!r}"
                         f"{suggest(str(phase), allowed)}; this {site.system_label} site has "
                         f"{', '.join(allowed)}")
    occ, peak, states = _occupancy(file, where, design, g.get("hours"), g.get("profile"),
                                   g.get("diversity"))
    name = str(g.get("name", f"group {index + 1}"))
    return Group(name, path, int(count), phase, occ, peak, states, where.rstrip("."))


def _parse_hours_cell(text: str):
    out = {}
    for part in str(text).replace(";", " ").split():
        if "=" not in part:
            raise ValueError(f"expected state=hours, got {part!r}")
        s, h = part.split("=", 1)
        out[s.strip()] = float(h)
    return out


def _inventory(file: str, ref: str, base: Path, site: Site, cache: dict, start: int):
    path = (base / ref).resolve()
    inv = str(path)
    if not path.is_file():
        raise InputError(file, "inventory", f"inventory file not found: {ref}")
    try:
        df = pd.read_csv(path, dtype=str, keep_default_na=False)
    except Exception as exc:  # pandas raises several parser errors
        raise InputError(inv, "", f"cannot read as CSV: {exc}") from None
    required = {"design", "count", "phase"}
    known = required | {"name", "hours", "profile", "diversity"}
    for col in df.columns:
        if col not in known:
            raise InputError(inv, f"row 1, column {col}", f"unknown column{suggest(col, known)}")
    for col in sorted(required - set(df.columns)):
        raise InputError(inv, "row 1", f"missing column {col!r}")
    groups = []
    for k, row in enumerate(df.to_dict("records")):
        where = f"row {k + 2}, column "
        g: dict[str, Any] = {"design": row["design"], "phase": row["phase"]}
        if row.get("name"):
            g["name"] = row["name"]
        try:
            g["count"] = float(row["count"])
        except ValueError:
            raise InputError(inv, where + "count", f"not a number: {row['count']!r}") from None
        if row.get("diversity"):
            try:
                g["diversity"] = float(row["diversity"])
            except ValueError:
                raise InputError(inv, where + "diversity",
                                 f"not a number: {row['diversity']!r}") from None
        if row.get("hours"):
            try:
                g["hours"] = _parse_hours_cell(row["hours"])
            except ValueError as exc:
                raise InputError(inv, where + "hours", str(exc)) from None
        if row.get("profile"):
            g["profile"] = row["profile"].split()
        try:
            groups.append(_group(inv, "", g, path.parent, site, cache, start + k))
        except InputError as exc:
            if exc.file != inv:  # a design file's own error already names its file and key
                raise
            col = exc.where.split(".")[0].split("[")[0] or "design"
            raise InputError(inv, where + col, exc.message) from None
    return groups


def load_fleet(path: str | Path) -> FleetSpec:
    """Read and validate a fleet file (and its inventory CSV and design files).

    Raises
    ------
    InputError
        Naming the file and the key (or CSV row and column) on any problem.
    """
    path = Path(path)
    file = str(path)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError(file, "", "file not found") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(file, "", f"malformed TOML: {exc}") from None
    _unknown(file, "", data, _TOP_KEYS)
    for k in ("site", "tariff"):
        if k not in data:
            raise InputError(file, k, "missing key")
    site = _site(file, data["site"])
    tariff = _tariff(file, data["tariff"])
    summation = data.get("summation", "phasor")
    if summation not in SUMMATIONS:
        raise InputError(file, "summation", f"must be one of {', '.join(SUMMATIONS)}")
    cache: dict = {}
    groups = []
    raw = data.get("group", [])
    if not isinstance(raw, list):
        raise InputError(file, "group", "write groups as [[group]] tables")
    for k, g in enumerate(raw):
        if not isinstance(g, dict):
            raise InputError(file, f"group[{k + 1}]", "expected a table")
        groups.append(_group(file, f"group[{k + 1}].", g, path.parent, site, cache, k))
    if "inventory" in data:
        groups += _inventory(file, data["inventory"], path.parent, site, cache, len(groups))
    if not groups:
        raise InputError(file, "group", "the fleet has no groups (add [[group]] or inventory)")
    designs = {k: v for k, v in cache.items() if isinstance(k, Path)}
    nominal = {k[0]: v for k, v in cache.items() if isinstance(k, tuple)}
    econ = data.get("economics", {})
    if not isinstance(econ, dict):
        raise InputError(file, "economics", "expected a table")
    _unknown(file, "economics.", econ, _ECON_KEYS)
    econ = {k: _number(file, f"economics.{k}", v, lo=0) for k, v in econ.items()}
    if "service_life_years" in econ:
        econ["service_life_years"] = _number(file, "economics.service_life_years",
                                             econ["service_life_years"], positive=True,
                                             integer=True)
    return FleetSpec(str(data.get("name", path.stem)), file, site, tariff, groups, summation,
                     designs, nominal, econ)


# ----------------------------------------------------------------------------------
# unit catalogue: every distinct (design, state) simulated once
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class UnitFigures:
    """What the fleet needs of one (design, state) on the site's mains."""

    design: str
    state: str
    p_w: float
    q1_var: float
    s_va: float
    i_rms_a: float
    i_h_a: np.ndarray  # full spectrum, index = order, phase vs the unit's own voltage


def _key(path: Path, design: Design) -> str:
    blob = path.read_bytes() + repr((design.mains.voltage, design.mains.frequency)).encode()
    return hashlib.sha256(blob).hexdigest()[:16]


_CATALOGUE_CACHE: dict[str, dict[str, UnitFigures]] = {}


def unit_catalogue(designs: dict[Path, Design], progress=None) -> dict[Path, dict[str, UnitFigures]]:
    """Simulate every state of every design once (cached in-process by file content)."""
    out = {}
    for k, (path, d) in enumerate(designs.items()):
        key = _key(path, d)
        if key not in _CATALOGUE_CACHE:
            res = simulate(d)
            _CATALOGUE_CACHE[key] = {
                r.state: UnitFigures(d.name, r.state, r.pq.p_w, r.pq.q1_var, r.pq.s_va,
                                     r.pq.i_rms_a, phasors_vs_voltage(r.v_v, r.i_a)[1])
                for r in res
            }
        out[path] = _CATALOGUE_CACHE[key]
        if progress:
            progress(k + 1, len(designs), d.name)
    return out


# ----------------------------------------------------------------------------------
# evaluation
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class PhaseFigures:
    phase: str
    p_w: float
    q1_var: float
    s_va: float
    i_rms_a: float
    i1_a: float
    thd_i_pct: float
    k_factor: float
    f_hl: float
    i_h_a: np.ndarray  # h = 0..H_MAX, own-phase frame


@dataclass(frozen=True)
class FleetResult:
    """Everything ``fleetpower fleet`` reports."""

    spec: FleetSpec
    summation_label: str
    units: int
    peak_hour: int
    peak_coincident: bool
    phases: list[PhaseFigures]
    neutral_i_rms_a: float
    neutral_i1_a: float
    neutral_i_h_a: np.ndarray
    p_kw: float
    q1_kvar: float
    s_kva: float
    s_e_kva: float | None
    pf: float
    dpf: float
    hourly: pd.DataFrame
    e_kwh_per_year: float
    energy_cost: float
    demand_cost: float
    reactive_cost: float
    co2_kg_per_year: float
    i_l_a: float
    i_l_source: str
    tdd_pct: float
    compliance: list[dict]
    conductors: list[dict]
    groups: pd.DataFrame
    warnings: list[str]

    @property
    def total_cost_per_year(self) -> float:
        return self.energy_cost + self.demand_cost + self.reactive_cost


def _phase_split(count: int, phase: str, phases: list[str]) -> dict[str, int]:
    if phase != "balanced":
        return {phase: count}
    n = len(phases)
    base, extra = divmod(count, n)
    return {p: base + (1 if k < extra else 0) for k, p in enumerate(phases)}


def evaluate_fleet(spec: FleetSpec, catalogue: dict | None = None, progress=None) -> FleetResult:
    """Evaluate a fleet: per-phase and neutral currents, powers, energy, cost, limits.

    Notes
    -----
    Let ``W[t, p, k]`` be the number of units on phase ``p`` in design-state ``k`` during
    hour ``t`` (group count × occupancy). Real and reactive power add:
    ``P[t, p] = Σ_k W P_k``. Currents add as phasors per harmonic in each phase's own
    frame, ``I[t, p, h] = Σ_k W I_k,h`` (identical units coherently, different designs with
    their own angles), or — on request — by the IEC 61000-3-6 summation law between
    design-states. The neutral is the time-domain sum of the phase currents, computed per
    harmonic in the common frame (:func:`fleetpower.aggregate.neutral_current`); it is
    always from phasors. Energy integrates P over the 24 hours × 365 days; demand, S and
    currents are reported at the peak hour (largest kW, or kVA with a kVA demand tariff).
    """
    site, tariff = spec.site, spec.tariff
    cat = catalogue if catalogue is not None else unit_catalogue(spec.designs, progress)
    phases = site.phases
    keys: list[tuple[Path, str]] = []
    for path, d in spec.designs.items():
        for s in d.states:
            keys.append((path, s))
    kidx = {k: n for n, k in enumerate(keys)}
    n_k, n_p = len(keys), len(phases)
    w = np.zeros((HOURS, n_p, n_k))
    w_peak_extra = []  # groups with a coincident (diversity) peak case
    rows = []
    for g in spec.groups:
        split = _phase_split(g.count, g.phase, phases)
        cols = [kidx[(g.design_path, s)] for s in g.states]
        for p, n in split.items():
            w[:, phases.index(p), cols] += n * g.occupancy
        figs = [cat[g.design_path][s] for s in g.states]
        p_state = np.array([f.p_w for f in figs])
        q_state = np.array([f.q1_var for f in figs])
        p_unit_t = g.occupancy @ p_state
        e_day_kwh = g.count * p_unit_t.sum() / 1e3
        cost_day = g.count * float((p_unit_t / 1e3) @ tariff.energy_price_by_hour)
        rows.append({
            "group": g.name, "design": spec.designs[g.design_path].name,
            "design_file": str(g.design_path.name), "count": g.count, "phase": g.phase,
            "p_unit_mean_w": float(p_unit_t.mean()),
            "q1_unit_mean_var": float((g.occupancy @ q_state).mean()),
            "s_unit_max_va": float(max(f.s_va for f in figs)),
            "e_kwh_per_year": e_day_kwh * DAYS_PER_YEAR,
            "energy_cost_per_year": cost_day * DAYS_PER_YEAR,
        })
        if g.peak_occupancy is not None:
            w_peak_extra.append((g, split, cols))
    p_k = np.array([cat[pa][s].p_w for pa, s in keys])
    q_k = np.array([cat[pa][s].q1_var for pa, s in keys])
    n_h = min(len(cat[pa][s].i_h_a) for pa, s in keys)
    i_k = np.array([cat[pa][s].i_h_a[:n_h] for pa, s in keys])  # (n_k, n_h)

    p_tp = w @ p_k  # (24, n_p)
    q_tp = w @ q_k
    # the peak case: the hourly profile, or a coincident case where diversity is given
    w_cases = [w[t] for t in range(HOURS)]
    if w_peak_extra:
        # coincident cases: every hour again, with the groups that give a diversity (and
        # hours per day) at their coincident occupancy instead of their daily mean
        for t in range(HOURS):
            wc = w[t].copy()
            for g, split, cols in w_peak_extra:
                for p, n in split.items():
                    wc[phases.index(p), cols] += n * (g.peak_occupancy - g.occupancy[t])
            w_cases.append(wc)
    spectra = np.einsum("cpk,kh->cph", np.array(w_cases), i_k)  # (cases, n_p, n_h)
    phasor_spectra = spectra  # the neutral is always built from these
    if spec.summation == "iec61000-3-6":
        w_all_ = np.array(w_cases)
        mags = np.empty(spectra.shape)
        for c in range(spectra.shape[0]):
            for p in range(n_p):
                mags[c, p] = A.sum_iec61000_3_6(i_k, w_all_[c, p]).i_h_a
        # keep the phasor angles, take the law's magnitudes
        spectra = mags * np.exp(1j * np.angle(spectra))
        label = A.sum_iec61000_3_6(i_k[:1], [1]).method
    else:
        label = "phasor sum (identical units coherent; designs with their own angles)"
    i_rms_cp = np.sqrt(np.sum(np.abs(spectra[..., 1:]) ** 2, axis=-1)
                       + np.abs(spectra[..., 0]) ** 2)
    s_cp = site.v_ln_v * i_rms_cp
    w_all = np.array(w_cases)
    p_cases = w_all @ p_k  # (cases, n_p)
    q_cases = w_all @ q_k
    metric = s_cp.sum(axis=1) if tariff.demand_basis == "kVA" else p_cases.sum(axis=1)
    peak = int(np.argmax(metric))
    peak_label = peak % HOURS
    coincident = peak >= HOURS

    hourly = pd.DataFrame({
        "hour": np.arange(HOURS),
        "p_kw": p_tp.sum(axis=1) / 1e3,
        "q1_kvar": q_tp.sum(axis=1) / 1e3,
        "s_kva": s_cp[:HOURS].sum(axis=1) / 1e3,
        "price_per_kwh": tariff.energy_price_by_hour,
    })
    for k, p in enumerate(phases):
        hourly[f"i_rms_{p.lower()}_a"] = i_rms_cp[:HOURS, k]

    # peak-case figures per phase
    figs = []
    for k, p in enumerate(phases):
        ih = spectra[peak, k]
        i1 = float(abs(ih[1]))
        figs.append(PhaseFigures(
            phase=p, p_w=float(p_cases[peak, k]), q1_var=float(q_cases[peak, k]),
            s_va=float(s_cp[peak, k]), i_rms_a=float(i_rms_cp[peak, k]), i1_a=i1,
            thd_i_pct=float(A.thd_pct(ih[: H_MAX + 1])) if i1 > 0 else 0.0,
            k_factor=float(A.k_factor(ih[: H_MAX + 1])) if i_rms_cp[peak, k] > 0 else 0.0,
            f_hl=float(A.harmonic_loss_factor(ih[: H_MAX + 1])) if i1 > 0 else 0.0,
            i_h_a=ih[: H_MAX + 1].copy(),
        ))
    neutral = A.neutral_current({f.phase: phasor_spectra[peak, k] for k, f in enumerate(figs)},
                                site.system)
    totals = A.power_totals(
        {f.phase: f.p_w for f in figs}, {f.phase: f.q1_var for f in figs},
        {f.phase: site.v_ln_v for f in figs}, {f.phase: f.i_rms_a for f in figs},
        i_n_rms_a=neutral.i_rms_a, system=site.system)

    # energy and cost
    p_t_kw = p_tp.sum(axis=1) / 1e3
    e_year = float(p_t_kw.sum() * DAYS_PER_YEAR)
    energy_cost = float(E.energy_cost(p_t_kw * 1e3, tariff.energy_price_by_hour, DAYS_PER_YEAR))
    peak_demand = float(metric[peak] / 1e3)
    demand_cost = float(E.demand_cost(peak_demand, tariff.demand_price, MONTHS_PER_YEAR))
    q_t = q_tp.sum(axis=1)
    reactive_cost = float(sum(E.reactive_energy_cost(q, DAYS_PER_YEAR, tariff.reactive_price,
                                                     tariff.reactive_billing) for q in q_t))
    co2 = float(E.co2_kg(e_year, tariff.co2_kg_per_kwh))

    # IEEE 519 at the PCC, worst phase
    worst = max(figs, key=lambda f: f.i_rms_a)
    if site.demand_current_a:
        i_l, i_l_src = site.demand_current_a, "site demand current"
    else:
        i_l = max(f.i1_a for f in figs)
        i_l_src = "the fleet's own peak fundamental (no site demand_current given)"
    tdd = float(A.tdd_pct(worst.i_h_a, i_l)) if i_l > 0 else 0.0
    compliance: list[dict] = []
    warnings: list[str] = []
    if site.isc_a:
        from dataclasses import asdict

        compliance = [asdict(r) for r in L.evaluate_ieee519(np.abs(worst.i_h_a), i_l, site.isc_a)]
        for r in compliance:
            r["reason"] = (r["reason"] + "; " if r["reason"] else "") + f"phase {worst.phase}"
    else:
        warnings.append("no short_circuit_current or transformer data: IEEE 519 not evaluated")
    conductors = []
    for name, current, rating in (
        ("phase (worst)", worst.i_rms_a, site.phase_rating_a),
        ("neutral", neutral.i_rms_a, site.neutral_rating_a),
    ):
        if rating:
            cl = A.conductor_loading(current, rating)
            conductors.append({"conductor": name, "i_rms_a": current, "rating_a": rating,
                               "used_pct": float(cl.used_pct), "verdict": str(cl.verdict)})
    if site.phase_rating_a and neutral.i_rms_a > worst.i_rms_a:
        warnings.append(f"the neutral carries more than any phase ({neutral.i_rms_a:.1f} A vs "
                        f"{worst.i_rms_a:.1f} A): triplen harmonics add there")
    for path, d in spec.designs.items():
        nominal = spec.nominal_mains.get(path)
        if nominal is not None and (abs(nominal.voltage - site.v_ln_v) > 0.15 * site.v_ln_v
                                    or abs(nominal.frequency - site.f_hz) > 0.5):
            warnings.append(f"design '{d.name}' is specified for {nominal.voltage:.0f} V "
                            f"{nominal.frequency:.0f} Hz but simulated on this site's "
                            f"{site.v_ln_v:.0f} V {site.f_hz:.0f} Hz")
    return FleetResult(
        spec=spec, summation_label=label, units=sum(g.count for g in spec.groups),
        peak_hour=peak_label, peak_coincident=coincident, phases=figs, neutral_i_rms_a=neutral.i_rms_a,
        neutral_i1_a=float(abs(neutral.i_h_a[1])), neutral_i_h_a=neutral.i_h_a[: H_MAX + 1],
        p_kw=totals.p_w / 1e3, q1_kvar=totals.q1_var / 1e3, s_kva=totals.s_arith_va / 1e3,
        s_e_kva=None if totals.s_e_va is None else totals.s_e_va / 1e3,
        pf=totals.pf_arith, dpf=totals.dpf, hourly=hourly, e_kwh_per_year=e_year,
        energy_cost=energy_cost, demand_cost=demand_cost, reactive_cost=reactive_cost,
        co2_kg_per_year=co2, i_l_a=i_l, i_l_source=i_l_src, tdd_pct=tdd,
        compliance=compliance, conductors=conductors, groups=pd.DataFrame(rows),
        warnings=warnings,
    )


def write_atomic(path: str | Path, text: str) -> None:
    """Write ``text`` to ``path`` via a temporary file and a rename (never half-written)."""
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    except OSError as exc:
        raise InputError(str(path), "", f"cannot write: {exc.strerror or exc}") from None
    try:
        umask = os.umask(0)
        os.umask(umask)
        with os.fdopen(fd, "w", encoding="utf-8", newline="") as fh:
            os.fchmod(fh.fileno(), 0o666 & ~umask)  # mkstemp makes 0600; match open()
            fh.write(text)
        os.replace(tmp, path)
    except BaseException as exc:
        if os.path.exists(tmp):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise InputError(str(path), "", f"cannot write: {exc.strerror or exc}") from None
        raise


__all__ = ["load_fleet", "evaluate_fleet", "unit_catalogue", "FleetResult", "FleetSpec",
           "write_atomic"]
