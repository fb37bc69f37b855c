"""Fleet files: the fleet TOML file and its inventory CSV, validated into a :class:`FleetSpec`.

Owns: the fleet-file format (site, tariff, groups, inventory rows, economics) and the
daily occupancy of each group's states. Each design file is read once and put on the
site's mains. Any problem is an :class:`fleetpower.errors.InputError` naming the file and
the key (or CSV row and column).

May import ``errors``, ``units``, ``gadget_range``, the rest of ``io`` and the pure mathematics of ``pq``;
nothing that simulates or evaluates.
"""

from __future__ import annotations

import io
import math
import os
from dataclasses import dataclass, field
from itertools import repeat
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ..economics import life_problem, rate_problem
from ..errors import InputError, suggest
from ..gadget_range import refuse_outside
from ..pq.polyphase import system_phases
from ..units import parse_quantity
from .design_file import Design, Mains, load_design
from .files import MAX_INVENTORY_BYTES, check_path, read_text_bounded
from .toml import read_toml

SYSTEMS = {"single-phase": "single", "split-phase": "split", "three-phase-wye": "wye"}
SUMMATIONS = ("phasor", "iec61000-3-6")
HOURS = 24
_HOUR_INDEX = np.arange(HOURS)


# ----------------------------------------------------------------------------------
# specification
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class Site:
    """The supply the fleet hangs on."""

    system: str  # "single" | "split" | "wye" (pq.polyphase names)
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
        return list(system_phases(self.system))


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
    #: hours per day with no timing: the share of units that may be in their heaviest
    #: state at once (``diversity``, default 1); None for a 24-hour profile
    coincident_share: float | None
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


#: the most units one group or inventory row may hold: beyond any real deployment, and far
#: below where fleet sums would lose precision or overflow
MAX_GROUP_COUNT = 10**9


def _number(file, key, value, *, lo=None, hi=None, positive=False, integer=False):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(file, key, f"expected a number, got {value!r}")
    try:
        finite = math.isfinite(float(value))
    except OverflowError:
        finite = False
    if not finite:
        raise InputError(file, key, "must be a finite number of ordinary size")
    if hi is not None and value > hi:
        raise InputError(file, key, f"must be at most {hi:,}, got {float(value):.3g}")
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
    if not isinstance(d["system"], str) or d["system"] not in SYSTEMS:
        raise InputError(file, "site.system", f"unknown system {d['system']!r}"
                         f"{suggest(str(d['system']), SYSTEMS)}; choose one of "
                         f"{', '.join(SYSTEMS)}")
    system = SYSTEMS[d["system"]]
    if not isinstance(d.get("currency", ""), str):
        raise InputError(file, "site.currency", "expected a text such as \"EUR\"")

    def q(key, dim):
        if key not in d:
            return None
        v = parse_quantity(d[key], dim, file=file, key=f"site.{key}")
        if v <= 0:
            raise InputError(file, f"site.{key}", "must be greater than zero")
        return v

    v_ln = q("voltage", "voltage")
    f = q("frequency", "frequency")
    # mains no small gadget's model means anything on (data/gadget_ranges.csv)
    refuse_outside("mains.voltage", v_ln, file=file, where="site.voltage")
    refuse_outside("mains.frequency", f, file=file, where="site.frequency")
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


def _state_order(design: Design) -> tuple[tuple[str, ...], int, int]:
    """(states in file order, index of the lightest load, index of the heaviest)."""
    states = tuple(design.states)
    light = states.index(min(states, key=design.load_rank))
    heavy = states.index(max(states, key=design.load_rank))
    return states, light, heavy


def _occupancy(file, where, design: Design, hours, profile, diversity, order=None):
    states, light, heavy = order or _state_order(design)
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
        peak = d
    else:
        if not isinstance(profile, list) or len(profile) != HOURS:
            raise InputError(file, f"{where}profile", "needs 24 state names, one per hour")
        index = {s: k for k, s in enumerate(states)}
        cols = [index.get(s, -1) if isinstance(s, str) else -1 for s in profile]
        if -1 in cols:
            t = cols.index(-1)
            s = profile[t]
            raise InputError(file, f"{where}profile[{t}]", f"unknown state {s!r} of "
                             f"design '{design.name}'{suggest(str(s), design.states)}")
        occ[_HOUR_INDEX, cols] += d  # one state per hour: no index repeats
        occ[:, light] += 1.0 - d
    return occ, peak, states


