"""Product-line and market files: valid input is read as written, bad input is one line
naming the file and the key (the project's input rule; no outside source needed)."""

from __future__ import annotations

import shutil
from pathlib import Path

import numpy as np
import pytest

from fleetpower.errors import InputError
from fleetpower.io.design_file import load_design
from fleetpower.io.market_file import load_markets, shipped_markets
from fleetpower.io.product_line_file import load_product_line
from fleetpower.limits.tables import list_limit_sets

REPO = Path(__file__).resolve().parent.parent
LINE = REPO / "examples" / "product-line"

BASE = """\
name = "test line"
sales_years = 2

[[model]]
name = "plug"
design = "smart-plug-universal.toml"
service_life_years = 3
hours = { on = 4, standby = 20 }
[model.sales]
EU = 100
US = [10, 20]
"""


@pytest.fixture
def folder(tmp_path):
    for p in LINE.glob("*.toml"):
        shutil.copy(p, tmp_path / p.name)
    return tmp_path


def _write(folder: Path, text: str) -> Path:
    path = folder / "line.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _known():
    return list(list_limit_sets()["set"])


def test_shipped_markets_cover_the_mains_of_the_trade():
    m = shipped_markets()
    # nominal mains (IEC 60038 Table 1 for 230 V; ANSI C84.1 for 120 V; from memory)
    expect = {"EU": (230, 50), "UK": (230, 50), "US": (120, 60), "CA": (120, 60),
              "JP-50": (100, 50), "JP-60": (100, 60), "CN": (220, 50), "BR": (127, 60),
              "IN": (230, 50), "AU": (230, 50)}
    for mid, mains in expect.items():
        assert m[mid].mains == mains
        assert m[mid].provenance == "from memory"
        assert m[mid].price_per_kwh > 0 and m[mid].co2_kg_per_kwh > 0


def test_every_shipped_market_names_known_limit_sets():
    markets = load_markets(None, _known())  # raises on an unknown set id
    assert "us-doe-level-vi-eps-basic" in markets["US"].limit_sets
    assert not any(s.startswith("eu-") for s in markets["US"].limit_sets)


def test_the_example_line_reads(folder):
    spec = load_product_line(folder / "lantern-works-line.toml", _known())
    assert len(spec.models) >= 4
    assert {"JP-50", "US"} <= set(spec.market_ids)
    plug = next(m for m in spec.models if m.name == "smart plug")
    assert plug.sales["JP-50"].tolist() == [15000.0] * 3
    assert plug.sales["US"].tolist() == [60000.0, 90000.0, 120000.0]
    np.testing.assert_allclose(plug.occupancy.sum(axis=0), [4.0, 20.0])  # hours per state


def test_horizon_defaults_to_the_last_retirement(folder):
    spec = load_product_line(_write(folder, BASE))
    # sales in years 0 and 1, life 3: the last cohort serves years 1, 2, 3 -> 4 years
    assert spec.horizon_years == 4


def test_a_user_market_file_adds_and_overrides(folder):
    (folder / "mine.csv").write_text(
        "market,v_ln_v,frequency_hz,limit_sets,price_per_kwh,currency,co2_kg_per_kwh\n"
        "EU,230,50,,0.40,EUR,0.2\n"
        "BR-220,220,60,,0.8,BRL,0.08\n", encoding="utf-8")
    spec = load_product_line(_write(folder, 'markets = "mine.csv"\n' + BASE.replace(
        "US = [10, 20]", "BR-220 = 5")), _known())
    assert spec.markets["EU"].price_per_kwh == 0.40
    assert spec.markets["EU"].provenance == "user file"
    assert spec.markets["BR-220"].mains == (220.0, 60.0)


def test_universal_input_range_is_read():
    d = load_design(LINE / "smart-plug-universal.toml")
    assert d.rated_input.voltage == (90.0, 264.0)
    assert d.rated_input.frequency == (47.0, 63.0)
    assert load_design(LINE / "nightlight-dropper-230.toml").rated_input is None


