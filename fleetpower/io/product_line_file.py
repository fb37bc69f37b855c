"""Product-line files: the models of a line, the markets each is sold into, and how many.

A product-line file is TOML (format in the README, section "A product line across
markets")::

    name = "..."
    sales_years = 3                 # years of sales; a list of sales has this many values
    horizon_years = 12              # optional: years reported (default: until the last
                                    # unit sold is retired)
    first_year = 2026               # optional: calendar label of the first year of sales
    markets = "my-markets.csv"      # optional: add or override markets (data/markets.csv)

    [[model]]
    name = "Smart plug"
    design = "smart-plug.toml"      # a design file, relative to this file
    service_life_years = 8          # fixed service life (see fleetpower.installed_base)
    hours = { on = 3, standby = 21 }    # or profile = [24 state names]
    [model.sales]                   # units sold per year, per market id
    EU = 120000                     # the same every sales year
    US = [20000, 40000, 60000]      # or year by year

The usage profile is read by the fleet file's occupancy code, so ``hours`` and ``profile``
mean exactly what they mean in a fleet file. Any problem is an
:class:`~fleetpower.errors.InputError` naming the file and the key.

Owns: the product-line file format and :class:`ProductLineSpec`. May import ``errors``,
``units`` and the rest of ``io``; nothing that simulates or evaluates.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from pydantic import Field, ValidationError

from ..errors import InputError, suggest
from .design_file import Design, _fail, load_design
from .fleet_file import _occupancy
from .market_file import Market, load_markets
from .schema import Strict
from .toml import read_toml


class _ModelEntry(Strict):
    name: str
    design: str = Field(min_length=1)
    service_life_years: int = Field(gt=0)
    hours: dict[str, Any] | None = None
    profile: list[Any] | None = None
    sales: dict[str, Any]


class _LineFile(Strict):
    name: str | None = None
    sales_years: int = Field(gt=0)
    horizon_years: int | None = Field(default=None, gt=0)
    first_year: int | None = None
    markets: str | None = None
    model: list[dict[str, Any]] = Field(min_length=1)


@dataclass(frozen=True)
class ModelSpec:
    """One model of the line: its design, life, daily usage and sales per market."""

    name: str
    design_path: Path
    design: Design
    service_life_years: int
    occupancy: np.ndarray  # (24, n_states): share of each hour in each state
    states: tuple[str, ...]
    sales: dict[str, np.ndarray]  # market id -> units sold in each sales year
    where: str  # "model[k]" for messages


@dataclass(frozen=True)
class ProductLineSpec:
    name: str
    file: str
    sales_years: int
    horizon_years: int
    first_year: int | None
    models: list[ModelSpec]
    markets: dict[str, Market]  # every market known (shipped and the user's)

    @property
    def market_ids(self) -> list[str]:
        """Markets the line is sold into, in order of first appearance in the file."""
        return list(dict.fromkeys(m for model in self.models for m in model.sales))


def _sales(file: str, key: str, value: Any, years: int) -> np.ndarray:
    if isinstance(value, list):
        if len(value) != years:
            raise InputError(file, key, f"needs {years} values (sales_years), got {len(value)}")
        values = value
    else:
        values = [value] * years
    out = []
    for k, v in enumerate(values):
        where = f"{key}[{k}]" if isinstance(value, list) else key
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
            raise InputError(file, where, f"expected a number of units per year, got {v!r}")
        if v < 0:
            raise InputError(file, where, f"units sold cannot be negative, got {v:g}")
        out.append(float(v))
    return np.array(out)


def _model(file: str, k: int, raw: Any, base: Path, years: int, markets: dict[str, Market],
           cache: dict) -> ModelSpec:
    where = f"model[{k + 1}]"
    if not isinstance(raw, dict):
        raise InputError(file, where, "expected a table")
    try:
        entry = _ModelEntry.model_validate(raw)
    except ValidationError as exc:
        raise _fail(file, exc, (where,), _ModelEntry) from None
    path = (base / entry.design).resolve()
    if not path.is_file():
        raise InputError(file, f"{where}.design", f"design file not found: {entry.design}")
    if path not in cache:
        cache[path] = load_design(path)
    design = cache[path]
    occ, _peak, states = _occupancy(file, f"{where}.", design, entry.hours, entry.profile, None)
    if not entry.sales:
        raise InputError(file, f"{where}.sales", "names no market (e.g. EU = 100000)")
    sales = {}
    for mid, value in entry.sales.items():
        if mid not in markets:
            raise InputError(file, f"{where}.sales.{mid}",
                             f"unknown market {mid!r}{suggest(mid, markets)}; the markets are "
                             f"{', '.join(markets)} (add your own with markets = \"FILE.csv\")")
        sales[mid] = _sales(file, f"{where}.sales.{mid}", value, years)
    return ModelSpec(entry.name, path, design, entry.service_life_years, occ, states, sales,
                     where)


def load_product_line(path: str | Path, known_sets: Iterable[str] | None = None) -> ProductLineSpec:
    """Read and validate a product-line file, its market file and its design files.

    Parameters
    ----------
    path : str or Path
    known_sets : iterable of str, optional
        Limit-set ids the markets may name (the shipped limit tables' ids).

    Raises
    ------
    InputError
        Naming the file and the key on any problem.
    """
    path = Path(path)
    file = str(path)
    data = read_toml(path)
    try:
        top = _LineFile.model_validate(data)
    except ValidationError as exc:
        raise _fail(file, exc, (), _LineFile) from None
    user_markets = None
    if top.markets is not None:
        user_markets = (path.parent / top.markets).resolve()
        if not user_markets.is_file():
            raise InputError(file, "markets", f"market file not found: {top.markets}")
    markets = load_markets(user_markets, known_sets)
    cache: dict = {}
    models = [_model(file, k, raw, path.parent, top.sales_years, markets, cache)
              for k, raw in enumerate(top.model)]
    names = [m.name for m in models]
    for k, name in enumerate(names):
        if name in names[:k]:
            raise InputError(file, f"model[{k + 1}].name", f"model {name!r} given twice")
    horizon = top.horizon_years
    if horizon is None:
        horizon = top.sales_years + max(m.service_life_years for m in models) - 1
    return ProductLineSpec(top.name or path.stem, file, top.sales_years, horizon,
                           top.first_year, models, markets)


__all__ = ["load_product_line", "ProductLineSpec", "ModelSpec"]
