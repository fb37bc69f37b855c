"""Markets: the mains, rules, electricity price and grid CO2 of each place a product is sold.

The shipped table is ``data/markets.csv`` (format in ``data/markets.md``); a user's file of
the same format adds markets or overrides shipped ones by their ``market`` id. Any problem
is an :class:`~fleetpower.errors.InputError` naming the file, the row and the column.

Owns: the market-table format and :class:`Market`. May import ``errors``, ``io.files``,
``_resources`` and ``gadget_range`` (its mains refusals) only; the limit-set ids a market
names are checked by the caller against
the shipped limit tables (``io`` imports nothing that evaluates).
"""

from __future__ import annotations

import functools
import io
import math
import os
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path

import pandas as pd

from .._resources import data_dir
from ..errors import FleetpowerError, InputError, suggest
from ..gadget_range import refuse_outside
from .files import check_path, read_text_bounded

#: the shipped market table, in ``data/``
MARKETS_FILE = "markets.csv"
#: columns every market file must have
REQUIRED: tuple[str, ...] = ("market", "v_ln_v", "frequency_hz", "limit_sets",
                             "price_per_kwh", "currency", "co2_kg_per_kwh")
#: columns a market file may have, with their defaults
OPTIONAL: dict[str, str] = {
    "title": "", "mains_source": "", "rules_source": "", "price_source": "",
    "co2_source": "", "provenance": "user file", "note": "",
}
COLUMNS: tuple[str, ...] = REQUIRED + tuple(OPTIONAL)


@dataclass(frozen=True)
class Market:
    """One market: its mains (line-to-neutral) and what applies there.

    ``limit_sets`` are ids of limit sets (``data/limits/``) that are rules of this market;
    the price is per kWh in ``currency``; ``co2_kg_per_kwh`` is the grid average.
    """

    market: str
    title: str
    v_ln_v: float
    frequency_hz: float
    limit_sets: tuple[str, ...]
    price_per_kwh: float
    currency: str
    co2_kg_per_kwh: float
    provenance: str
    note: str
    source: str  # the file the row came from

    @property
    def mains(self) -> tuple[float, float]:
        """(voltage [V], frequency [Hz]) of the market's mains."""
        return (self.v_ln_v, self.frequency_hz)


def _number(file, row_no, col, text, *, positive: bool) -> float:
    try:
        x = float(text)
    except ValueError:
        raise InputError(file, f"row {row_no}, column {col}",
                         f"not a number: {text!r}") from None
    if not math.isfinite(x):
        raise InputError(file, f"row {row_no}, column {col}", f"not a finite number: {text!r}")
    if positive and x <= 0:
        raise InputError(file, f"row {row_no}, column {col}", f"must be greater than zero, got {x:g}")
    if not positive and x < 0:
        raise InputError(file, f"row {row_no}, column {col}", f"cannot be negative, got {x:g}")
    return x


def read_market_table(path: str | Path, known_sets: Iterable[str] | None = None) -> dict[str, Market]:
    """Read one market file into ``{market id: Market}``, in file order.

    Parameters
    ----------
    path : str or Path
        A CSV file in the format of ``data/markets.csv``.
    known_sets : iterable of str, optional
        Limit-set ids a market may name; an unknown id is an error (with a suggestion).

    Raises
    ------
    InputError
        ``file: row N, column C: message`` (rows counted as a spreadsheet does, header = 1).
    """
    file = check_path(path)
    path = Path(file)
    if not os.path.lexists(file):
        raise InputError(file, "", "market file not found")
    # bounded like the design files: a regular file, at most MAX_READ_BYTES, UTF-8
    text = read_text_bounded(path).removeprefix("\ufeff")  # a spreadsheet's byte-order mark
    try:
        df = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False,
                         skipinitialspace=True)
    except Exception as exc:  # pandas raises several parser errors
        raise InputError(file, "", f"cannot read as CSV: {exc}") from None
    for col in df.columns:
        if col not in COLUMNS:
            raise InputError(file, f"row 1, column {col}", f"unknown column{suggest(col, COLUMNS)}")
    for col in REQUIRED:
        if col not in df.columns:
            raise InputError(file, "row 1", f"missing column {col!r}")
    known = None if known_sets is None else list(known_sets)
    out: dict[str, Market] = {}
    for k, rec in enumerate(df.to_dict("records")):
        row = k + 2
        rec = {c: str(rec.get(c, OPTIONAL.get(c, ""))).strip() for c in COLUMNS}
        mid = rec["market"]
        if not mid:
            raise InputError(file, f"row {row}, column market", "empty market id")
        if mid in out:
            raise InputError(file, f"row {row}, column market", f"market {mid!r} given twice")
        if not rec["currency"]:
            raise InputError(file, f"row {row}, column currency", "empty currency")
        sets = tuple(rec["limit_sets"].split())
        if known is not None:
            for s in sets:
                if s not in known:
                    raise InputError(file, f"row {row}, column limit_sets",
                                     f"unknown limit set {s!r}{suggest(s, known)}")
        v_ln = _number(file, row, "v_ln_v", rec["v_ln_v"], positive=True)
        f_hz = _number(file, row, "frequency_hz", rec["frequency_hz"], positive=True)
        # mains no small gadget's model means anything on (data/gadget_ranges.csv)
        refuse_outside("mains.voltage", v_ln, file=file, where=f"row {row}, column v_ln_v")
        refuse_outside("mains.frequency", f_hz, file=file,
                       where=f"row {row}, column frequency_hz")
        out[mid] = Market(
            market=mid, title=rec["title"] or mid,
            v_ln_v=v_ln,
            frequency_hz=f_hz,
            limit_sets=sets,
            price_per_kwh=_number(file, row, "price_per_kwh", rec["price_per_kwh"],
                                  positive=False),
            currency=rec["currency"],
            co2_kg_per_kwh=_number(file, row, "co2_kg_per_kwh", rec["co2_kg_per_kwh"],
                                   positive=False),
            provenance=rec["provenance"] or OPTIONAL["provenance"], note=rec["note"],
            source=file,
        )
    return out


@functools.lru_cache(maxsize=2)
def _shipped_cached(path: str, stamp: float) -> dict[str, Market]:
    return read_market_table(path)


def shipped_markets() -> dict[str, Market]:
    """The markets shipped in ``data/markets.csv``."""
    path = data_dir() / MARKETS_FILE
    if not path.is_file():
        raise FleetpowerError(f"no market table {path}: the installation is incomplete "
                              "(reinstall fleetpower)")
    return dict(_shipped_cached(str(path), path.stat().st_mtime))


def load_markets(user_file: str | Path | None = None,
                 known_sets: Iterable[str] | None = None) -> dict[str, Market]:
    """Shipped markets, with a user's file adding markets or replacing them by id.

    Parameters
    ----------
    user_file : str or Path, optional
        A market file of the same format; its rows win over shipped rows of the same id.
    known_sets : iterable of str, optional
        Limit-set ids the markets may name (checked in every file read).
    """
    known = None if known_sets is None else list(known_sets)
    markets = shipped_markets()
    if known is not None:  # the shipped table is checked too (a typo there is ours)
        shipped = data_dir() / MARKETS_FILE
        markets = read_market_table(shipped, known)
    if user_file is not None:
        markets.update(read_market_table(user_file, known))
    return markets


__all__ = ["Market", "load_markets", "read_market_table", "shipped_markets", "MARKETS_FILE",
           "COLUMNS", "REQUIRED"]
