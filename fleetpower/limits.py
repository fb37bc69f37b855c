"""Published limits: data tables under ``data/limits/`` and pure evaluation functions.

Every limit is one row of a CSV table (format documented in ``data/limits/README.md``).
The functions here read those rows and compare a measured or simulated value against
them, returning :class:`ComplianceRow` records with a verdict and a margin.

The margin convention is the same for every row:

* ``direction == "max"`` (value must be at most the limit):
  ``used_pct = 100 * (value / limit)``, ``headroom = limit - value``.
* ``direction == "min"`` (value must be at least the limit, e.g. efficiency):
  ``used_pct = 100 * (limit / value)``, ``headroom = value - limit``.

So in both cases ``used_pct == 100`` exactly at the limit, ``used_pct > 100`` means
failing and ``headroom < 0`` means failing. The verdict flips exactly at the limit: a
value equal to the limit passes.

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
"""

from __future__ import annotations

import functools
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from ._resources import data_dir
from .errors import FleetpowerError, InputError, suggest
from .pq.spectrum import H_MAX

__all__ = [
    "COLUMNS",
    "ComplianceRow",
    "average_active_efficiency",
    "evaluate_discharge",
    "evaluate_eps",
    "evaluate_harmonic_emissions",
    "evaluate_ieee519",
    "evaluate_ieee519_voltage",
    "evaluate_standby",
    "evaluate_user_set",
    "formula_limit",
    "ieee519_row",
    "limits_dir",
    "list_limit_sets",
    "load_limit_set",
    "margin",
]

#: Columns a limit file must have.
REQUIRED_COLUMNS: tuple[str, ...] = ("set", "quantity", "limit", "unit", "kind")
#: Columns a limit file may have (with the defaults used when absent).
OPTIONAL_COLUMNS: dict[str, str] = {
    "title": "",
    "harmonic": "",
    "direction": "max",
    "form": "",
    "a": "",
    "b": "",
    "c": "",
    "cap": "",
    "applies_from_w": "",
    "applies_to_w": "",
    "range_on": "",
    "range_from": "",
    "range_to": "",
    "range_closed": "",
    "in_force_from": "",
    "edition": "",
    "clause": "",
    "provenance": "user file",
    "note": "",
}
COLUMNS: tuple[str, ...] = REQUIRED_COLUMNS + tuple(OPTIONAL_COLUMNS)
NUMERIC_COLUMNS: tuple[str, ...] = (
    "harmonic",
    "limit",
    "a",
    "b",
    "c",
    "cap",
    "applies_from_w",
    "applies_to_w",
    "range_from",
    "range_to",
)
KINDS: tuple[str, ...] = (
    "absolute",
    "per_watt",
    "pct_of_fundamental",
    "pct_of_fundamental_times_pf",
    "pct_of_il",
    "formula",
    "threshold",
)
DIRECTIONS: tuple[str, ...] = ("max", "min")
FORMS: tuple[str, ...] = ("linear", "log_linear", "constant")
RANGE_CLOSED: tuple[str, ...] = ("lower", "upper")


NO_LIMITS_75W = "no harmonic limits apply (≤ 75 W)"
LIGHTING_25W = (
    "not evaluated: lighting ≤ 25 W has alternative requirements "
    "(IEC 61000-3-2 clause 7.4.3, from memory)"
)


@dataclass(frozen=True)
class ComplianceRow:
    """One limited quantity compared against its limit.

    Attributes
    ----------
    set : str
        Limit set id, e.g. ``"iec61000-3-2-class-a"``.
    quantity : str
        Limited quantity, e.g. ``"i_h3_a"``.
    value : float or None
        Measured or simulated value [``unit``]; None when not applicable.
    limit : float or None
        Evaluated limit [``unit``]; None when not applicable.
    unit : str
        Unit of ``value``, ``limit`` and ``headroom``.
    used_pct : float or None
        Share of the limit used [%]; 100 exactly at the limit, above 100 failing (see
        the module docstring for "at least" limits).
    headroom : float or None
        Distance to the limit [``unit``]; negative means failing.
    verdict : str
        ``"pass"``, ``"fail"`` or ``"not applicable"``.
    clause, edition, provenance : str
        Where the limit comes from and how it was obtained.
    reason : str
        One line explaining a "not applicable" verdict or how the limit was derived.
    """

    set: str
    quantity: str
    value: float | None
    limit: float | None
    unit: str
    used_pct: float | None
    headroom: float | None
    verdict: str
    clause: str
    edition: str
    provenance: str
    reason: str = ""


