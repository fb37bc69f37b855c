"""Bad input: one line naming the file and the key, exit status 2, no traceback.

The error-message contract is this project's own (README "Design files"); the unit checks
name their source beside each check.
"""

from __future__ import annotations

import math

import pytest
from conftest import build_design, example_path, write_design
from hypothesis import given, settings
from hypothesis import strategies as st

from fleetpower.cli import main
from fleetpower.errors import InputError
from fleetpower.io.design_file import design_from_dict, load_design
from fleetpower.units import parse_quantity


def assert_one_line(err: str, path, key: str | None) -> str:
    """stderr is exactly one line ``fleetpower: <path>: <key>: message``; return message."""
    assert "Traceback" not in err
    lines = err.splitlines()
    assert len(lines) == 1, err
    assert err.endswith("\n")
    line = lines[0]
    prefix = f"fleetpower: {path}: " + (f"{key}: " if key else "")
    assert line.startswith(prefix), line
    message = line[len(prefix) :]
    assert message.strip(), line
    return message


def unit_fails(cli, path, *extra) -> str:
    """Run ``fleetpower unit PATH`` and return stderr; the run must exit 2, print nothing."""
    rc, out, err = cli("unit", path, *extra)
    assert rc == 2
    assert out == ""
    return err


# ----------------------------------------------------------------------------------------
# the examples themselves are valid (otherwise every failure below would be vacuous)
# ----------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    "name", ["nightlight-dropper", "lobby-bridge-dropper", "heater-resistive", "corridor-smps"]
)
def test_examples_and_rewritten_examples_load(tmp_path, name):
    a = load_design(example_path(name))
    b = load_design(write_design(tmp_path, name))  # the conftest TOML writer round-trips
    assert a.model_dump(exclude={"source"}) == b.model_dump(exclude={"source"})


# ----------------------------------------------------------------------------------------
# CLI: one line, exit 2
# ----------------------------------------------------------------------------------------
def test_malformed_toml(cli, tmp_path):
    path = tmp_path / "broken.toml"
    text = example_path("nightlight-dropper").read_text(encoding="utf-8")
    path.write_text(text.replace("[mains]", "[mains"), encoding="utf-8")
    msg = assert_one_line(unit_fails(cli, path), path, None)
    assert msg.startswith("malformed TOML")
    assert "line 10" in msg  # "[mains" is line 10 of the example


def test_unknown_key_suggests_close_match(cli, design_file):
    path = design_file(parts={"series_capacitance": None, "series_capacitanse": "3.3 uF"})
    msg = assert_one_line(unit_fails(cli, path), path, "parts.series_capacitanse")
    assert "unknown key" in msg
    assert "'series_capacitance'" in msg


def test_unknown_top_level_key_suggests_close_match(cli, design_file):
    path = design_file("corridor-smps", equipment_class=None, equipment_clas="A")
    msg = assert_one_line(unit_fails(cli, path), path, "equipment_clas")
    assert "unknown key" in msg and "'equipment_class'" in msg


def test_unknown_nested_key_suggests_close_match(cli, design_file):
    path = design_file(parts={"diode": {"forward_voltag": "0.7 V"}})
    msg = assert_one_line(unit_fails(cli, path), path, "parts.diode.forward_voltag")
    assert "'forward_voltage'" in msg


@pytest.mark.parametrize(
    "overrides, key",
    [
        ({"parts": {"bleeder_resistance": None}}, "parts.bleeder_resistance"),
        ({"mains": {"frequency": None}}, "mains.frequency"),
        ({"mains": None}, "mains"),
        ({"topology": None}, "topology"),
    ],
)
def test_missing_key(cli, design_file, overrides, key):
    path = design_file(**overrides)
    msg = assert_one_line(unit_fails(cli, path), path, key)
    assert msg == "missing key"


def test_wrong_dimension(cli, design_file):
    path = design_file(parts={"series_capacitance": "3.3 V"})
    msg = assert_one_line(unit_fails(cli, path), path, "parts.series_capacitance")
    assert "'3.3 V' is not a capacitance" in msg
    assert "V" in msg.split("units of")[-1]


@pytest.mark.parametrize("value", ["0 uF", "-3.3 uF"])
def test_zero_and_negative_capacitance(cli, design_file, value):
    path = design_file(parts={"series_capacitance": value})
    msg = assert_one_line(unit_fails(cli, path), path, "parts.series_capacitance")
    assert "greater than zero" in msg


@pytest.mark.parametrize(
    "section, key, value",
    [
        ("mains", "voltage", "-120 V"),
        ("mains", "frequency", "0 Hz"),
        ("parts", "series_resistance", "0 ohm"),
        ("parts", "reservoir_capacitance", "-470 uF"),
    ],
)
def test_zero_and_negative_values_elsewhere(cli, design_file, section, key, value):
    path = design_file(**{section: {key: value}})
    msg = assert_one_line(unit_fails(cli, path), path, f"{section}.{key}")
    assert "greater than zero" in msg


def test_negative_load(cli, design_file):
    path = design_file(states={"active": "-20 mA"})
    msg = assert_one_line(unit_fails(cli, path), path, "states.active")
    assert "negative" in msg


