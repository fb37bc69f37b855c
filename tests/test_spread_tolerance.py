"""Tolerance declarations: what reads, and bad declarations as one-line InputErrors.

The error-message contract (one line naming file and key) is this project's own
(README "Design files"); the part-class defaults carry their provenance in the module.
"""

from __future__ import annotations

import pytest

from fleetpower.errors import InputError
from fleetpower.spread.tolerance import (
    DEFAULT_SIGMAS,
    PART_CLASS_DEFAULTS,
    default_spreads,
    mains_band_spreads,
    parse_band,
    read_toleranced,
    split_tolerances,
)


def test_declarations_read_into_si_spreads():
    nominal, s = read_toleranced({"value": "1 uF", "tolerance": "10 %"},
                                 "parts.series_capacitance", file="d.toml")
    assert nominal == "1 uF"
    assert s.nominal == pytest.approx(1e-6) and s.band == pytest.approx(0.10)
    assert s.distribution == "uniform" and s.source == "declared"
    assert (s.low, s.high) == (pytest.approx(0.9e-6), pytest.approx(1.1e-6))
    _, z = read_toleranced({"value": "10 V", "tolerance": "5 %", "distribution": "normal"},
                           "parts.zener_voltage")
    assert z.sigmas == DEFAULT_SIGMAS == 3.0
    _, r = read_toleranced({"value": "47 ohm", "distribution": "corners",
                            "corners": ["44 ohm", "47 ohm", "50 ohm"]},
                           "parts.series_resistance")
    assert (r.low, r.high) == (44.0, 50.0)
    # a plain value is no declaration
    assert read_toleranced("1 uF", "parts.series_capacitance") == ("1 uF", None)
    # no band given: the part class's usual band, with its provenance
    _, d = read_toleranced({"value": "1 uF"}, "parts.series_capacitance")
    assert d.band == PART_CLASS_DEFAULTS["film-capacitor"].band
    assert d.source.startswith("class default: common practice, no source")


def test_split_leaves_nested_tables_and_plain_values_alone():
    table = {
        "series_capacitance": {"value": "470 nF", "tolerance": "20 %"},
        "zener_voltage": "10 V",
        "rectifier": "half-wave",
        "diode": {"forward_voltage": "0.8 V"},
    }
    plain, spreads = split_tolerances(table, "parts", file="d.toml")
    assert plain == {"series_capacitance": "470 nF", "zener_voltage": "10 V",
                     "rectifier": "half-wave", "diode": {"forward_voltage": "0.8 V"}}
    assert [s.key for s in spreads] == ["parts.series_capacitance"]
    extra = default_spreads({"parts.series_capacitance": 470e-9, "parts.zener_voltage": 10.0,
                             "parts.bleeder_resistance": 1e6}, spreads)
    assert [s.key for s in extra] == ["parts.zener_voltage", "parts.bleeder_resistance"]
    assert extra[0].band == 0.05  # zener class default (from memory: +-5 % series)


def test_mains_band_per_site_or_run():
    v, f = mains_band_spreads({"voltage": "6 %"}, 230.0, 50.0)
    assert (v.key, v.band, v.source) == ("mains.voltage", pytest.approx(0.06), "declared")
    # frequency not given: EN 50160's +-1 % (from memory), as documented
    assert f.band == pytest.approx(0.01) and f.source.startswith("class default")
    v, f = mains_band_spreads(None, 120.0, 60.0)
    assert v.band == pytest.approx(0.10) and v.nominal == 120.0


@pytest.mark.parametrize(
    ("key", "raw", "where", "words"),
    [
        ("parts.series_capacitance", {"value": "1 uF", "tolerance": "-10 %"},
         "parts.series_capacitance.tolerance", "cannot be negative"),
        ("parts.series_capacitance", {"value": "1 uF", "tolerance": "100 %"},
         "parts.series_capacitance.tolerance", "must stay positive"),
        ("parts.zener_voltage", {"value": "10 V", "tolerance": "60 %",
                                 "distribution": "normal"},
         "parts.zener_voltage.tolerance", "must stay positive"),
        ("parts.series_capacitance", {"value": "1 uF", "tolerance": "10 %",
                                      "distribution": "triangular"},
         "parts.series_capacitance.distribution", "unknown distribution 'triangular'"),
        ("parts.capacitor_voltage_rating", {"value": "400 V", "tolerance": "10 %"},
         "parts.capacitor_voltage_rating", "takes no tolerance"),
        ("parts.series_capacitance", {"value": "1 uF", "tolerence": "10 %"},
         "parts.series_capacitance.tolerence", "did you mean 'tolerance'"),
        ("parts.series_capacitance", {"value": "1 uF", "tolerance": "10"},
         "parts.series_capacitance.tolerance", "as a percentage"),
        ("parts.series_capacitance", {"value": "1 V", "tolerance": "10 %"},
         "parts.series_capacitance.value", "is not a capacitance"),
        ("parts.series_resistance", {"value": "47 ohm", "distribution": "corners",
                                     "corners": ["47 ohm", "-1 ohm"]},
         "parts.series_resistance.corners", "greater than zero"),
        ("parts.series_resistance", {"value": "47 ohm", "distribution": "corners"},
         "parts.series_resistance.corners", "needs a list"),
        ("parts.series_capacitance", {"value": "1 uF", "tolerance": "10 %", "sigmas": 2},
         "parts.series_capacitance.sigmas", "only a 'normal'"),
        ("parts.zener_resistance", {"value": "7 ohm"},
         "parts.zener_resistance.tolerance", "missing key"),
    ],
)
def test_bad_declarations_are_one_line_input_errors(key, raw, where, words):
    with pytest.raises(InputError) as info:
        read_toleranced(raw, key, file="design.toml")
    err = info.value
    assert err.file == "design.toml" and err.where == where
    assert words in err.message
    assert "\n" not in err.one_line()
    assert err.one_line().startswith(f"design.toml: {where}: ")


def test_bad_mains_band():
    with pytest.raises(InputError) as info:
        mains_band_spreads({"voltage": "-3 %"}, 230.0, 50.0, file="site.toml", key="mains_band")
    assert info.value.where == "mains_band.voltage"
    with pytest.raises(InputError, match="unknown distribution"):
        mains_band_spreads({"distribution": "corners"}, 230.0, 50.0)
    with pytest.raises(InputError) as info:
        mains_band_spreads({"voltage": "100 %"}, 230.0, 50.0)
    assert info.value.where == "mains_band.voltage" and "positive" in info.value.message


def test_parse_band():
    assert parse_band("10 %") == pytest.approx(0.1)
    assert parse_band("0.5%") == pytest.approx(0.005)
    assert parse_band("0 %") == 0.0
    for bad in ("ten %", 10, "10 ppm", None):
        with pytest.raises(InputError):
            parse_band(bad, key="k")