# --------------------------------------------------------------------------------------
# margins
# --------------------------------------------------------------------------------------
def margin(value: float, limit: float, direction: str = "max") -> tuple[float, float, str]:
    """Return ``(used_pct, headroom, verdict)`` for one value against one limit.

    Parameters
    ----------
    value : float
        Measured or simulated value [unit of the limit].
    limit : float
        Limit [same unit].
    direction : {"max", "min"}
        ``"max"``: value must be at most the limit; ``"min"``: at least.

    Returns
    -------
    used_pct : float
        [%] ``100 * value / limit`` for "max", ``100 * limit / value`` for "min".
        Exactly 100 at the limit; strictly above 100 whenever the verdict is "fail".
    headroom : float
        [unit] ``limit - value`` for "max", ``value - limit`` for "min"; negative fails.
    verdict : str
        ``"pass"`` or ``"fail"``; a value equal to the limit passes.

    Notes
    -----
    The ratio is formed first and then scaled (``100 * (value / limit)``), so the
    ratio is exactly 1 at the limit. When rounding would put a failing value at
    exactly 100 %, ``used_pct`` is moved to the next float above 100 so that
    ``used_pct > 100`` and "fail" always agree. ``used_pct`` is non-decreasing in
    ``value`` for "max" and non-increasing for "min".

    References
    ----------
    Common practice, no source (percent-of-limit reporting).
    """
    value = float(value)
    limit = float(limit)
    if direction == "max":
        ok = value <= limit
        headroom = limit - value
        if limit > 0:
            used = 100.0 * (value / limit)
        elif limit == 0:
            used = 100.0 if value == 0 else (math.inf if value > 0 else 0.0)
        else:
            raise ValueError(f"an at-most limit must be >= 0, got {limit}")
    elif direction == "min":
        ok = value >= limit
        headroom = value - limit
        if value > 0:
            used = 100.0 * (limit / value)
        else:
            used = 100.0 if limit == value else math.inf
    else:
        raise ValueError(f"direction must be 'max' or 'min', got {direction!r}")
    if not ok and used <= 100.0:
        used = math.nextafter(100.0, math.inf)
    if ok and used > 100.0:  # only reachable through rounding; keep the two consistent
        used = 100.0
    return used, headroom, "pass" if ok else "fail"


def _row(
    rec: Mapping,
    value: float | None,
    limit: float | None,
    unit: str | None = None,
    reason: str = "",
    quantity: str | None = None,
) -> ComplianceRow:
    """Build a ComplianceRow from a table record; None value or limit => not applicable."""
    unit = rec["unit"] if unit is None else unit
    common = dict(
        set=str(rec["set"]),
        quantity=str(rec["quantity"] if quantity is None else quantity),
        unit=str(unit),
        clause=str(rec.get("clause", "")),
        edition=str(rec.get("edition", "")),
        provenance=str(rec.get("provenance", "")),
    )
    if value is None or limit is None or not np.isfinite(limit):
        return ComplianceRow(
            value=value,
            limit=limit,
            used_pct=None,
            headroom=None,
            verdict="not applicable",
            reason=reason,
            **common,
        )
    used, head, verdict = margin(value, limit, str(rec.get("direction", "max") or "max"))
    return ComplianceRow(
        value=float(value),
        limit=float(limit),
        used_pct=used,
        headroom=head,
        verdict=verdict,
        reason=reason,
        **common,
    )


def _not_applicable(
    set_id: str,
    reason: str,
    df: pd.DataFrame | None = None,
    quantity: str = "",
    unit: str | None = None,
) -> ComplianceRow:
    """One "not applicable" row for a whole set (clause and edition from its first row)."""
    rec = df.iloc[0].to_dict() if df is not None and len(df) else {}
    return ComplianceRow(
        set=set_id,
        quantity=quantity,
        value=None,
        limit=None,
        unit=unit if unit is not None else (str(rec.get("unit", "")) if rec else ""),
        used_pct=None,
        headroom=None,
        verdict="not applicable",
        clause=str(rec.get("clause", "")) if rec else "",
        edition=str(rec.get("edition", "")) if rec else "",
        provenance=str(rec.get("provenance", "")) if rec else "",
        reason=reason,
    )


