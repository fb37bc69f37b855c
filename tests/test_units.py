"""The quick reader of plain unit spellings agrees with pint, the reference library.

Source: pint (the project's unit library) parses every string here; the quick path in
``fleetpower.units`` must give the same float bit for bit, or decline (None) and leave the
string to pint.
"""

from __future__ import annotations

import random

import pytest

from fleetpower import units


def _pint_si(text: str, dimension: str):
    try:
        q = units.registry().Quantity(text)
        return float(q.to(units.DIMENSIONS[dimension][1]).magnitude)
    except Exception:  # pint refuses it: the quick path must then decline too
        return None


def _numbers(rng: random.Random) -> list[str]:
    return [
        f"{rng.uniform(-1000, 1000):.{rng.randint(0, 6)}f}",
        str(rng.randint(0, 10**6)),
        f"{rng.uniform(0, 10):.3g}e{rng.randint(-20, 20)}",
        f"{rng.uniform(0, 10):.3g}E+{rng.randint(0, 20)}",
    ] + [".5", "1.", "+3", "0", "0.25", "-0.5", "007", "00.5"]


def test_quick_path_agrees_with_pint():
    rng = random.Random(20240611)  # seeded: the same strings every run
    checked = 0
    for symbol, dimension in units._PLAIN_UNITS.items():
        for prefix in units._PLAIN_PREFIXES:
            for _ in range(12):
                for number in _numbers(rng):
                    for space in (" ", ""):
                        text = f"{number}{space}{prefix}{symbol}"
                        quick = units._plain_si(text, dimension)
                        if quick is None:
                            continue
                        checked += 1
                        assert quick == _pint_si(text, dimension), text
    assert checked > 5000  # the quick path did read most of them


@pytest.mark.parametrize("text, dimension", [
    ("3.3 uF", "voltage"),      # wrong dimension: pint explains
    ("3.3 uF/2", "capacitance"),  # an expression
    ("4e6J", "energy"),         # pint's tokenizer reads a complex literal
    ("007 V", "voltage"),       # leading zeros: pint reads this oddly, it decides
    ("inf V", "voltage"),
    ("1 kV**2", "voltage"),
    ("3.3", "capacitance"),
])
def test_quick_path_declines(text, dimension):
    assert units._plain_si(text, dimension) is None


def test_quick_path_reads_the_trade_spellings():
    # prefixes as SI defines them (BIPM SI Brochure, 9th ed., table 7)
    assert units.parse_quantity("3.3 uF", "capacitance") == 3.3 * 1e-6
    assert units.parse_quantity("1 Mohm", "resistance") == 1e6
    assert units.parse_quantity("25 mA", "current") == 25 * 1e-3
    assert units.parse_quantity("1.5 kVA", "power") == 1500.0
    assert units.parse_quantity("470 µF", "capacitance") == 470 * 1e-6
