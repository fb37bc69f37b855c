"""Every screen a person reads, rendered to a string at 80 and 120 columns: no truncated
cell, no internal quantity key, SI prefixes and thousands separators on known figures.

Rendered from the ``--json`` dictionaries (the same dict the CLI prints), so each example is
solved once per session (the result cache and the recorded goldens keep this quick).

Source: SI prefixes as the BIPM SI Brochure (9th ed., table 7) defines them; the rest are the
project's own screen rules (issue 10 item 6: screens read like an engineer's notes).
"""

from __future__ import annotations

import functools
import json
import re
from pathlib import Path

import pytest
from rich.console import Console

from fleetpower.report.format import fmt, humanize, key_label_unit, quantity_label, si_text
from fleetpower.report.line import render_line
from fleetpower.report.spread import render_spread
from fleetpower.report.terminal import render_compare, render_fleet, render_unit

GOLDEN = Path(__file__).parent / "golden"
#: internal quantity keys (<quantity>_<unit>) that must not reach a person's screen
KEY = re.compile(r"\b[a-z0-9]+(?:_[a-z0-9]+)*_(?:p_w|pct|a|v|va|var|frac|kwh|w|s|ohm)\b")
#: a plain figure with too many zeros: 0.000xxx W, 15000.0 ohm
UNPREFIXED = re.compile(r"(?<![\w.])(?:0\.000\d+|\d{4,}(?:\.\d+)?) (?:W|V|A|VA|var|F|ohm|Ω|s)(?!\w)")


@pytest.fixture(autouse=True)
def _unicode_symbols():
    """µ and Ω, whatever an earlier in-process CLI run decided for its console."""
    from fleetpower.report.format import use_unicode

    use_unicode(True)
    yield


def _render(fn, d: dict, width: int) -> str:
    console = Console(width=width, record=True, color_system=None, file=open("/dev/null", "w"))
    fn(d, console)
    return console.export_text()


def _check(text: str, width: int) -> None:
    assert "…" not in text  # wrapped, never cut
    assert max(len(line) for line in text.splitlines()) <= width
    assert not KEY.findall(text), KEY.findall(text)[:5]
    assert not UNPREFIXED.findall(text), UNPREFIXED.findall(text)[:5]


#: words a narrow screen may drop on purpose (a column header that becomes "note")
_RENAMED = {"clause", "reason"}


def _whole_words(fn, d: dict, width: int) -> None:
    """Every word of the screen as 1000 columns print it appears whole at ``width``: a
    narrow column may wrap between words, never cut one ("transformer c" + "ore") nor
    crop it (rich crops silently when the columns' minimum widths exceed the screen)."""
    pattern = r"[\w.%()+\-/:'=,;µΩ±]+"
    narrow = set(re.findall(pattern, _render(fn, d, width)))
    cut = sorted(w for w in set(re.findall(pattern, _render(fn, d, 1000)))
                 if len(w) >= 4 and w not in narrow and w not in _RENAMED)
    assert not cut, cut[:8]


def _golden(prefix: str) -> list[str]:
    return sorted(p.stem for p in GOLDEN.glob(f"{prefix}-*.json"))


@functools.cache
def _dict(stem: str) -> dict:
    return json.loads((GOLDEN / f"{stem}.json").read_text())


@pytest.mark.parametrize("width", [80, 120])
@pytest.mark.parametrize("stem", _golden("unit"))
def test_unit_screen(stem, width):
    _check(_render(render_unit, _dict(stem), width), width)
    _whole_words(render_unit, _dict(stem), width)


@pytest.mark.parametrize("width", [80, 120])
@pytest.mark.parametrize("stem", _golden("fleet"))
def test_fleet_screen(stem, width):
    text = _render(render_fleet, _dict(stem), width)
    _check(text, width)
    _whole_words(render_fleet, _dict(stem), width)
    d = _dict(stem)
    assert f"{d['units']:,} units" in text  # thousands separators, as every count


@pytest.mark.parametrize("width", [80, 120])
def test_compare_screen(width):
    _check(_render(render_compare, _dict("demo"), width), width)
    _whole_words(render_compare, _dict("demo"), width)


def test_unit_screen_known_figures():
    d = _dict("unit-desk-sensor-dropper-lean")
    text = _render(render_unit, d, 120)
    s = d["states"][0]
    # the figures of the JSON, in SI prefixes: 0.0339 A reads as 33.9 mA, 0.0541 W as 54.1 mW
    assert fmt(s["i_rms_a"], 4, "A").endswith(" mA") and fmt(s["i_rms_a"], 4, "A") in text
    assert fmt(s["p_w"], 4, "W").endswith(" mW") and fmt(s["p_w"], 4, "W") in text
    assert "standby power" in text and "standby_p_w" not in text
    # the stress note "series resistance 47.0 ohm" (shared with --json) reads as 47 Ω
    assert "47 Ω" in text and "47.0 ohm" not in text