@pytest.mark.parametrize("old, new, where, fragment", [
    ("EU = 100", "XX = 100", "model[1].sales.XX", "unknown market 'XX'"),
    ("EU = 100", "EU = -5", "model[1].sales.EU", "cannot be negative"),
    ("US = [10, 20]", "US = [10, -20]", "model[1].sales.US[1]", "cannot be negative"),
    ("US = [10, 20]", "US = [10]", "model[1].sales.US", "needs 2 values"),
    ("EU = 100", 'EU = "many"', "model[1].sales.EU", "expected a number"),
    ("service_life_years = 3", "service_life_years = 0", "model[1].service_life_years",
     "greater than zero"),
    ("service_life_years = 3", "service_lfe_years = 3", "model[1].service_lfe_years",
     "did you mean 'service_life_years'"),
    ('design = "smart-plug-universal.toml"', 'design = "nope.toml"', "model[1].design",
     "not found"),
    ("hours = { on = 4, standby = 20 }", "hours = { on = 4, standby = 19 }", "model[1].hours",
     "sum to 23"),
    ("hours = { on = 4, standby = 20 }", "hours = { on = 4, sleep = 20 }",
     "model[1].hours.sleep", "unknown state"),
    ("sales_years = 2", "sales_years = -1", "sales_years", "greater than zero"),
])
def test_bad_line_input_names_file_and_key(folder, old, new, where, fragment):
    assert old in BASE
    path = _write(folder, BASE.replace(old, new))
    with pytest.raises(InputError) as exc:
        load_product_line(path, _known())
    assert exc.value.file == str(path)
    assert exc.value.where == where
    assert fragment in exc.value.message
    assert "\n" not in exc.value.one_line()


def test_bad_market_file_names_row_and_column(folder):
    (folder / "mine.csv").write_text(
        "market,v_ln_v,frequency_hz,limit_sets,price_per_kwh,currency,co2_kg_per_kwh\n"
        "XY,230,50,eu-2023-826-standbi,0.40,EUR,0.2\n", encoding="utf-8")
    with pytest.raises(InputError) as exc:
        load_product_line(_write(folder, 'markets = "mine.csv"\n' + BASE), _known())
    assert exc.value.file.endswith("mine.csv")
    assert exc.value.where == "row 2, column limit_sets"
    assert "did you mean 'eu-2023-826-standby'" in exc.value.message
    (folder / "mine.csv").write_text(
        "market,v_ln_v,frequency_hz,limit_sets,price_per_kwh,currency,co2_kg_per_kwh\n"
        "XY,-230,50,,0.40,EUR,0.2\n", encoding="utf-8")
    with pytest.raises(InputError) as exc:
        load_product_line(_write(folder, 'markets = "mine.csv"\n' + BASE), _known())
    assert exc.value.where == "row 2, column v_ln_v"


def test_rated_input_range_must_be_ordered(folder):
    path = folder / "smart-plug-universal.toml"
    path.write_text(path.read_text().replace('["90 V", "264 V"]', '["264 V", "90 V"]'))
    with pytest.raises(InputError) as exc:
        load_design(path)
    assert exc.value.where.startswith("rated_input")
    assert "lower end comes first" in exc.value.message


def test_the_two_tables_agree_on_mains():
    """data/markets.csv (which rules are law in a market) and data/limits/scope.csv (which
    mains a rule is written for) are two facts; they must not drift apart: every rule a
    shipped market lists is written for that market's own mains (project invariant; the
    mains themselves as recorded in both files, from memory)."""
    from types import SimpleNamespace

    from fleetpower.limits.applicability import IN_SCOPE, mains_scope

    for mid, m in shipped_markets().items():
        v, f = m.mains
        on_site = SimpleNamespace(mains=SimpleNamespace(voltage=float(v), frequency=float(f)))
        for set_id in m.limit_sets:
            assert mains_scope(set_id, on_site) == IN_SCOPE, (mid, set_id)
