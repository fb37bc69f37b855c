"""Economic inputs are range-checked: one line naming the option or key, exit status 2.

A rate is a fraction per year (0.06 = 6 %/year). A whole-number percentage such as 6 would
mean 600 %/year; at or below -100 %/year the discount factor (1 + r)^-k is undefined or
changes sign (present-worth definition, any engineering-economics text, e.g. Newnan,
*Engineering Economic Analysis*, ch. 3 -- from memory). A service life is a whole number
of years >= 1.
"""

from __future__ import annotations

import pytest
from conftest import EXAMPLES

from fleetpower.io.fleet_file import load_fleet

FLEET = EXAMPLES / "harbour-office.toml"
SMPS = EXAMPLES / "desk-sensor-smps-230.toml"


@pytest.mark.parametrize(("option", "value", "says"), [
    ("--rate", "6", "0.06"),
    ("--escalation", "2", "0.02"),
    ("--rate", "-1", "-100 %"),
    ("--escalation", "-1.5", "-100 %"),
    ("--rate", "-0.75", "-50%/year or less"),  # a present worth doubling year on year
    ("--years", "-3", "at least 1"),
    ("--years", "0", "at least 1"),
])
def test_compare_options_out_of_range_are_one_line_errors(cli, option, value, says):
    rc, out, err = cli("compare", FLEET, "--design", SMPS, option, value)
    assert rc == 2 and out == ""
    assert err.count("\n") == 1 and option in err and says in err


def _fleet_with_economics(tmp_path, **econ) -> str:
    text = FLEET.read_text(encoding="utf-8").replace('design = "', f'design = "{EXAMPLES}/')
    head, _, _ = text.partition("[economics]")
    lines = [f"{k} = {v}" for k, v in econ.items()]
    path = tmp_path / "fleet.toml"
    path.write_text(head + "[economics]\n" + "\n".join(lines) + "\n", encoding="utf-8")
    return str(path)


@pytest.mark.parametrize(("key", "value", "says"), [
    ("discount_rate", 6, "0.06"),
    ("energy_escalation", -1.0, "-100 %"),
    ("service_life_years", -10, "at least 1"),
])
def test_fleet_file_economics_out_of_range_name_the_key(cli, tmp_path, key, value, says):
    path = _fleet_with_economics(tmp_path, **{key: value})
    rc, out, err = cli("fleet", path)
    assert rc == 2 and out == ""
    assert err.count("\n") == 1 and f"economics.{key}" in err and says in err


def test_falling_prices_and_fractional_rates_are_accepted(tmp_path):
    # -2 %/year escalation (prices falling) and 6 % discount are ordinary inputs
    spec = load_fleet(_fleet_with_economics(tmp_path, discount_rate=0.06,
                                            energy_escalation=-0.02))
    assert spec.economics == {"discount_rate": 0.06, "energy_escalation": -0.02}