def test_line_screen():
    import contextlib
    import io

    from fleetpower.cli import main  # the example product line, solved once here

    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(["line", "examples/product-line/lantern-works-line.toml", "--json"]) == 0
    d = json.loads(out.getvalue())
    for width in (80, 120):
        _check(_render(render_line, d, width), width)
        _whole_words(render_line, d, width)


def test_spread_screen():
    import contextlib
    import io

    from fleetpower.cli import main

    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(["spread", "examples/desk-sensor-dropper-lean.toml", "--samples", "6",
                     "--years", "2", "--json"]) == 0
    d = json.loads(out.getvalue())
    for width in (80, 120):
        text = _render(render_spread, d, width)
        _check(text, width)
        _whole_words(render_spread, d, width)
        assert "loss: bleeder" in text and "reservoir minimum voltage" in text


@pytest.mark.parametrize("value, digits, unit, text", [
    (0.0000910, 3, "W", "91.0 µW"),     # the example: not 0.0000910 W
    (15000.0, 3, "ohm", "15.0 kΩ"),     # not 15000.0 ohm
    (2.2e-6, 2, "F", "2.2 µF"),
    (0.0254, 3, "V", "25.4 mV"),
    (0.36, 3, "V p-p", "360 mV p-p"),   # the prefix goes on the unit's first word
    (12882.0, 3, "A", "12.9 kA"),
    (26403.0, 4, "kWh", "26,403 kWh"),  # prefixed already: thousands separators only
    (6333.7, 4, "EUR", "6,334 EUR"),
    (1.3608087, 4, "W", "1.361 W"),
    (0.0, 3, "W", "0 W"),
    (None, 3, "W", "—"),
])
def test_fmt(value, digits, unit, text):
    assert fmt(value, digits, unit) == text


def test_labels_and_sentences():
    assert si_text(1e-7, "F") == "100 nF"
    assert quantity_label("i_h3_a", order=True) == "harmonic 3 current"
    assert key_label_unit("loss_zener_w") == ("loss: zener", "W")
    assert key_label_unit("thd_i_pct") == ("current THD", "%")
    assert humanize("eu-2023-826-standby standby_p_w") == "eu-2023-826-standby standby power"
    assert humanize("series resistance 15000.0 ohm") == "series resistance 15 kΩ"
    assert humanize("10-30 ohm pulse-rated") == "10-30 Ω pulse-rated"
    assert humanize("1e-05 W and -0.065 W") == "1e-05 W and -65 mW"  # exponents left alone


def test_ascii_symbols():
    """An output that cannot encode µ and Ω gets u and ohm (the CLI decides per console)."""
    from fleetpower.report.format import use_unicode

    use_unicode(False)
    try:
        assert fmt(0.0000910, 3, "W") == "91.0 uW" and fmt(15000.0, 3, "ohm") == "15.0 kohm"
        assert humanize("series resistance 22.0 ohm") == "series resistance 22 ohm"
    finally:
        use_unicode(True)
    assert fmt(15000.0, 3, "ohm") == "15.0 kΩ"


@pytest.mark.parametrize("stem", _golden("unit"))
def test_compliance_reasons_whole_at_80(stem):
    """At 80 columns a limit row's clause or reason is printed whole under its table: every
    word of it appears unbroken in the screen (a narrow column used to cut words such as
    "line-to-neutral" in two)."""
    from fleetpower.report.format import humanize as readable

    d = _dict(stem)
    text = _render(render_unit, d, 80)
    words = set(re.findall(r"\S+", text))
    for r in d.get("compliance", []):
        in_scope = r.get("scope", "in scope") == "in scope"
        why = r.get("reason") or (r.get("clause", "") if in_scope else "")
        for w in readable(why).split():
            if len(w) >= 6:
                assert w in words, (w, why)


def test_phase_warnings_said_once():
    """The same warning for every phase reads once, naming the phases (a screen rule)."""
    from fleetpower.report.terminal import _merge_phases

    got = _merge_phases(["phase L1: K is low", "other", "phase L2: K is low", "phase L3: x"])
    assert got == ["phases L1, L2: K is low", "other", "phase L3: x"]


def test_readme_demo_sample_is_the_demo_screen():
    # README's "trimmed sample of `fleetpower demo` (80 columns)": every line of it is a
    # line of the demo's screen at 80 columns, rendered from the demo's golden JSON (which
    # tests/test_golden.py checks against a real run): the project's rule that samples come
    # from real runs. It had kept figures from before P was measured at the terminals.
    readme = (Path(__file__).parent.parent / "README.md").read_text(encoding="utf-8")
    start = readme.index("A trimmed sample of `fleetpower demo` (80 columns):")
    block = readme[start:].split("```")[1]
    screen = {line.rstrip() for line in _render(render_compare, _dict("demo"), 80).splitlines()}
    sample = [line.rstrip() for line in block.splitlines()
              if line.strip() and line.strip() != "..."]
    missing = [line for line in sample if line not in screen]
    assert len(sample) > 40 and not missing, missing
