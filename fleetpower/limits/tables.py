"""Limit tables: reading ``data/limits/*.csv`` (and users' files), the compliance row, margins.

Every limit is one row of a CSV table (format documented in ``data/limits/README.md``).
This module reads and validates those tables, selects rows, and defines
:class:`ComplianceRow`, the record every evaluator in :mod:`fleetpower.limits.rules`
returns, with its verdict and margin.

The margin convention is the same for every row:

* ``direction == "max"`` (value must be at most the limit):
  ``used_pct = 100 * (value / limit)``, ``headroom = limit - value``.
* ``direction == "min"`` (value must be at least the limit, e.g. efficiency):
  ``used_pct = 100 * (limit / value)``, ``headroom = value - limit``.

So in both cases ``used_pct == 100`` exactly at the limit, ``used_pct > 100`` means
failing and ``headroom < 0`` means failing. The verdict flips exactly at the limit: a
value equal to the limit passes.

The tables are read with the standard library into plain records (one dict per row, as
:func:`limit_records` hands them to the evaluators), so checking a unit never imports
pandas; the functions that return DataFrames (:func:`load_limit_set`,
:func:`list_limit_sets`, :func:`load_scopes`) build them from those records when asked.

Owns: the limit-file format, the shipped-table cache, :class:`ComplianceRow`, :func:`margin`.
May import ``errors``, ``io.files`` (the bounded reader) and ``_resources`` only; nothing
that simulates or evaluates a unit.
"""

from __future__ import annotations

import contextlib
import contextvars
import csv
import functools
import io
import math
import os
from collections.abc import Iterator, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from .._resources import data_dir
from ..errors import FleetpowerError, InputError, suggest
from ..io.files import check_path, read_text_bounded
from .catalogue import SCOPE_FILE

if TYPE_CHECKING:  # pragma: no cover
    import pandas as pd

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


