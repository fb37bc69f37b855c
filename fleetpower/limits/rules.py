"""Limit rules: one evaluator per kind of limit, each a pure function returning compliance rows.

Harmonic emissions (IEC 61000-3-2), standby and off mode, external power supplies
(no-load power and average active efficiency), IEEE 519 current and voltage distortion,
capacitor discharge at the plug pins, and users' own sets. Each compares a measured or
simulated value against rows of :mod:`fleetpower.limits.tables` and returns
:class:`~fleetpower.limits.tables.ComplianceRow` records with a verdict and a margin.

All values shipped in the tables are recalled, not copied from the published text,
unless their ``provenance`` column says otherwise. The tool is an engineering aid: it
defers to the published standards, local codes and licensed practice.

References
----------
IEC 61000-3-2:2018+A1:2020, Electromagnetic compatibility - Part 3-2: Limits for
harmonic current emissions (equipment input current <= 16 A per phase).
IEEE Std 519-2014, IEEE Recommended Practice and Requirements for Harmonic Control in
Electric Power Systems.
Commission Regulation (EU) 2023/826 (standby, off mode, networked standby).
Commission Regulation (EC) No 1275/2008 as amended by (EU) No 801/2013.
Commission Regulation (EU) 2019/1782 (external power supplies).
US DOE 10 CFR 430.32(w) (external power supplies, Level VI).
IEC 60335-1 clause 22.5; IEC 62368-1 clause 5.5.2.2 (capacitor discharge).

Owns: how each kind of limit is evaluated. May import ``limits.tables``, ``errors`` and
``pq``; nothing that simulates (the figures arrive as numbers).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..errors import InputError, suggest
from ..pq.spectrum import H_MAX
from .tables import (
    ComplianceRow,
    covers_power,
    covers_range,
    limit_records,
    make_row,
    margin,
    not_applicable_row,
)

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

NO_LIMITS_75W = "no harmonic limits apply (≤ 75 W)"
LIGHTING_25W = (
    "not evaluated: lighting ≤ 25 W has alternative requirements "
    "(IEC 61000-3-2 clause 7.4.3, from memory)"
)


# --------------------------------------------------------------------------------------
# IEC 61000-3-2
# --------------------------------------------------------------------------------------
_CLASS_SETS = {c: f"iec61000-3-2-class-{c.lower()}" for c in "ABCD"}


def _harmonics(i_h_a: Sequence[float] | np.ndarray, name: str) -> np.ndarray:
    arr = np.asarray(i_h_a, dtype=float)
    if arr.ndim != 1 or arr.size < 41:
        raise InputError("<input>", name, "need harmonic RMS values indexed by order 0..40 or more")
    if not np.all(np.isfinite(arr)) or np.any(arr < 0):
        raise InputError("<input>", name, "harmonic RMS values must be finite and >= 0")
    return arr


def evaluate_harmonic_emissions(
    i_h_rms_a: Sequence[float] | np.ndarray,
    p_w: float,
    pf: float,
    equipment_class: str,
    is_lighting: bool = False,
    limit_set: str | Path | pd.DataFrame | None = None,
) -> list[ComplianceRow]:
    """Compare harmonic input currents with IEC 61000-3-2 limits.

    Parameters
    ----------
    i_h_rms_a : array_like
        RMS current of each harmonic [A], indexed by harmonic order (index 1 is the
        fundamental); at least orders 0..40.
    p_w : float
        Active input power at the assessed state [W]; used for applicability (75 W,
        600 W, 25 W thresholds) and for the Class D per-watt limits.
    pf : float
        Circuit power factor λ [1]; used by the Class C third-harmonic limit 30·λ %.
    equipment_class : {"A", "B", "C", "D"}
        Class chosen by the user.
    is_lighting : bool
        True for lighting equipment (Class C).
    limit_set : str, Path or DataFrame, optional
        Rows to use instead of the shipped table of that class.

    Returns
    -------
    list of ComplianceRow
        One row per limited harmonic (unit A), or a single "not applicable" row whose
        ``reason`` says why.

    Notes
    -----
    * Class A/B/D: no limits at or below 75 W (non-lighting). Class D rows apply for
      75 W < P ≤ 600 W; the per-watt limit is capped by the Class A value.
    * Class C (lighting) rows apply above 25 W; lighting at or below 25 W is reported
      "not evaluated" (its alternative requirements are not implemented).
    * Departure: the standard assesses rated power and disregards harmonic currents
      below 0.6 % of the input current or 5 mA; that rule is not applied here.
    * The shipped values are from memory.

    References
    ----------
    IEC 61000-3-2:2018+A1:2020, clause 7, Tables 1 to 3.
    """
    cls = str(equipment_class).strip().upper()
    if cls not in _CLASS_SETS:
        raise InputError(
            "<input>",
            "equipment_class",
            f"unknown equipment class '{equipment_class}'{suggest(cls, _CLASS_SETS)}"
            " (choose A, B, C or D)",
        )
    set_id = _CLASS_SETS[cls]
    df = limit_records(set_id if limit_set is None else limit_set)
    i_h = _harmonics(i_h_rms_a, "i_h_rms_a")
    p_w = float(p_w)
    if is_lighting and cls != "C":
        return [
            not_applicable_row(
                set_id, f"lighting equipment is Class C, not Class {cls}", df, "i_h_a", "A"
            )
        ]
    if cls == "C":
        if not is_lighting:
            return [
                not_applicable_row(set_id, "Class C is for lighting equipment only", df, "i_h_a", "A")
            ]
        if p_w <= 25:
            return [not_applicable_row(set_id, LIGHTING_25W, df, "i_h_a", "A")]
    else:
        if p_w <= 75:
            return [not_applicable_row(set_id, NO_LIMITS_75W, df, "i_h_a", "A")]
        if cls == "D" and p_w > 600:
            return [
                not_applicable_row(
                    set_id,
                    "Class D applies from 75 W to 600 W; choose Class A above 600 W",
                    df,
                    "i_h_a",
                    "A",
                )
            ]
    rows = []
    for rec in df:
        if np.isnan(rec["harmonic"]):
            continue
        h = int(rec["harmonic"])
        if h >= i_h.size:
            rows.append(make_row(rec, None, None, "A", f"no value for harmonic {h}"))
            continue
        if not covers_power(rec, p_w):
            rows.append(make_row(rec, None, None, "A", f"row does not apply at {p_w:g} W"))
            continue
        lim, how = _iec_limit_a(rec, p_w, i_h[1], pf)
        rows.append(make_row(rec, float(i_h[h]), lim, "A", how))
    return rows


def _iec_limit_a(rec: Mapping, p_w: float, i1_a: float, pf: float) -> tuple[float, str]:
    """Evaluated harmonic limit [A] of one row and a one-line note of how it was formed."""
    kind, lim = rec["kind"], rec["limit"]
    if kind == "absolute":
        out, how = lim, ""
    elif kind == "per_watt":
        out = lim * 1e-3 * p_w
        how = f"{lim:g} mA/W x {p_w:g} W"
    elif kind == "pct_of_fundamental":
        out = lim / 100.0 * i1_a
        how = f"{lim:g} % of I1"
    elif kind == "pct_of_fundamental_times_pf":
        out = lim * pf / 100.0 * i1_a
        how = f"{lim:g}·λ % of I1 (λ = {pf:g})"
    else:
        raise InputError(
            str(rec.get("file", "<input>")),
            f"row {rec.get('row', '?')}, column kind",
            f"kind '{kind}' cannot be used for a harmonic current limit",
        )
    cap = rec.get("cap", np.nan)
    if cap is not None and not np.isnan(cap) and cap < out:
        out, how = cap, (how + f"; capped at {cap:g} A").lstrip("; ")
    return float(out), how


# --------------------------------------------------------------------------------------
# standby and external power supplies
# --------------------------------------------------------------------------------------
_STANDBY_MODES = {
    "off": "off_p_w",
    "standby": "standby_p_w",
    "standby_display": "standby_display_p_w",
    "networked": "networked_standby_p_w",
    "networked_hina": "networked_standby_hina_p_w",
}


def evaluate_standby(
    p_w: float,
    mode: str,
    limit_set: str | Path | pd.DataFrame = "eu-2023-826-standby",
) -> list[ComplianceRow]:
    """Compare a low-power-mode input power with the EU horizontal standby rule.

    Parameters
    ----------
    p_w : float
        Active input power in that mode [W].
    mode : {"off", "standby", "standby_display", "networked", "networked_hina"}
        Low-power mode; ``networked`` is networked standby of non-HiNA equipment.
    limit_set : str, Path or DataFrame
        ``"eu-2023-826-standby"`` (2025 tier, default), ``"eu-2023-826-standby-2027"``
        or ``"eu-1275-2008-standby"`` (repealed), or a user table.

    Returns
    -------
    list of ComplianceRow
        One row (unit W).

    Notes
    -----
    Values are from memory; the regulation's scope (Annex I/II product lists) and the
    measurement method are not checked.

    References
    ----------
    Commission Regulation (EU) 2023/826, Annex II; Commission Regulation (EC)
    No 1275/2008 as amended by (EU) No 801/2013, Annex II.
    """
    if mode not in _STANDBY_MODES:
        raise InputError(
            "<input>",
            "mode",
            f"unknown mode '{mode}'{suggest(mode, _STANDBY_MODES)}"
            f" (choose {', '.join(_STANDBY_MODES)})",
        )
    df = limit_records(limit_set)
    sel = [rec for rec in df if rec["quantity"] == _STANDBY_MODES[mode]]
    if not sel:
        return [
            not_applicable_row(
                str(df[0]["set"]),
                f"set has no row for mode '{mode}'",
                df,
                _STANDBY_MODES[mode],
            )
        ]
    return [make_row(rec, float(p_w), rec["limit"]) for rec in sel]


def average_active_efficiency(eff_at_fractions: Sequence[float]) -> float:
    """Average active efficiency [1]: arithmetic mean of the efficiencies at 25, 50, 75
    and 100 % of rated output current.

    Parameters
    ----------
    eff_at_fractions : sequence of 4 floats
        Efficiency [1] at 25 %, 50 %, 75 % and 100 % load, in that order.

    Returns
    -------
    float
        Mean efficiency [1].

    References
    ----------
    Commission Regulation (EU) 2019/1782, Annex I definition of average active
    efficiency; US DOE 10 CFR 430 Subpart B, Appendix Z (from memory).
    """
    eff = np.asarray(eff_at_fractions, dtype=float)
    if eff.shape != (4,):
        raise InputError(
            "<input>", "eff_at_fractions", "need exactly 4 efficiencies (25/50/75/100 %)"
        )
    if not np.all(np.isfinite(eff)) or np.any(eff <= 0) or np.any(eff > 1):
        raise InputError("<input>", "eff_at_fractions", "efficiencies must lie in (0, 1]")
    return float(eff.mean())


def formula_limit(rec: Mapping, p_w: float) -> float:
    """Evaluate a ``formula`` row at power ``p_w`` [W].

    ``linear``: ``b·P + c``; ``log_linear``: ``a·ln(P/1 W) + b·P + c``; ``constant``: ``c``.

    References
    ----------
    Commission Regulation (EU) 2019/1782, Annex II point 1(b); 10 CFR 430.32(w).
    """
    form = rec["form"]
    a, b, c = rec["a"], rec["b"], rec["c"]
    if form == "linear":
        return float(b * p_w + c)
    if form == "log_linear":
        return float(a * math.log(p_w) + b * p_w + c)
    if form == "constant":
        return float(c)
    raise ValueError(f"unknown form {form!r}")


_EPS_SETS = {
    ("eu", False): "eu-2019-1782-eps-basic",
    ("eu", True): "eu-2019-1782-eps-low-voltage",
    ("us", False): "us-doe-level-vi-eps-basic",
    ("us", True): "us-doe-level-vi-eps-low-voltage",
}


def evaluate_eps(
    no_load_p_w: float,
    average_efficiency: float,
    p_out_rated_w: float,
    low_voltage: bool = False,
    region: str = "eu",
    limit_set: str | Path | pd.DataFrame | None = None,
) -> list[ComplianceRow]:
    """Compare an external power supply with EU 2019/1782 or US DOE Level VI.

    Parameters
    ----------
    no_load_p_w : float
        Input power with no load connected [W].
    average_efficiency : float
        Average active efficiency [1] (see :func:`average_active_efficiency`).
    p_out_rated_w : float
        Nameplate output power [W]; selects the band.
    low_voltage : bool
        Low-voltage EPS (nameplate output below 6 V at 550 mA or more).
    region : {"eu", "us"}
        Which rule.
    limit_set : str, Path or DataFrame, optional
        Replace the shipped table.

    Returns
    -------
    list of ComplianceRow
        ``no_load_p_w`` row (unit W) and ``avg_active_eff_frac`` row (unit 1, an
        "at least" limit: ``used_pct = 100·limit/value``).

    Notes
    -----
    Single-voltage AC-DC supplies only (no AC-AC, multiple-voltage or 10 % load
    rows). The EU regulation covers P_out ≤ 250 W; above that its rows are "not
    applicable". The EU rows were checked against the published Annex II text; the US
    rows are from memory.

    References
    ----------
    Commission Regulation (EU) 2019/1782, Annex II point 1; US DOE 10 CFR 430.32(w).
    """
    region = str(region).lower()
    if region not in ("eu", "us"):
        raise InputError("<input>", "region", f"unknown region '{region}' (choose eu or us)")
    df = limit_records(_EPS_SETS[(region, bool(low_voltage))] if limit_set is None
                       else limit_set)
    p = float(p_out_rated_w)
    if not p > 0:
        raise InputError("<input>", "p_out_rated_w", "rated output power must be > 0 W")
    rows = []
    for qty, value in (("no_load_p_w", no_load_p_w), ("avg_active_eff_frac", average_efficiency)):
        sel = [r for r in df if r["quantity"] == qty]
        hit = [r for r in sel if covers_power(r, p)]
        if not hit:
            base = sel[0] if sel else {"set": str(df[0]["set"]), "quantity": qty, "unit": ""}
            rows.append(
                make_row(base, None, None, reason=f"no row covers P_out = {p:g} W (out of scope)")
            )
            continue
        rec = hit[0]
        lim = formula_limit(rec, p) if rec["kind"] == "formula" else rec["limit"]
        rows.append(make_row(rec, float(value), lim))
    return rows


# --------------------------------------------------------------------------------------
# IEEE 519
# --------------------------------------------------------------------------------------
_IEEE_LABELS = ("<20", "20<50", "50<100", "100<1000", ">1000")


def ieee519_row(isc_over_il: float) -> str:
    """Row label of IEEE 519-2014 Table 2 for a short-circuit ratio.

    Parameters
    ----------
    isc_over_il : float
        Isc/IL [1]: maximum short-circuit current at the PCC over maximum demand load
        current.

    Returns
    -------
    str
        One of ``"<20"``, ``"20<50"``, ``"50<100"``, ``"100<1000"``, ``">1000"``.

    Notes
    -----
    Reading of the row labels (this project's decision): a label ``"a<b"`` means
    ``a ≤ Isc/IL < b``. So 20 exactly falls in ``"20<50"``, 50 in ``"50<100"``,
    100 in ``"100<1000"``, and 1000 exactly is not in ``"100<1000"``; it falls in
    ``">1000"``, read as ``Isc/IL ≥ 1000`` so that the rows cover every ratio. The
    ``"<20"`` row also applies to all power generation equipment whatever the ratio.

    References
    ----------
    IEEE Std 519-2014, clause 5.2, Table 2 (from memory).
    """
    x = float(isc_over_il)
    if not x > 0 or not math.isfinite(x):
        raise InputError("<input>", "isc_over_il", "Isc/IL must be a finite number > 0")
    for edge, label in zip((20, 50, 100, 1000), _IEEE_LABELS, strict=False):
        if x < edge:
            return label
    return _IEEE_LABELS[-1]


def evaluate_ieee519(
    i_h_a: Sequence[float] | np.ndarray,
    i_l_a: float,
    isc_a: float,
    generation: bool = False,
    limit_set: str | Path | pd.DataFrame = "ieee519-2014-current",
) -> list[ComplianceRow]:
    """Compare harmonic currents at the PCC with IEEE 519-2014 Table 2.

    Parameters
    ----------
    i_h_a : array_like
        RMS current of each harmonic [A] indexed by order 0..50 (index 1 = fundamental).
    i_l_a : float
        Maximum demand load current IL [A] (fundamental).
    isc_a : float
        Maximum short-circuit current at the PCC [A].
    generation : bool
        True for power generation equipment: the ``<20`` row applies whatever Isc/IL.
    limit_set : str, Path or DataFrame
        Rows to use (default the shipped table).

    Returns
    -------
    list of ComplianceRow
        One row per harmonic h = 2..50 (``i_h<h>_pct``, % of IL) and ``tdd_pct``.

    Notes
    -----
    Limits apply up to h = 50; TDD = sqrt(sum over h = 2..50 of Ih²) / IL · 100 %.
    Even harmonics are limited to 25 % of the odd limit of their band; h = 2 uses the
    first band (3 ≤ h < 11). See :func:`ieee519_row` for the row-boundary reading.
    Departure: the rule that converters causing a DC offset are not allowed is not
    checked. Values are from memory.

    References
    ----------
    IEEE Std 519-2014, clause 5.2, Table 2.
    """
    arr = np.asarray(i_h_a, dtype=float)
    if arr.ndim != 1 or arr.size < H_MAX + 1 or not np.all(np.isfinite(arr)) or np.any(arr < 0):
        raise InputError(
            "<input>", "i_h_a", "need finite harmonic RMS values >= 0 for orders 0..50"
        )
    i_l_a, isc_a = float(i_l_a), float(isc_a)
    if not i_l_a > 0 or not isc_a > 0:
        raise InputError("<input>", "i_l_a", "IL and Isc must be > 0 A")
    ratio = 1.0 if generation else isc_a / i_l_a
    label = ieee519_row(ratio)
    recs = [r for r in limit_records(limit_set) if covers_range(r, ratio)]
    reason = f"Isc/IL row {label}" + (" (generation equipment)" if generation else "")
    rows = []
    for rec in recs:
        q = rec["quantity"]
        if q == "tdd_pct":
            value = math.sqrt(float(np.sum(arr[2 : H_MAX + 1] ** 2))) / i_l_a * 100.0
        elif not np.isnan(rec["harmonic"]):
            value = arr[int(rec["harmonic"])] / i_l_a * 100.0
        else:
            continue
        rows.append(make_row(rec, float(value), rec["limit"], "%", reason))
    return rows


def evaluate_ieee519_voltage(
    v_h_v: Sequence[float] | np.ndarray,
    bus_kv: float,
    limit_set: str | Path | pd.DataFrame = "ieee519-2014-voltage",
) -> list[ComplianceRow]:
    """Compare bus voltage harmonics at the PCC with IEEE 519-2014 Table 1.

    Parameters
    ----------
    v_h_v : array_like
        RMS voltage of each harmonic [V] indexed by order 0..50 (index 1 = fundamental).
    bus_kv : float
        Nominal bus voltage at the PCC [kV]; rows are ``V ≤ 1``, ``1 < V ≤ 69``,
        ``69 < V ≤ 161``, ``V > 161``.
    limit_set : str, Path or DataFrame
        Rows to use.

    Returns
    -------
    list of ComplianceRow
        ``v_h_individual_pct`` (largest individual harmonic, % of fundamental) and
        ``thd_v_pct``.

    References
    ----------
    IEEE Std 519-2014, clause 5.1, Table 1 (from memory).
    """
    arr = np.asarray(v_h_v, dtype=float)
    if arr.ndim != 1 or arr.size < H_MAX + 1 or not arr[1] > 0:
        raise InputError("<input>", "v_h_v", "need harmonic voltages for orders 0..50, V1 > 0")
    harm = arr[2 : H_MAX + 1] / arr[1] * 100.0
    values = {
        "v_h_individual_pct": float(harm.max()),
        "thd_v_pct": float(math.sqrt(float(np.sum(harm**2)))),
    }
    return [
        make_row(r, values[r["quantity"]], r["limit"], "%", f"bus {float(bus_kv):g} kV")
        for r in limit_records(limit_set)
        if covers_range(r, float(bus_kv)) and r["quantity"] in values
    ]


# --------------------------------------------------------------------------------------
# capacitor discharge
# --------------------------------------------------------------------------------------
_DISCHARGE_SETS = {"iec60335-1": "iec60335-1-discharge", "iec62368-1": "iec62368-1-discharge"}


def evaluate_discharge(
    v0_v: float,
    r_bleed_ohm: float,
    c_f: float,
    rule: str = "iec60335-1",
    limit_set: str | Path | pd.DataFrame | None = None,
) -> list[ComplianceRow]:
    """Check the capacitor discharge after a plug is pulled (RC bleed to a threshold).

    Parameters
    ----------
    v0_v : float
        Capacitor voltage at the instant of disconnection [V] (worst case: the mains
        peak, e.g. 230·√2 ≈ 325 V).
    r_bleed_ohm : float
        Discharge (bleeder) resistance across the pins [ohm].
    c_f : float
        Capacitance across the pins [F].
    rule : {"iec60335-1", "iec62368-1"}
        Household appliances (≤ 34 V after 1 s) or IT/AV (ES1, 60 V DC, within 2 s).
    limit_set : str, Path or DataFrame, optional
        Replace the shipped rows (needs ``v_threshold_v`` and ``t_discharge_s``).

    Returns
    -------
    list of ComplianceRow
        ``t_discharge_s``: time to fall to the threshold, ``t = R·C·ln(V0/V_lim)``
        (0 when V0 ≤ V_lim), against the allowed time; ``v_residual_v``: voltage
        ``V0·exp(-t_allowed/(R·C))`` at the allowed time against the threshold. Or one
        "not applicable" row (IEC 60335-1: capacitance ≤ 0.1 µF).

    Notes
    -----
    An ideal exponential RC discharge is assumed (no other load, no diode blocking).
    This is an engineering estimate: the tool defers to the standards' test method,
    local codes and licensed practice. Values are from memory.

    References
    ----------
    IEC 60335-1 clause 22.5; IEC 62368-1 clause 5.5.2.2 and Table 4 (ES1 limits).
    """
    if limit_set is None:
        if rule not in _DISCHARGE_SETS:
            raise InputError(
                "<input>", "rule", f"unknown rule '{rule}'{suggest(rule, _DISCHARGE_SETS)}"
            )
        limit_set = _DISCHARGE_SETS[rule]
    df = limit_records(limit_set)
    v0_v, r_bleed_ohm, c_f = float(v0_v), float(r_bleed_ohm), float(c_f)
    if not (v0_v >= 0 and r_bleed_ohm > 0 and c_f > 0):
        raise InputError("<input>", "discharge", "need V0 >= 0 V, R > 0 ohm and C > 0 F")
    by_q = {r["quantity"]: r for r in df}
    missing = {"v_threshold_v", "t_discharge_s"} - set(by_q)
    if missing:
        raise InputError(
            "<input>", "limit_set", f"discharge set lacks {', '.join(sorted(missing))}"
        )
    set_id = str(df[0]["set"])
    if "c_min_f" in by_q and c_f <= by_q["c_min_f"]["limit"]:
        cmin = by_q["c_min_f"]["limit"]
        return [
            not_applicable_row(
                set_id, f"capacitance ≤ {cmin:g} F: rule does not apply", df, "t_discharge_s"
            )
        ]
    v_lim = by_q["v_threshold_v"]["limit"]
    t_allowed = by_q["t_discharge_s"]["limit"]
    tau_s = r_bleed_ohm * c_f
    t_s = tau_s * math.log(v0_v / v_lim) if v0_v > v_lim else 0.0
    v_res = v0_v * math.exp(-t_allowed / tau_s)
    note = f"tau = R·C = {tau_s:g} s, V0 = {v0_v:g} V"
    return [
        make_row(by_q["t_discharge_s"], t_s, t_allowed, reason=note),
        make_row(by_q["v_threshold_v"], v_res, v_lim, reason=note, quantity="v_residual_v"),
    ]


#: The plug-pin discharge rules every capacitor across the pins is checked against.
DISCHARGE_RULES: tuple[str, ...] = ("iec60335-1", "iec62368-1")


def evaluate_discharge_rules(
    v0_v: float, r_bleed_ohm: float, c_f: float, rules: Sequence[str] = DISCHARGE_RULES
) -> ComplianceRow:
    r"""One check of a capacitor's discharge after unplugging, against every rule covering it.

    Parameters
    ----------
    v0_v : float
        Capacitor voltage at the instant of disconnection [V].
    r_bleed_ohm : float
        Discharge (bleeder) resistance [ohm].
    c_f : float
        Capacitance across the pins [F].
    rules : sequence of str
        Rule names of :func:`evaluate_discharge`.

    Returns
    -------
    ComplianceRow
        ``tau_discharge_s``: the time constant τ = R·C [s] against the largest τ every
        covering rule allows. Failing, its ``set``, ``edition`` and ``clause`` cite every
        rule broken (and only those); passing, every rule that covers the capacitor.
        "not applicable" when no rule covers it.

    Notes
    -----
    One physical fact decides every rule: the exponential RC decay
    :math:`V(t) = V_0 e^{-t/\tau}`. A rule "at most :math:`V_{th}` after :math:`t_a`"
    is met when :math:`V_0 e^{-t_a/\tau} \le V_{th}`, i.e.
    :math:`\tau \le t_a / \ln(V_0/V_{th})` (any τ when :math:`V_0 \le V_{th}`).
    Each rule's own threshold, time and coverage come from :func:`evaluate_discharge`,
    whose verdict decides whether that rule is broken; this function only joins them
    into one check, so a slow discharge is one failure however many rules it breaks.

    References
    ----------
    IEC 60335-1 clause 22.5; IEC 62368-1 clause 5.5.2.2 (from memory).
    """
    tau_s = float(r_bleed_ohm) * float(c_f)
    v0_v = float(v0_v)
    applied = []  # (set id, allowed tau, broken, edition, clause, provenance, detail)
    skipped = []
    for rule in rules:
        rows = evaluate_discharge(v0_v, r_bleed_ohm, c_f, rule=rule)
        if rows[0].verdict == "not applicable":
            skipped.append(f"{rows[0].set}: {rows[0].reason}")
            continue
        t_row, v_row = rows
        v_th, t_allowed = float(v_row.limit), float(t_row.limit)
        tau_max = t_allowed / math.log(v0_v / v_th) if v0_v > v_th else math.inf
        detail = (f"{t_row.edition.split(':')[0]}: {v_th:g} V after {t_row.value:.3g} s "
                  f"({t_allowed:g} s allowed)")
        applied.append((t_row.set, tau_max, t_row.verdict == "fail", t_row.edition,
                        t_row.clause, t_row.provenance, detail))
    note = f"tau = R·C = {tau_s:.3g} s from V0 = {v0_v:.0f} V"
    if not applied:
        return ComplianceRow("discharge", "tau_discharge_s", tau_s, None, "s", None, None,
                             "not applicable", "", "", "", "; ".join([note, *skipped]))
    broken = [a for a in applied if a[2]]
    cited = broken or applied
    limit = min(a[1] for a in applied)
    join = " + ".join
    common = dict(set=join(a[0] for a in cited), quantity="tau_discharge_s", unit="s",
                  edition="; ".join(a[3] for a in cited),
                  clause="; ".join(f"{a[3].split(':')[0]} {a[4]}" for a in cited),
                  provenance="; ".join(dict.fromkeys(a[5] for a in cited)),
                  reason="; ".join([note, *(a[6] for a in applied), *skipped]))
    if not math.isfinite(limit):
        return ComplianceRow(value=tau_s, limit=None, used_pct=None, headroom=None,
                             verdict="pass", **common)
    used, head, _ = margin(tau_s, limit, "max")
    verdict = "fail" if broken else "pass"
    if verdict == "pass" and used > 100.0:  # at the limit within rounding: the rules decide
        used, head = 100.0, 0.0
    elif verdict == "fail" and used <= 100.0:
        used, head = math.nextafter(100.0, math.inf), min(head, -0.0)
    return ComplianceRow(value=tau_s, limit=limit, used_pct=used, headroom=head,
                         verdict=verdict, **common)


# --------------------------------------------------------------------------------------
# user sets
# --------------------------------------------------------------------------------------
def evaluate_user_set(
    df: str | Path | pd.DataFrame | list[dict], values: Mapping[str, float]
) -> list[ComplianceRow]:
    """Evaluate plain absolute limits on named quantities.

    Parameters
    ----------
    df : str, Path, DataFrame or list of dict
        Limit rows (``kind == "absolute"``; ``direction`` ``max`` or ``min``), e.g. a
        user file loaded by :func:`load_limit_set` (or its path, or its
        :func:`limit_records`).
    values : mapping of str to float
        Value of each quantity, keyed by the ``quantity`` column (e.g. ``p_w``, ``pf``).
        When ``values`` contains ``p_w``, rows with ``applies_from_w``/``applies_to_w``
        are filtered on it.

    Returns
    -------
    list of ComplianceRow
        One row per table row; "not applicable" when no value was given or the row
        does not apply at that power.

    Raises
    ------
    InputError
        A row whose kind is not ``absolute``.

    References
    ----------
    Format: ``data/limits/README.md`` (this project).
    """
    rows = []
    for rec in limit_records(df):
        if rec["kind"] != "absolute":
            raise InputError(
                str(rec.get("file", "<input>")),
                f"row {rec.get('row', '?')}, column kind",
                f"user sets hold absolute limits only, got '{rec['kind']}'",
            )
        q = rec["quantity"]
        if q not in values:
            rows.append(make_row(rec, None, None, reason=f"no value given for '{q}'"))
        elif "p_w" in values and not covers_power(rec, float(values["p_w"])):
            rows.append(make_row(rec, None, None, reason=f"row does not apply at {values['p_w']:g} W"))
        else:
            rows.append(make_row(rec, float(values[q]), rec["limit"]))
    return rows


__all__ = [
    "average_active_efficiency",
    "evaluate_discharge",
    "evaluate_discharge_rules",
    "evaluate_eps",
    "evaluate_harmonic_emissions",
    "evaluate_ieee519",
    "evaluate_ieee519_voltage",
    "evaluate_standby",
    "evaluate_user_set",
    "formula_limit",
    "ieee519_row",
]