def _design(file, where, ref, base: Path, site: Site, cache: dict) -> tuple[Path, Design]:
    if not isinstance(ref, str) or not ref:
        raise InputError(file, f"{where}design", "expected the path of a design file")
    refs = cache.setdefault("refs", {})  # str keys: neither designs nor nominal mains
    known = refs.get((base, ref))
    if known is not None:
        return known, cache[known]
    try:
        check_path(ref)
        path = (base / ref).resolve()
        found = path.is_file()
    except InputError as exc:  # a NUL byte or too long a path: named as this key
        raise InputError(file, f"{where}design", exc.message) from None
    except (OSError, RuntimeError) as exc:  # a name longer than the file system allows
        raise InputError(file, f"{where}design", f"cannot read the design file "
                         f"{ref[:60]!r}: {getattr(exc, 'strerror', None) or exc}") from None
    if not found:
        raise InputError(file, f"{where}design", f"design file not found: {ref}")
    if path not in cache:
        d = load_design(path)
        cache[path] = d.on_mains(site.v_ln_v, site.f_hz)
        cache[(path, "nominal")] = d.mains
    refs[(base, ref)] = path  # once read: a file that failed fails again, naming itself
    return path, cache[path]


def _group(file, where, g: dict, base: Path, site: Site, cache: dict, index: int) -> Group:
    _unknown(file, where, g, _GROUP_KEYS)
    for k in ("design", "count", "phase"):
        if k not in g:
            raise InputError(file, f"{where}{k}", "missing key")
    path, design = _design(file, where, g["design"], base, site, cache)
    count = _number(file, f"{where}count", g["count"], positive=True, integer=True,
                    hi=MAX_GROUP_COUNT)
    phase = g["phase"]
    allowed = cache.get("phases")
    if allowed is None:
        allowed = cache["phases"] = site.phases + ["balanced"]
    if phase not in allowed:
        raise InputError(file, f"{where}phase", f"unknown phase {phase!r}"
                         f"{suggest(str(phase), allowed)}; this {site.system_label} site has "
                         f"{', '.join(allowed)}")
    orders = cache.setdefault("orders", {})
    order = orders.get(path)
    if order is None:
        order = orders[path] = _state_order(design)
    occ, peak, states = _occupancy(file, where, design, g.get("hours"), g.get("profile"),
                                   g.get("diversity"), order)
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
    if not isinstance(ref, str) or not ref:
        raise InputError(file, "inventory", "expected the path of an inventory file (CSV)")
    try:
        check_path(ref)
    except InputError as exc:  # a NUL byte or too long: named as the fleet file's key
        raise InputError(file, "inventory", exc.message) from None
    try:
        path = (base / ref).resolve()
    except (OSError, RuntimeError):  # a loop of symbolic links
        path = Path(os.path.abspath(base / ref))
    inv = str(path)
    if not os.path.lexists(path):
        raise InputError(file, "inventory", f"inventory file not found: {ref}")
    # bounded like the design files: a regular file, at most MAX_INVENTORY_BYTES, UTF-8
    text = read_text_bounded(path, MAX_INVENTORY_BYTES).removeprefix("\ufeff")  # a BOM
    try:
        df = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False)
    except Exception as exc:  # pandas raises several parser errors
        raise InputError(inv, "", f"cannot read as CSV: {exc}") from None
    required = {"design", "count", "phase"}
    known = required | {"name", "hours", "profile", "diversity"}
    for col in df.columns:
        if col not in known:
            raise InputError(inv, f"row 1, column {col}", f"unknown column{suggest(col, known)}")
    for col in sorted(required - set(df.columns)):
        raise InputError(inv, "row 1", f"missing column {col!r}")
    columns = list(df.columns)
    cells = {c: df[c].to_numpy(dtype=object) for c in columns}
    clean = _clean_rows(inv, cells, len(df), path.parent, site, cache, start)
    ok = clean["ok"]
    groups: list = [None] * len(df)
    # a row the column-wise checks could not pass is read alone, as always: the first bad
    # row raises its own one-line error (rows that pass never raise, so it is the first)
    for k in np.flatnonzero(~ok).tolist():
        row = {c: cells[c][k] for c in columns}
        groups[k] = _inventory_row(inv, row, k, path.parent, site, cache, start)
    ok = np.flatnonzero(ok)
    for k, g in zip(ok.tolist(), map(Group, clean["name"][ok], clean["path"][ok],
                                     clean["count"][ok].tolist(), clean["phase"][ok],
                                     clean["occupancy"][ok], clean["peak"][ok],
                                     clean["states"][ok], [""] * ok.size), strict=True):
        groups[k] = g
    return groups


