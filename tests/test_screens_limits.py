"""`fleetpower limits` screens rendered to strings at 80 and 120 columns: no truncated
cell, no internal key, harmonic orders as integers, provenance said once per set, and SI
prefixes on a few known figures.

Source: SI prefixes as the BIPM SI Brochure (9th ed., table 7) defines them; the rest are
the project's own screen rules (issue: screens read like an engineer's notes).
"""

from __future__ import annotations

import contextlib
import io
import re

import pytest

from fleetpower.cli import main, si_text
from fleetpower.limits import list_limit_sets, load_limit_set

SETS = list(list_limit_sets()["set"])


def _screen(*argv: str) -> str:
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(list(argv)) == 0
    return out.getvalue()


@pytest.mark.parametrize("width", [80, 120])
@pytest.mark.parametrize("name", SETS)
def test_limit_set_screen(name, width):
    text = _screen("limits", name, "--width", str(width))
    df = load_limit_set(name)
    assert "…" not in text  # wrapped, never cut
    assert max(len(line) for line in text.splitlines()) <= width
    for key in set(df["quantity"]):
        assert not re.search(rf"\b{re.escape(key)}\b", text), key  # a label, not the key
    assert not re.search(r"\b\d+\.0\b", text)  # harmonic orders (and all) print as "3"
    provenance = set(df["provenance"])
    if len(provenance) == 1:
        first_words = next(iter(provenance))[:20]
        assert text.count(first_words) == 1  # said once per set


@pytest.mark.parametrize("width", [80, 120])
def test_limit_listing_screen(width):
    text = _screen("limits", "--width", str(width))
    assert "…" not in text and all(s in text.replace("\n", "") or s[:10] in text for s in SETS)


@pytest.mark.parametrize("value, unit, text", [
    (0.0000910, "W", "91 µW"),     # the example: not 0.0000910 W
    (15000.0, "ohm", "15 kΩ"),     # not 15000.0 ohm
    (0.0254, "V", "25.4 mV"),
    (1e-7, "F", "100 nF"),
    (999.9, "V", "1 kV"),          # rounded before the prefix is chosen
    (230.0, "V", "230 V"),
    (12.5, "%", "12.5 %"),         # not an SI unit: no prefix
])
def test_si_text(value, unit, text):
    assert si_text(value, unit) == text