def test_unknown_topology_suggests(cli, design_file):
    path = design_file(topology="capacitive-droper")
    msg = assert_one_line(unit_fails(cli, path), path, "topology")
    assert "'capacitive-dropper'" in msg
    assert "rectifier-smps" in msg  # lists the choices


def test_unknown_state_option_suggests(cli):
    path = example_path("nightlight-dropper")
    msg = assert_one_line(unit_fails(cli, path, "--state", "actve"), path, "--state")
    assert "unknown state 'actve'" in msg and "'active'" in msg


def test_unknown_rated_state_suggests(cli, design_file):
    path = design_file(rated_state="activ")
    msg = assert_one_line(unit_fails(cli, path), path, "rated_state")
    assert "'active'" in msg


@pytest.mark.parametrize("load", ["20 V", "3 ohm", "20"])
def test_load_neither_current_nor_power(cli, design_file, load):
    path = design_file(states={"active": load})
    msg = assert_one_line(unit_fails(cli, path), path, "states.active")
    assert "neither a current" in msg and "nor a power" in msg


@pytest.mark.parametrize("value", [3.3e-6, "3.3e-6", 3])
def test_plain_number_without_unit(cli, design_file, value):
    path = design_file(parts={"series_capacitance": value})
    msg = assert_one_line(unit_fails(cli, path), path, "parts.series_capacitance")
    assert "has no unit" in msg
    assert " F" in msg  # tells the user which unit to write


def test_nonexistent_file(cli, tmp_path):
    path = tmp_path / "no-such-design.toml"
    msg = assert_one_line(unit_fails(cli, path), path, None)
    assert msg == "file not found"


@pytest.mark.parametrize(
    "table, index",
    [
        ([[0.1, 0.55], [0.25, 1.72]], "[1]"),  # efficiency above 1
        ([[0.0, 0.55]], "[0]"),  # zero fraction of rated load
        ([[0.5, -0.8]], "[0]"),  # negative efficiency
        ([[2.0, 0.8]], "[0]"),  # fraction beyond 1.5
    ],
)
def test_bad_efficiency_entry_value(cli, design_file, table, index):
    path = design_file("corridor-smps", output={"efficiency": table})
    msg = assert_one_line(unit_fails(cli, path), path, f"output.efficiency{index}")
    assert "fraction_of_rated" in msg


@pytest.mark.parametrize("table", [[[0.1, 0.55, 3.0]], [[0.1, "80 %"]], [], [0.1, 0.8]], ids=str)
def test_bad_efficiency_entry_shape(cli, design_file, table):
    path = design_file("corridor-smps", output={"efficiency": table})
    err = unit_fails(cli, path)
    assert_one_line(err, path, None)
    assert err.startswith(f"fleetpower: {path}: output.efficiency")


def test_undervoltage_lockout_above_mains_peak(cli, design_file):
    # 120 V rms has a 170 V peak; 200 V can never be reached (sqrt(2) peak factor of a sine)
    path = design_file("corridor-smps", output={"undervoltage_lockout": "200 V"})
    assert_one_line(unit_fails(cli, path), path, "output.undervoltage_lockout")


@pytest.mark.parametrize("v_out", ["12 V", "13 V"])
def test_output_voltage_not_below_zener(cli, design_file, v_out):
    # zener_voltage is 12 V in the example; equal is refused too (common practice, no
    # source: a linear regulator needs headroom below its input clamp)
    path = design_file(output={"voltage": v_out})
    msg = assert_one_line(unit_fails(cli, path), path, "output.voltage")
    assert "zener_voltage" in msg


def test_output_voltage_just_below_zener_is_accepted(tmp_path):
    design = load_design(write_design(tmp_path, output={"voltage": "11.9 V"}))
    assert design.output.voltage == pytest.approx(11.9)


def test_dropper_cannot_be_declared_isolated(tmp_path):
    # README safety note: a dropper's output sits at mains potential, whatever the file says
    design = load_design(write_design(tmp_path, isolated=True))
    assert design.is_isolated is False
    smps = load_design(write_design(tmp_path, "corridor-smps", isolated=False))
    assert smps.is_isolated is False


def test_no_traceback_even_when_stderr_is_read_directly(capsys, design_file):
    path = design_file(parts={"series_capacitance": "3.3 V"})
    assert main(["unit", str(path)]) == 2
    captured = capsys.readouterr()
    assert "Traceback" not in captured.err + captured.out
    assert captured.err.count("\n") == 1


# ----------------------------------------------------------------------------------------
# library level
# ----------------------------------------------------------------------------------------
def test_load_design_raises_input_error_with_file_and_where(design_file):
    path = design_file(parts={"series_capacitance": "3.3 V"})
    with pytest.raises(InputError) as info:
        load_design(path)
    exc = info.value
    assert exc.file == str(path)
    assert exc.where == "parts.series_capacitance"
    assert "capacitance" in exc.message
    assert str(exc) == f"{path}: parts.series_capacitance: {exc.message}"