# --------------------------------------------------------------------------------------
# loading and validation
# --------------------------------------------------------------------------------------
def limits_dir() -> Path:
    """Folder holding the shipped limit tables (``data/limits``)."""
    return data_dir() / "limits"


def _as_float(text: str, file: str, row_no: int, col: str) -> float:
    try:
        out = float(text)
    except ValueError:
        raise InputError(file, f"row {row_no}, column {col}", f"'{text}' is not a number") from None
    if not math.isfinite(out):
        raise InputError(file, f"row {row_no}, column {col}", f"'{text}' is not a finite number")
    return out


def _read_table(path: Path) -> pd.DataFrame:
    """Read and validate one limit file; row numbers count the header as row 1."""
    file = str(path)
    try:
        raw = pd.read_csv(path, dtype=str, keep_default_na=False, skipinitialspace=True)
    except (OSError, pd.errors.ParserError, pd.errors.EmptyDataError, UnicodeDecodeError) as exc:
        raise InputError(file, "", f"cannot read limit file: {exc}") from None
    raw.columns = [str(c).strip() for c in raw.columns]
    for col in raw.columns:
        if col not in COLUMNS:
            raise InputError(
                file, f"row 1, column {col}", f"unknown column '{col}'{suggest(col, COLUMNS)}"
            )
    for col in REQUIRED_COLUMNS:
        if col not in raw.columns:
            raise InputError(file, "row 1", f"missing required column '{col}'")
    for col, default in OPTIONAL_COLUMNS.items():
        if col not in raw.columns:
            raw[col] = default
    raw = raw.apply(lambda s: s.str.strip())
    records = []
    for i, rec in enumerate(raw.to_dict("records")):
        row_no = i + 2
        for col in ("set", "quantity", "unit", "kind"):
            if rec[col] == "":
                raise InputError(file, f"row {row_no}, column {col}", "empty cell")
        for col, choices in (
            ("kind", KINDS),
            ("direction", DIRECTIONS),
            ("form", FORMS),
            ("range_closed", RANGE_CLOSED),
        ):
            if col == "direction" and rec[col] == "":
                rec[col] = "max"
            if rec[col] != "" and rec[col] not in choices:
                raise InputError(
                    file,
                    f"row {row_no}, column {col}",
                    f"'{rec[col]}' is not one of {', '.join(choices)}{suggest(rec[col], choices)}",
                )
        out = dict(rec)
        for col in NUMERIC_COLUMNS:
            out[col] = np.nan if rec[col] == "" else _as_float(rec[col], file, row_no, col)
        if rec["kind"] == "formula":
            if rec["form"] == "":
                raise InputError(file, f"row {row_no}, column form", "formula row needs a form")
            for col in ("a", "b", "c"):
                if np.isnan(out[col]):
                    out[col] = 0.0
        elif np.isnan(out["limit"]):
            raise InputError(file, f"row {row_no}, column limit", "empty cell")
        if not np.isnan(out["harmonic"]) and out["harmonic"] != int(out["harmonic"]):
            raise InputError(
                file, f"row {row_no}, column harmonic", f"'{rec['harmonic']}' is not an integer"
            )
        out["row"] = row_no
        out["file"] = file
        records.append(out)
    df = pd.DataFrame.from_records(records, columns=list(COLUMNS) + ["row", "file"])
    return df


@functools.lru_cache(maxsize=4)
def _shipped_cached(folder: str, stamp: tuple[tuple[str, float], ...]) -> pd.DataFrame:
    frames = [_read_table(Path(name)) for name, _ in stamp]
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame(columns=COLUMNS)


def _shipped() -> pd.DataFrame:
    """All shipped rows (cached per file modification time; a copy is returned)."""
    files = sorted(limits_dir().glob("*.csv"))
    if not files:
        raise FleetpowerError(f"no limit tables found in {limits_dir()}: the installation "
                              "is incomplete (reinstall fleetpower)")
    stamp = tuple((str(f), f.stat().st_mtime) for f in files)
    return _shipped_cached(str(limits_dir()), stamp).copy()