def _inventory_row(inv: str, row: dict, k: int, base: Path, site: Site, cache: dict,
                   start: int) -> Group:
    """One inventory row read alone (CSV row ``k + 2``); raises its one-line error."""
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
        return _group(inv, "", g, base, site, cache, start + k)
    except InputError as exc:
        if exc.file != inv:  # a design file's own error already names its file and key
            raise
        col = exc.where.split(".")[0].split("[")[0] or "design"
        raise InputError(inv, where + col, exc.message) from None


def _distinct(values: np.ndarray) -> tuple[np.ndarray, list]:
    """(code of each cell, the distinct cells); a cell that is no text has code -1."""
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    uniques = list(uniques)
    bad = [u for u, v in enumerate(uniques) if not isinstance(v, str)]
    if bad:
        codes = np.where(np.isin(codes, bad), -1, codes)
    return codes, uniques


def _texts(cells: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(cell is text, cell is text and not empty) for each cell."""
    n = len(cells)
    text = np.fromiter(map(isinstance, cells, repeat(str)), dtype=bool, count=n)
    full = np.fromiter(map(bool, cells), dtype=bool, count=n)
    return text, text & full


def _objects(items, n: int) -> np.ndarray:
    """A 1-d object array of ``n`` items (tuples and arrays kept whole, not unpacked)."""
    return np.fromiter(items, dtype=object, count=n)


def _share_ok(d: np.ndarray) -> np.ndarray:
    """The diversity :func:`_occupancy` accepts: a finite share in (0, 1]."""
    return np.isfinite(d) & (d > 0.0) & (d <= 1.0)


def _clean_rows(inv, cells, n, base, site, cache, start) -> dict[str, np.ndarray]:
    """The inventory read column by column: each row's Group fields, and ``ok`` for rows
    every check passes.

    Each distinct cell text (design reference, count, hours, diversity) is parsed and
    checked once, by the same functions a single row uses, and the 24-hour profiles of a
    design all at once with the same arithmetic, so a row that passes is the Group
    :func:`_inventory_row` would make of it, number for number. A row that fails any
    check (or that these checks do not cover) has ``ok`` False and is left to
    :func:`_inventory_row`, which names its row, column and fault.
    """
    empty = _objects(repeat(""), n)
    ok = np.ones(n, dtype=bool)
    out = {"ok": ok, "count": np.zeros(n, dtype=np.int64), "phase": cells["phase"],
           "path": _objects(repeat(None), n), "states": _objects(repeat(None), n),
           "occupancy": _objects(repeat(None), n), "peak": _objects(repeat(None), n)}

    # design: every distinct reference resolved (and its file read) once
    codes, refs = _distinct(cells["design"])
    designs = []
    for u, ref in enumerate(refs):
        try:
            designs.append(_design(inv, "", ref, base, site, cache))
        except Exception:  # noqa: BLE001 - the row read alone raises it, in its turn
            designs.append(None)
            ok &= codes != u
    ok &= codes >= 0
    # count: a whole number in (0, MAX_GROUP_COUNT], each distinct text parsed once
    codes_c, texts = _distinct(cells["count"])
    counts = np.zeros(len(texts) + 1, dtype=np.int64)  # [-1]: a cell that is no text
    for u, text in enumerate(texts):
        try:
            counts[u] = int(_number(inv, "count", float(text), positive=True, integer=True,
                                    hi=MAX_GROUP_COUNT))
        except (ValueError, InputError):
            ok &= codes_c != u
    ok &= codes_c >= 0
    out["count"] = counts[codes_c]
    # phase: one of the site's, or balanced
    allowed = cache.get("phases")
    if allowed is None:
        allowed = cache["phases"] = site.phases + ["balanced"]
    ok &= pd.Series(cells["phase"], dtype=object).isin(allowed).to_numpy()
    # name: the row's own, or its place in the fleet
    names = cells.get("name", empty)
    text, named = _texts(names)
    ok &= text
    out["name"] = names.copy()
    for k in np.flatnonzero(~named).tolist():
        out["name"][k] = f"group {start + k + 1}"
    # diversity: empty (1), or a number read once per distinct text
    codes_d, texts_d = _distinct(cells.get("diversity", empty))
    div = np.ones(len(texts_d) + 1)
    given = np.zeros(len(texts_d) + 1, dtype=bool)
    for u, text in enumerate(texts_d):
        if text:
            given[u] = True
            try:
                div[u] = float(text)
            except ValueError:
                ok &= codes_d != u
    ok &= codes_d >= 0
    # hours or profile: exactly one of them (the row read alone says which is wrong)
    hours = cells.get("hours", empty)
    profile = cells.get("profile", empty)
    text_h, has_h = _texts(hours)
    text_p, has_p = _texts(profile)
    ok &= text_h & text_p & (has_h != has_p)
    share = np.where(given[codes_d], div[codes_d], 1.0)
    orders = cache.setdefault("orders", {})
    paths = _objects(repeat(None), len(designs) + 1)
    states = _objects(repeat(None), len(designs) + 1)
    for u, found in enumerate(designs):
        if found is None:
            continue
        dpath, design = found
        order = orders.get(dpath)
        if order is None:
            order = orders[dpath] = _state_order(design)
        paths[u], states[u] = dpath, order[0]
        mine = ok & (codes == u)
        _hours_rows(inv, design, order, np.flatnonzero(mine & has_h), hours, share, out)
        _profile_rows(order, np.flatnonzero(mine & has_p), profile, share, out)
    out["path"], out["states"] = paths[codes], states[codes]
    return out


def _hours_rows(inv, design, order, idx, hours, share, out) -> None:
    """Occupancy of rows giving hours per state: once per distinct hours text.

    The hours alone set the occupancy (:func:`_occupancy`); the diversity, checked here
    as it checks it, is the row's coincident share.
    """
    ok = out["ok"]
    good = _share_ok(share[idx])
    ok[idx[~good]] = False
    idx = idx[good]
    if not idx.size:
        return
    keys, texts = pd.factorize(hours[idx])
    occs = _objects(repeat(None), len(texts))
    for u, text in enumerate(texts):
        try:
            occs[u], _, _ = _occupancy(inv, "", design, _parse_hours_cell(text), None, None,
                                       order)
        except (ValueError, InputError):
            ok[idx[keys == u]] = False
            continue
        occs[u].flags.writeable = False  # shared by every row of the same hours
    out["occupancy"][idx] = occs[keys]
    out["peak"][idx] = _objects(share[idx].tolist(), idx.size)


_SEP = "\x00"  # between profiles in one joined text (a profile holding it is split alone)


def _state_columns(texts: list[str], states: tuple[str, ...]) -> np.ndarray:
    """(profiles, 24) column of each hour's state in ``states``; -1 where the profile has
    not 24 names or the name is no state (the row read alone names the fault).

    All profiles split at once: joined with a separator word, split on white space as
    ``str.split`` does, the separators found among the words.
    """
    cols = np.full((len(texts), HOURS), -1, dtype=np.int64)
    index = {s: k for k, s in enumerate(states)}
    if not texts or _SEP in index:
        return cols
    joined = f" {_SEP} ".join(texts)
    if joined.count(_SEP) != len(texts) - 1:  # a profile holds the separator itself
        for k, t in enumerate(texts):
            words = t.split()
            if len(words) == HOURS:
                cols[k] = [index.get(w, -1) for w in words]
        return cols
    index[_SEP] = -2
    code = _ascii_word_codes(joined, index) if joined.isascii() else None
    if code is None:
        words = joined.split()
        code = np.fromiter(map(index.get, words, repeat(-1)), dtype=np.int64,
                           count=len(words))
    ends = np.append(np.flatnonzero(code == -2), code.size)  # one past each profile
    starts = np.append(0, ends[:-1] + 1)
    full = ends - starts == HOURS
    cols[full] = code[starts[full, None] + _HOUR_INDEX[None, :]]
    return cols


#: the characters ``str.split()`` splits ASCII text on
_ASCII_SPACE = np.frombuffer(b" \t\n\r\x0b\x0c\x1c\x1d\x1e\x1f", dtype=np.uint8)


def _ascii_word_codes(text: str, index: dict[str, int]) -> np.ndarray:
    """``[index.get(w, -1) for w in text.split()]`` of an ASCII text, on its bytes.

    The words are the runs of bytes between white space as ``str.split`` finds them; each
    is compared with the (few) names of ``index`` byte by byte, all words at once.
    """
    b = np.frombuffer(text.encode("ascii"), dtype=np.uint8)
    word = ~np.isin(b, _ASCII_SPACE)
    edge = np.diff(np.concatenate(([False], word, [False])).astype(np.int8))
    starts, ends = np.flatnonzero(edge == 1), np.flatnonzero(edge == -1)
    lengths = ends - starts
    code = np.full(starts.size, -1, dtype=np.int64)
    for name, k in index.items():
        if not name.isascii() or not name:
            continue
        key = np.frombuffer(name.encode("ascii"), dtype=np.uint8)
        cand = np.flatnonzero(lengths == key.size)
        for j, byte in enumerate(key.tolist()):
            cand = cand[b[starts[cand] + j] == byte]
        code[cand] = k
    return code


def _profile_rows(order, idx, profile, share, out) -> None:
    """Occupancy of rows giving 24 state names, all rows of one design at once.

    The same arithmetic as :func:`_occupancy`, row by row: the diversity share in the
    hour's state, the rest added to the lightest state.
    """
    if not idx.size:
        return
    ok = out["ok"]
    states, light, _heavy = order
    codes_p, texts = pd.factorize(profile[idx])
    cols = _state_columns(list(texts), states)
    d = share[idx]
    good = (cols >= 0).all(axis=1)[codes_p] & _share_ok(d)
    ok[idx[~good]] = False
    idx, d, c = idx[good], d[good], cols[codes_p[good]]
    occ = np.zeros((idx.size, HOURS, len(states)))
    occ[np.arange(idx.size)[:, None], _HOUR_INDEX[None, :], c] += d[:, None]
    occ[:, :, light] += (1.0 - d)[:, None]
    occ.flags.writeable = False
    out["occupancy"][idx] = _objects(occ, idx.size)


def load_fleet(path: str | Path) -> FleetSpec:
    """Read and validate a fleet file (and its inventory CSV and design files).

    Raises
    ------
    InputError
        Naming the file and the key (or CSV row and column) on any problem.
    """
    path = Path(path)
    file = str(path)
    data = read_toml(path)
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
        if not isinstance(data["inventory"], str):
            raise InputError(file, "inventory", "expected the path of a CSV file (text), got "
                             f"{type(data['inventory']).__name__}")
        groups += _inventory(file, data["inventory"], path.parent, site, cache, len(groups))
    if not groups:
        raise InputError(file, "group", "the fleet has no groups (add [[group]] or inventory)")
    designs = {k: v for k, v in cache.items() if isinstance(k, Path)}
    nominal = {k[0]: v for k, v in cache.items() if isinstance(k, tuple)}
    econ = data.get("economics", {})
    if not isinstance(econ, dict):
        raise InputError(file, "economics", "expected a table")
    _unknown(file, "economics.", econ, _ECON_KEYS)
    econ = {k: _number(file, f"economics.{k}", v) for k, v in econ.items()}
    for k, v in econ.items():
        why = life_problem(v) if k == "service_life_years" else rate_problem(v)
        if why:
            raise InputError(file, f"economics.{k}", why)
    return FleetSpec(str(data.get("name", path.stem)), file, site, tariff, groups, summation,
                     designs, nominal, econ)


__all__ = ["load_fleet", "FleetSpec", "Site", "Tariff", "Group", "SYSTEMS", "SUMMATIONS",
           "HOURS"]