def test_load_design_missing_file_names_it(tmp_path):
    path = tmp_path / "absent.toml"
    with pytest.raises(InputError) as info:
        load_design(path)
    assert info.value.file == str(path)
    assert info.value.where == ""


def test_design_from_dict_names_the_key():
    data = build_design(states={"idle": "2 V"})
    with pytest.raises(InputError) as info:
        design_from_dict(data, "mem.toml")
    assert (info.value.file, info.value.where) == ("mem.toml", "states.idle")


def test_loads_are_stored_in_si():
    d = load_design(example_path("corridor-smps"))
    assert d.states["active"] == ("power", pytest.approx(0.135))
    # a power load is turned into a current by the output voltage: I = P / V
    assert d.load_current_a("active") == pytest.approx(0.135 / 5.0)


# ----------------------------------------------------------------------------------------
# unit parsing
# ----------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    "text, dimension, si",
    [
        # SI prefixes (BIPM SI Brochure, 9th ed., Table 7): u = 1e-6, k = 1e3, M = 1e6, m = 1e-3
        ("3.3 uF", "capacitance", 3.3e-6),
        ("3.3 µF", "capacitance", 3.3e-6),  # U+00B5 micro sign
        ("3.3 μF", "capacitance", 3.3e-6),  # U+03BC Greek mu
        ("680 nF", "capacitance", 680e-9),
        ("1 Mohm", "resistance", 1e6),
        ("1 MΩ", "resistance", 1e6),
        ("470 kohm", "resistance", 470e3),
        ("470 kΩ", "resistance", 470e3),
        ("22 Ω", "resistance", 22.0),
        ("22 ohm", "resistance", 22.0),
        ("1 mohm", "resistance", 1e-3),  # milli, not mega: case matters
        ("25 mA", "current", 25e-3),
        ("0.6 W", "power", 0.6),
        ("120 V", "voltage", 120.0),
        ("60 Hz", "frequency", 60.0),
        ("  5 V ", "voltage", 5.0),
    ],
)
def test_parse_quantity_examples(text, dimension, si):
    assert parse_quantity(text, dimension) == pytest.approx(si, rel=1e-12)


@pytest.mark.parametrize(
    "text, dimension, phrase",
    [
        ("3.3 V", "capacitance", "is not a capacitance"),
        ("3.3", "capacitance", "has no unit"),
        ("3.3 furlongs_per_blorb", "capacitance", "cannot read"),
        ("25 mA", "voltage", "is not a voltage"),
    ],
)
def test_parse_quantity_refuses(text, dimension, phrase):
    with pytest.raises(InputError) as info:
        parse_quantity(text, dimension, file="f.toml", key="k")
    assert phrase in info.value.message
    assert (info.value.file, info.value.where) == ("f.toml", "k")


def test_parse_quantity_refuses_non_strings():
    for value in (True, None, [1, 2], 3.3):
        with pytest.raises(InputError):
            parse_quantity(value, "capacitance")


# SI prefixes (BIPM SI Brochure, 9th ed., 2019, Table 7)
PREFIX = {"p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "m": 1e-3, "": 1.0, "k": 1e3, "M": 1e6}
UNITS = {
    "F": "capacitance",
    "ohm": "resistance",
    "Ω": "resistance",
    "A": "current",
    "V": "voltage",
    "W": "power",
    "Hz": "frequency",
    "H": "inductance",
}


@settings(max_examples=300, deadline=None)
@given(
    # kept inside the documented bounds (1e-15..1e15 SI, README "Input bounds") with
    # every prefix, with a margin for rounding: 2e-3 pA and 5e5 MW
    magnitude=st.floats(min_value=2e-3, max_value=5e5, allow_nan=False, allow_infinity=False),
    prefix=st.sampled_from(sorted(PREFIX)),
    unit=st.sampled_from(sorted(UNITS)),
    space=st.sampled_from([" ", ""]),
)
def test_parse_quantity_applies_si_prefix(magnitude, prefix, unit, space):
    text = f"{magnitude!r}{space}{prefix}{unit}"
    value = parse_quantity(text, UNITS[unit])
    expected = magnitude * PREFIX[prefix]
    assert math.isclose(value, expected, rel_tol=1e-12), (text, value, expected)


@pytest.mark.parametrize("text", ["1e-16 F", "2e15 V", "0.5 fF", "1e400 uF", "inf V"])
def test_parse_quantity_refuses_magnitudes_outside_the_bounds(text):
    """Outside 1e-15..1e15 SI or non-finite: refused naming the key (README "Input bounds")."""
    dim = "capacitance" if text.endswith("F") else "voltage"
    with pytest.raises(InputError, match="k.x"):
        parse_quantity(text, dim, file="f.toml", key="k.x")


@pytest.mark.parametrize("text", ["0 V", "1e-15 F", "1e15 ohm", "3 m**2*kg/s**3/A", "2**-2 V"])
def test_parse_quantity_accepts_values_inside_the_bounds(text):
    dim = {"V": "voltage", "F": "capacitance", "m": "resistance", "A": "voltage"}[text[-1]]
    assert math.isfinite(parse_quantity(text, dim))