def load_limit_set(path_or_name: str | Path) -> pd.DataFrame:
    """Load a limit set by shipped id or from a CSV file.

    Parameters
    ----------
    path_or_name : str or Path
        A shipped set id (see :func:`list_limit_sets`), or the path of a CSV file in the
        ``data/limits`` format (all its rows are returned).

    Returns
    -------
    pandas.DataFrame
        One row per limited quantity with every column of :data:`COLUMNS` (numeric
        columns as float, NaN when empty) plus ``row`` (spreadsheet row number, header
        = 1) and ``file``.

    Raises
    ------
    InputError
        Unknown column (with a close-match suggestion), missing required column,
        non-numeric or empty cell, unknown ``kind``/``direction``/``form``, or unknown
        set id. The place reads ``"row N, column C"``.

    References
    ----------
    Format: ``data/limits/README.md`` (this project).
    """
    text = str(path_or_name)
    path = Path(text)
    if path.suffix.lower() == ".csv" or path.is_file():
        if not path.is_file():
            raise InputError(text, "", "limit file not found")
        return _read_table(path)
    shipped = _shipped()
    sel = shipped[shipped["set"] == text]
    if sel.empty:
        ids = sorted(set(shipped["set"]))
        raise InputError(text, "limit set", f"unknown limit set '{text}' and no such file"
                         f"{suggest(text, ids)}; 'fleetpower limits' lists the sets")
    return sel.reset_index(drop=True)


def list_limit_sets() -> pd.DataFrame:
    """Summarise the shipped limit sets.

    Returns
    -------
    pandas.DataFrame
        Columns ``set``, ``title``, ``edition``, ``clause``, ``provenance``, ``rows``.

    References
    ----------
    See the module docstring for the standards behind each set.
    """
    df = _shipped()
    out = (
        df.groupby("set", sort=True)
        .agg(
            title=("title", "first"),
            edition=("edition", "first"),
            clause=("clause", lambda s: "; ".join(dict.fromkeys(s))),
            provenance=("provenance", "first"),
            rows=("quantity", "size"),
        )
        .reset_index()
    )
    return out


def _in_power(rec: Mapping, p_w: float) -> bool:
    """Power applicability: ``applies_from_w < p_w <= applies_to_w`` (empty = unbounded)."""
    lo, hi = rec["applies_from_w"], rec["applies_to_w"]
    return (np.isnan(lo) or p_w > lo) and (np.isnan(hi) or p_w <= hi)


def _in_range(rec: Mapping, x: float) -> bool:
    """Range applicability on ``range_on``; ``lower``: from <= x < to, ``upper``: from < x <= to."""
    lo, hi = rec["range_from"], rec["range_to"]
    if rec["range_closed"] == "upper":
        return (np.isnan(lo) or x > lo) and (np.isnan(hi) or x <= hi)
    return (np.isnan(lo) or x >= lo) and (np.isnan(hi) or x < hi)