def make_row(
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


def not_applicable_row(
    set_id: str,
    reason: str,
    df: pd.DataFrame | list[dict] | None = None,
    quantity: str = "",
    unit: str | None = None,
) -> ComplianceRow:
    """One "not applicable" row for a whole set (clause and edition from its first row).

    ``df`` is the set's rows, as a DataFrame or as :func:`limit_records` gives them.
    """
    if df is None:
        rec = {}
    elif isinstance(df, list):
        rec = df[0] if df else {}
    else:  # a DataFrame
        rec = df.iloc[0].to_dict() if len(df) else {}
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
@functools.cache
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


def _csv_rows(path: Path | str, what: str) -> tuple[list[str], list[tuple[int, list[str]]]]:
    """Header and data rows of a CSV file, every cell stripped of surrounding blanks.

    Each data row comes with its row number as a spreadsheet counts it (header = 1);
    blank lines are skipped, a short row is padded with empty cells, and a row with more
    cells than the header, or a header naming a column twice, is refused naming the row.
    The file is read through :func:`fleetpower.io.files.read_text_bounded` (bounded size,
    a regular file, UTF-8; a leading byte-order mark is dropped).
    """
    file = str(path)
    text = read_text_bounded(path)
    if text.startswith("\ufeff"):
        text = text[1:]
    rows: list[tuple[int, list[str]]] = []
    try:
        reader = csv.reader(io.StringIO(text, newline=""), skipinitialspace=True)
        header = None
        for row_no, cells in enumerate(reader, start=1):  # a blank line is a row too
            cells = [c.strip() for c in cells]
            if not any(cells):
                continue
            if header is None:
                header = cells
                continue
            rows.append((row_no, cells))
    except csv.Error as exc:
        raise InputError(file, "", f"cannot read {what}: {exc}") from None
    if header is None:
        raise InputError(file, "", f"cannot read {what}: the file is empty")
    seen: set[str] = set()
    for n, col in enumerate(header, start=1):
        if col == "":
            raise InputError(file, f"row 1, column {n}", "a column without a name")
        if col in seen:
            raise InputError(file, f"row 1, column {col}", "column named twice")
        seen.add(col)
    out = []
    for row_no, cells in rows:
        if len(cells) > len(header):
            raise InputError(file, f"row {row_no}", f"{len(cells)} cells, but the header "
                             f"names {len(header)} columns")
        out.append((row_no, cells + [""] * (len(header) - len(cells))))
    return header, out


def _read_records(path: Path) -> list[dict]:
    """Read and validate one limit file into records; row numbers count the header as row 1.

    Each record maps every column of :data:`COLUMNS` (text, or float for
    :data:`NUMERIC_COLUMNS`, NaN when empty) plus ``row`` and ``file``.
    """
    file = str(path)
    header, rows = _csv_rows(path, "limit file")
    for col in header:
        if col not in COLUMNS:
            raise InputError(
                file, f"row 1, column {col}", f"unknown column '{col}'{suggest(col, COLUMNS)}"
            )
    for col in REQUIRED_COLUMNS:
        if col not in header:
            raise InputError(file, "row 1", f"missing required column '{col}'")
    records = []
    for row_no, cells in rows:
        rec = dict(OPTIONAL_COLUMNS)
        rec.update(zip(header, cells, strict=True))
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
        out = {col: rec[col] for col in COLUMNS}
        for col in NUMERIC_COLUMNS:
            out[col] = math.nan if rec[col] == "" else _as_float(rec[col], file, row_no, col)
        if rec["kind"] == "formula":
            if rec["form"] == "":
                raise InputError(file, f"row {row_no}, column form", "formula row needs a form")
            for col in ("a", "b", "c"):
                if math.isnan(out[col]):
                    out[col] = 0.0
        elif math.isnan(out["limit"]):
            raise InputError(file, f"row {row_no}, column limit", "empty cell")
        if not math.isnan(out["harmonic"]) and out["harmonic"] != int(out["harmonic"]):
            raise InputError(
                file, f"row {row_no}, column harmonic", f"'{rec['harmonic']}' is not an integer"
            )
        out["row"] = row_no
        out["file"] = file
        records.append(out)
    return records


def _frame(records: list[dict]) -> pd.DataFrame:
    """Records of :func:`_read_records` as the DataFrame the library returns."""
    import pandas as pd

    return pd.DataFrame.from_records(records, columns=list(COLUMNS) + ["row", "file"])


def _read_table(path: Path) -> pd.DataFrame:
    """Read and validate one limit file (a DataFrame of :func:`_read_records`)."""
    return _frame(_read_records(path))


@functools.lru_cache(maxsize=4)
def _shipped_cached(folder: str, stamp: tuple[tuple[str, float], ...]) -> tuple[dict, ...]:
    """Every shipped row, in file order (files sorted by name)."""
    return tuple(rec for name, _ in stamp for rec in _read_records(Path(name)))


#: Its columns: which products and mains a set covers, and where that comes from.
SCOPE_COLUMNS: tuple[str, ...] = (
    "set", "products", "market", "v_ln_min_v", "v_ln_max_v", "frequency_hz",
    "outside_mains", "requires", "edition", "clause", "provenance", "note",
)  # fmt: skip
SCOPE_REQUIRES: tuple[str, ...] = ("", "standby_state", "external_power_supply")
SCOPE_OUTSIDE: tuple[str, ...] = ("out of scope", "for information")


@functools.lru_cache(maxsize=4)
def _scopes_cached(path: str, stamp: float) -> tuple[dict, ...]:
    file = path
    header, rows = _csv_rows(path, "the scope table")
    if tuple(header) != SCOPE_COLUMNS:
        raise InputError(file, "row 1", f"columns must be {', '.join(SCOPE_COLUMNS)}")
    records = []
    for row_no, cells in rows:
        rec = dict(zip(header, cells, strict=True))
        for col, choices in (("requires", SCOPE_REQUIRES), ("outside_mains", SCOPE_OUTSIDE)):
            if rec[col] not in choices:
                raise InputError(file, f"row {row_no}, column {col}",
                                 f"'{rec[col]}' is not one of {', '.join(choices)}")
        for col in ("set", "products", "market", "edition", "clause", "provenance"):
            if rec[col] == "":
                raise InputError(file, f"row {row_no}, column {col}", "empty cell")
        for col in ("v_ln_min_v", "v_ln_max_v", "frequency_hz"):
            rec[col] = math.nan if rec[col] == "" else _as_float(rec[col], file, row_no, col)
        records.append(rec)
    return tuple(records)


def _scope_file() -> Path:
    path = limits_dir() / SCOPE_FILE
    if not path.is_file():
        raise FleetpowerError(f"no scope table {path}: the installation is incomplete "
                              "(reinstall fleetpower)")
    return path


def load_scopes() -> pd.DataFrame:
    """The scope of every shipped limit set: products, market and mains it covers.

    Returns
    -------
    pandas.DataFrame
        One row per set id, columns :data:`SCOPE_COLUMNS`: ``products`` and ``market``
        (text), ``v_ln_min_v``/``v_ln_max_v`` [V] line-to-neutral and ``frequency_hz``
        [Hz] of the mains the set is written for (NaN = any), ``outside_mains`` (what a
        row on other mains says: ``out of scope`` or ``for information``), ``requires``
        (a design declaration the set needs: ``standby_state``,
        ``external_power_supply`` or nothing), and ``edition``, ``clause``,
        ``provenance``, ``note`` of the scope statement itself.

    References
    ----------
    Format: ``data/limits/README.md`` (this project); the scope clause of each set is
    in its ``clause`` column.
    """
    import pandas as pd

    path = _scope_file()
    return pd.DataFrame.from_records(list(_scopes_cached(str(path), path.stat().st_mtime)),
                                     columns=list(SCOPE_COLUMNS))


#: the shipped tables' stamp held for a batch of units (:func:`tables_held`), or None
_HELD_STAMP: contextvars.ContextVar[tuple | None] = contextvars.ContextVar(
    "fleetpower_held_limit_stamp", default=None)


@contextlib.contextmanager
def tables_held() -> Iterator[None]:
    """Read the shipped tables' folder once for the ``with`` block.

    Every load of a shipped set checks the folder's files and their modification times
    (an edited table is read again): a listing and a ``stat`` per file, ~1 ms per unit
    evaluated against its markets' sets. A batch of units (a spread's chunk) checks them
    once, at its start; a table edited during the batch is read by the next one.
    """
    token = _HELD_STAMP.set(_stamp())
    try:
        yield
    finally:
        _HELD_STAMP.reset(token)


def _stamp() -> tuple[tuple[str, float], ...]:
    held = _HELD_STAMP.get()
    if held is not None:
        return held
    files = sorted(f for f in limits_dir().glob("*.csv") if f.name != SCOPE_FILE)
    if not files:
        raise FleetpowerError(f"no limit tables found in {limits_dir()}: the installation "
                              "is incomplete (reinstall fleetpower)")
    return tuple((str(f), f.stat().st_mtime) for f in files)


def _shipped() -> pd.DataFrame:
    """All shipped rows as a DataFrame (read once per file modification time)."""
    return _frame(list(_shipped_cached(str(limits_dir()), _stamp())))


@functools.lru_cache(maxsize=64)
def _shipped_set_cached(name: str, folder: str,
                        stamp: tuple[tuple[str, float], ...]) -> tuple[dict, ...]:
    return tuple(r for r in _shipped_cached(folder, stamp) if r["set"] == name)


def _unknown_set(text: str) -> InputError:
    ids = sorted({r["set"] for r in _shipped_cached(str(limits_dir()), _stamp())})
    return InputError(text, "limit set", f"unknown limit set '{text}' and no such file"
                      f"{suggest(text, ids)}; 'fleetpower limits' lists the sets")


def _is_user_file(text: str) -> bool:
    """Whether a set name is a user's file rather than a shipped set id: it ends in
    ``.csv``, holds a folder separator, or names something that exists and is not a
    folder (a FIFO or a device is then refused by the bounded reader, naming it)."""
    if text.lower().endswith(".csv") or "/" in text or os.sep in text:
        return True
    return os.path.lexists(text) and not os.path.isdir(text)


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
    return _frame(_load_records(path_or_name))


def _is_file_name(text: str) -> tuple[Path, bool]:
    """(path, whether ``text`` names a limit file rather than a shipped set id)."""
    path = Path(check_path(text))
    if _is_user_file(text):
        try:
            os.lstat(text)
        except FileNotFoundError:
            raise InputError(text, "", "limit file not found") from None
        except OSError as exc:  # e.g. a path component longer than the file system allows
            raise InputError(text[:60], "", f"cannot read: {exc.strerror or exc}") from None
        return path, True
    return path, False


def _load_records(path_or_name: str | Path) -> list[dict]:
    """:func:`load_limit_set` as fresh records (the same rows, without pandas)."""
    text = str(path_or_name)
    path, is_file = _is_file_name(text)
    if is_file:
        return _read_records(path)
    # a spread run evaluates every unit against the same sets: select each set once
    sel = _shipped_set_cached(text, str(limits_dir()), _stamp())
    if not sel:
        raise _unknown_set(text)
    return [dict(r) for r in sel]


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


def covers_power(rec: Mapping, p_w: float) -> bool:
    """Power applicability: ``applies_from_w < p_w <= applies_to_w`` (empty = unbounded)."""
    lo, hi = rec["applies_from_w"], rec["applies_to_w"]
    return (np.isnan(lo) or p_w > lo) and (np.isnan(hi) or p_w <= hi)


def covers_range(rec: Mapping, x: float) -> bool:
    """Range applicability on ``range_on``; ``lower``: from <= x < to, ``upper``: from < x <= to."""
    lo, hi = rec["range_from"], rec["range_to"]
    if rec["range_closed"] == "upper":
        return (np.isnan(lo) or x > lo) and (np.isnan(hi) or x <= hi)
    return (np.isnan(lo) or x >= lo) and (np.isnan(hi) or x < hi)


def limit_frame(set_or_df: str | Path | pd.DataFrame | list[dict]) -> pd.DataFrame:
    """A limit set as a DataFrame: a DataFrame as given, records (:func:`limit_records`)
    as a frame of the same columns, else :func:`load_limit_set`."""
    if isinstance(set_or_df, (str, Path)):
        return load_limit_set(set_or_df)
    return _frame(set_or_df) if isinstance(set_or_df, list) else set_or_df


def limit_records(set_or_df: str | Path | pd.DataFrame | list[dict]) -> list[dict]:
    """The rows of a limit set as plain dicts (column -> value), in file order.

    The evaluators read rows this way: a shipped set's rows are read once per file
    modification time and handed out as fresh dicts, so checking many units (a product
    line, a spread) costs no table work per unit and never imports pandas. A user file is
    read on each call, as :func:`load_limit_set` reads it; a DataFrame (or a list of such
    records) is converted as given.
    """
    if isinstance(set_or_df, (str, Path)):
        return _load_records(set_or_df)
    if isinstance(set_or_df, list):
        return [dict(r) for r in set_or_df]
    return set_or_df.to_dict("records")


@functools.lru_cache(maxsize=4)
def _scope_records_cached(path: str, stamp: float) -> dict[str, dict]:
    return {str(r["set"]): r for r in _scopes_cached(path, stamp)}


def scope_record(set_id: str) -> dict:
    """The scope row of one shipped set as a dict ({} when the scope table has none)."""
    path = _scope_file()
    rec = _scope_records_cached(str(path), path.stat().st_mtime).get(set_id)
    return dict(rec) if rec is not None else {}


def scope_set_ids() -> set[str]:
    """The ids of every set the scope table covers (what :func:`load_scopes` lists)."""
    path = _scope_file()
    return set(_scope_records_cached(str(path), path.stat().st_mtime))


__all__ = [
    "COLUMNS",
    "ComplianceRow",
    "covers_power",
    "covers_range",
    "limit_frame",
    "limit_records",
    "limits_dir",
    "list_limit_sets",
    "load_limit_set",
    "make_row",
    "margin",
    "not_applicable_row",
    "scope_record",
    "scope_set_ids",
]