def _frame(set_or_df: str | Path | pd.DataFrame) -> pd.DataFrame:
    return set_or_df if isinstance(set_or_df, pd.DataFrame) else load_limit_set(set_or_df)


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
    df = _frame(set_id if limit_set is None else limit_set)
    i_h = _harmonics(i_h_rms_a, "i_h_rms_a")
    p_w = float(p_w)
    if is_lighting and cls != "C":
        return [
            _not_applicable(
                set_id, f"lighting equipment is Class C, not Class {cls}", df, "i_h_a", "A"
            )
        ]
    if cls == "C":
        if not is_lighting:
            return [
                _not_applicable(set_id, "Class C is for lighting equipment only", df, "i_h_a", "A")
            ]
        if p_w <= 25:
            return [_not_applicable(set_id, LIGHTING_25W, df, "i_h_a", "A")]
    else:
        if p_w <= 75:
            return [_not_applicable(set_id, NO_LIMITS_75W, df, "i_h_a", "A")]
        if cls == "D" and p_w > 600:
            return [
                _not_applicable(
                    set_id,
                    "Class D applies from 75 W to 600 W; choose Class A above 600 W",
                    df,
                    "i_h_a",
                    "A",
                )
            ]
    rows = []
    for rec in df.to_dict("records"):
        if np.isnan(rec["harmonic"]):
            continue
        h = int(rec["harmonic"])
        if h >= i_h.size:
            rows.append(_row(rec, None, None, "A", f"no value for harmonic {h}"))
            continue
        if not _in_power(rec, p_w):
            rows.append(_row(rec, None, None, "A", f"row does not apply at {p_w:g} W"))
            continue
        lim, how = _iec_limit_a(rec, p_w, i_h[1], pf)
        rows.append(_row(rec, float(i_h[h]), lim, "A", how))
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
    df = _frame(limit_set)
    sel = df[df["quantity"] == _STANDBY_MODES[mode]]
    if sel.empty:
        return [
            _not_applicable(
                str(df["set"].iloc[0]),
                f"set has no row for mode '{mode}'",
                df,
                _STANDBY_MODES[mode],
            )
        ]
    return [_row(rec, float(p_w), rec["limit"]) for rec in sel.to_dict("records")]


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
    df = _frame(_EPS_SETS[(region, bool(low_voltage))] if limit_set is None else limit_set)
    p = float(p_out_rated_w)
    if not p > 0:
        raise InputError("<input>", "p_out_rated_w", "rated output power must be > 0 W")
    rows = []
    for qty, value in (("no_load_p_w", no_load_p_w), ("avg_active_eff_frac", average_efficiency)):
        sel = [r for r in df.to_dict("records") if r["quantity"] == qty]
        hit = [r for r in sel if _in_power(r, p)]
        if not hit:
            base = sel[0] if sel else {"set": str(df["set"].iloc[0]), "quantity": qty, "unit": ""}
            rows.append(
                _row(base, None, None, reason=f"no row covers P_out = {p:g} W (out of scope)")
            )
            continue
        rec = hit[0]
        lim = formula_limit(rec, p) if rec["kind"] == "formula" else rec["limit"]
        rows.append(_row(rec, float(value), lim))
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
    df = _frame(limit_set)
    recs = [r for r in df.to_dict("records") if _in_range(r, ratio)]
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
        rows.append(_row(rec, float(value), rec["limit"], "%", reason))
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
    df = _frame(limit_set)
    return [
        _row(r, values[r["quantity"]], r["limit"], "%", f"bus {float(bus_kv):g} kV")
        for r in df.to_dict("records")
        if _in_range(r, float(bus_kv)) and r["quantity"] in values
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
    df = _frame(limit_set)
    v0_v, r_bleed_ohm, c_f = float(v0_v), float(r_bleed_ohm), float(c_f)
    if not (v0_v >= 0 and r_bleed_ohm > 0 and c_f > 0):
        raise InputError("<input>", "discharge", "need V0 >= 0 V, R > 0 ohm and C > 0 F")
    by_q = {r["quantity"]: r for r in df.to_dict("records")}
    missing = {"v_threshold_v", "t_discharge_s"} - set(by_q)
    if missing:
        raise InputError(
            "<input>", "limit_set", f"discharge set lacks {', '.join(sorted(missing))}"
        )
    set_id = str(df["set"].iloc[0])
    if "c_min_f" in by_q and c_f <= by_q["c_min_f"]["limit"]:
        cmin = by_q["c_min_f"]["limit"]
        return [
            _not_applicable(
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
        _row(by_q["t_discharge_s"], t_s, t_allowed, reason=note),
        _row(by_q["v_threshold_v"], v_res, v_lim, reason=note, quantity="v_residual_v"),
    ]


# --------------------------------------------------------------------------------------
# user sets
# --------------------------------------------------------------------------------------
def evaluate_user_set(
    df: str | Path | pd.DataFrame, values: Mapping[str, float]
) -> list[ComplianceRow]:
    """Evaluate plain absolute limits on named quantities.

    Parameters
    ----------
    df : str, Path or DataFrame
        Limit rows (``kind == "absolute"``; ``direction`` ``max`` or ``min``), e.g. a
        user file loaded by :func:`load_limit_set`.
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
    table = _frame(df)
    rows = []
    for rec in table.to_dict("records"):
        if rec["kind"] != "absolute":
            raise InputError(
                str(rec.get("file", "<input>")),
                f"row {rec.get('row', '?')}, column kind",
                f"user sets hold absolute limits only, got '{rec['kind']}'",
            )
        q = rec["quantity"]
        if q not in values:
            rows.append(_row(rec, None, None, reason=f"no value given for '{q}'"))
        elif "p_w" in values and not _in_power(rec, float(values["p_w"])):
            rows.append(_row(rec, None, None, reason=f"row does not apply at {values['p_w']:g} W"))
        else:
            rows.append(_row(rec, float(values[q]), rec["limit"]))
    return rows
