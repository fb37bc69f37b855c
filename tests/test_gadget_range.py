"""The range of small mains gadgets (data/gadget_ranges.csv): absurd but parseable input is
never simulated silently.

Outside a ``refuse`` row a design (or a fleet site, or a market) is refused, exit 2, one line
naming the file and key with the physical reason; outside a ``warn`` row it is simulated and
every verb that simulates (unit, fleet, compare, line, spread) says which value is outside
which range: on the screen, in ``--json`` (``range_warnings``, one dict per value with its
key) and in Markdown. The ranges themselves are trade facts ("common practice, no source")
or recalled ("from memory"); the table says which, row by row.
"""

from __future__ import annotations

import csv
import json
import math
import re
from pathlib import Path

import pytest
from conftest import EXAMPLES, build_design, dumps_toml, run_captured
from golden_outputs import GOLDEN

from fleetpower import gadget_range as G
from fleetpower._resources import data_dir
from fleetpower.io.design_file import design_from_dict
from fleetpower.io.schema import Mains
from fleetpower.topologies import REGISTRY

#: an X capacitor of 10 uF: twice the top of the range (4.7 uF), and drawing
#: 2 pi 50 Hz 10 uF 230 V = 0.72 A of reactive current (X_C = 1/(2 pi f C), textbook)
ODD_X = {"parts": {"x_capacitance": "10 uF"}}


# ----------------------------------------------------------------------------------------
# the table
# ----------------------------------------------------------------------------------------
def test_table_is_complete_and_says_where_each_range_comes_from():
    with open(data_dir() / G.RANGES_FILE, encoding="utf-8", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert rows and list(rows[0]) == ["key", "quantity", "low", "high", "unit", "outside",
                                      "reason", "provenance"]
    parts_fields = {f for t in REGISTRY.values() if t.parts_model is not None
                    for f in t.parts_model.model_fields}
    for r in rows:
        assert r["provenance"] in ("from memory", "common practice, no source"), r["key"]
        assert r["reason"].strip() and r["outside"] in ("refuse", "warn")
        table, _, name = r["key"].partition(".")
        known = {"mains": set(Mains.model_fields), "parts": parts_fields,
                 "states": {"load_current", "load_power"}, "result": {"i_rms_a", "p_w"}}
        assert name in known[table], f"{r['key']} names no input or result"
    parsed = G.ranges()
    assert len(parsed) == len(rows) and G.ranges() is parsed  # read once
    # the units are read: 4.7 uF is 4.7e-6 F, 22 Mohm 2.2e7 ohm, 5 mH 5e-3 H
    x = G.rows_for("parts.x_capacitance", "warn")[0]
    assert x.high_si == pytest.approx(4.7e-6)
    assert G.rows_for("parts.bleeder_resistance", "warn")[0].high_si == pytest.approx(2.2e7)
    assert G.rows_for("mains.source_inductance")[0].high_si == pytest.approx(5e-3)


def test_range_ends_are_inside_and_one_step_out_is_not():
    row = G.rows_for("mains.voltage", "warn")[0]
    assert row.contains(row.low_si) and row.contains(row.high_si)
    assert not row.contains(row.high_si * (1 + 1e-9)) and not row.contains(row.low_si * 0.99)


# ----------------------------------------------------------------------------------------
# refused: the model itself would be meaningless
# ----------------------------------------------------------------------------------------
@pytest.mark.parametrize("section,key,value", [
    ("mains", "voltage", "100 kV"),       # not low-voltage mains (IEC 60038: up to 1000 V AC)
    ("mains", "frequency", "1 Hz"),       # no mains below 16.7 Hz (railway traction)
    ("mains", "frequency", "1 kHz"),      # none above 400 Hz (aircraft on-board)
    ("parts", "bleeder_resistance", "1 mohm_"),  # a short across C1, not a bleeder
])
def test_meaningless_input_is_refused_naming_file_and_key(tmp_path, section, key, value):
    f = tmp_path / "design.toml"
    f.write_text(dumps_toml(build_design("nightlight-dropper", **{section: {key: value}})),
                 encoding="utf-8")
    rc, out, err = run_captured(["unit", f, "--json"])
    assert rc == 2 and out == ""
    line, = err.strip().splitlines()
    assert str(f) in line and f"{section}.{key}" in line and "outside what fleetpower can model" in line


def test_site_and_market_mains_are_refused_too(tmp_path):
    fleet = (EXAMPLES / "harbour-office.toml").read_text(encoding="utf-8")
    f = tmp_path / "fleet.toml"
    f.write_text(fleet.replace('voltage = "230 V"', 'voltage = "11 kV"', 1), encoding="utf-8")
    for name in ("sensor-dropper-230", "lobby-bridge-dropper", "heater-resistive"):
        (tmp_path / f"{name}.toml").write_text((EXAMPLES / f"{name}.toml").read_text("utf-8"),
                                               encoding="utf-8")
    rc, _, err = run_captured(["fleet", f, "--json"])
    assert rc == 2 and str(f) in err and "site.voltage" in err
    from fleetpower.errors import InputError
    from fleetpower.io.market_file import read_market_table

    m = tmp_path / "markets.csv"
    shipped = (data_dir() / "markets.csv").read_text(encoding="utf-8").splitlines()
    m.write_text(shipped[0] + "\n" + shipped[1].replace(",230,50,", ",230,1000,", 1) + "\n",
                 encoding="utf-8")
    with pytest.raises(InputError) as exc:
        read_market_table(m)
    assert "frequency_hz" in str(exc.value) and "outside what fleetpower can model" in str(exc.value)


# ----------------------------------------------------------------------------------------
# simulated with a warning: every verb says it
# ----------------------------------------------------------------------------------------
def _keys(report: dict) -> set[str]:
    return {w["key"] for w in report["range_warnings"]}


def test_library_warns_on_the_design_and_on_its_results():
    d = design_from_dict(build_design("desk-sensor-smps-230", parts={"x_capacitance": "1 F"}))
    (w,) = G.design_warnings(d)
    assert (w.key, w.value_si) == ("parts.x_capacitance", 1.0)
    assert "4.7 uF" in w.message and "parts.x_capacitance" in w.message
    # an ideal 1 F capacitor on 230 V 50 Hz: I = 2 pi f C V = 72.3 kA (textbook), far
    # beyond the 16 A a socket supplies
    ws = G.result_warnings(d.name, "active", 2 * math.pi * 50 * 1.0 * 230, 0.5)
    assert [x.key for x in ws] == ["result.i_rms_a"]
    assert not G.result_warnings(d.name, "active", 16.0, 250.0)  # the ends are inside


def test_unit_warns_on_screen_and_in_json(tmp_path):
    f = tmp_path / "design.toml"
    f.write_text(dumps_toml(build_design("desk-sensor-smps-230", parts={"x_capacitance": "1 F"})),
                 encoding="utf-8")
    rc, out, err = run_captured(["unit", f, "--json"])
    assert rc == 0 and err == ""
    r = json.loads(out)
    assert {"parts.x_capacitance", "result.i_rms_a"} <= _keys(r)
    x = next(w for w in r["range_warnings"] if w["key"] == "parts.x_capacitance")
    assert x["value"] == 1.0 and x["high"] == pytest.approx(4.7e-6) and x["unit"] == "F"
    assert any("parts.x_capacitance" in w for w in r["warnings"])
    rc, out, _ = run_captured(["unit", f, "--width", "80"])
    assert rc == 0 and "range of small mains gadgets" in " ".join(out.split())


@pytest.fixture(scope="module")
def odd(tmp_path_factory):
    """A folder holding a design outside the range, a fleet and a product line using it."""
    d = tmp_path_factory.mktemp("odd")
    (d / "odd.toml").write_text(dumps_toml(build_design("desk-sensor-smps-230", **ODD_X)),
                                encoding="utf-8")
    (d / "fleet.toml").write_text("""name = "Range check fleet (invented)"
[site]
system = "single-phase"
voltage = "230 V"
frequency = "50 Hz"
[tariff]
energy_price = 0.24
[[group]]
name = "sensors"
design = "odd.toml"
count = 10
phase = "L1"
hours = { active = 4, idle = 20 }
""", encoding="utf-8")
    (d / "line.toml").write_text("""name = "Range check line (invented)"
sales_years = 1
[[model]]
name = "odd sensor"
design = "odd.toml"
service_life_years = 5
hours = { active = 4, idle = 20 }
[model.sales]
EU = 1000
""", encoding="utf-8")
    return d


def _says_it(text: str) -> bool:
    text = re.sub(r"[\s│┃|]+", " ", text)  # a panel may wrap the sentence inside its borders
    return "parts.x_capacitance" in text and "range of small mains gadgets" in text


@pytest.mark.parametrize("verb", ["fleet", "compare", "line", "spread"])
def test_every_simulating_verb_warns(odd, verb, tmp_path):
    argv = {"fleet": ["fleet", odd / "fleet.toml"],
            "compare": ["compare", odd / "fleet.toml", "--design", odd / "odd.toml"],
            "line": ["line", odd / "line.toml"],
            "spread": ["spread", odd / "odd.toml", "--samples", "2", "--no-limits"]}[verb]
    rc, out, err = run_captured([*argv, "--json"])
    assert rc == 0, err
    r = json.loads(out)
    assert "parts.x_capacitance" in _keys(r)
    assert any(_says_it(w) for w in r["warnings"])
    rc, out, _ = run_captured([*argv, "--width", "120"])
    assert rc == 0 and _says_it(out)
    if verb in ("compare", "line"):
        md = tmp_path / "report.md"
        rc, _, err = run_captured([*argv, "--markdown", md])
        assert rc == 0, err
        assert "## Warnings" in md.read_text(encoding="utf-8")
        assert _says_it(md.read_text(encoding="utf-8"))


def test_a_solver_refusal_names_the_inputs_outside_the_range(tmp_path):
    # a 1 F dropper capacitor: no periodic steady state within the engine's cycles, and
    # the refusal says which input is outside the range (exit 3, one line)
    f = tmp_path / "design.toml"
    f.write_text(dumps_toml(build_design("nightlight-dropper",
                                         parts={"series_capacitance": "1 F"})),
                 encoding="utf-8")
    rc, out, err = run_captured(["unit", f, "--json"])
    if rc == 0:  # solved: then it is said in the report
        assert "parts.series_capacitance" in _keys(json.loads(out))
    else:
        assert rc == 3 and "parts.series_capacitance" in err and len(err.strip().splitlines()) == 1


# ----------------------------------------------------------------------------------------
# the bundled examples and the demo are inside the range
# ----------------------------------------------------------------------------------------
def test_bundled_examples_and_demo_raise_no_range_warning():
    # every recorded output of the examples and the demo (tests/golden/, checked against
    # the live run by tests/test_golden.py) carries an empty list
    recorded = sorted(GOLDEN.glob("*.json"))
    assert recorded
    for path in recorded:
        report = json.loads(path.read_text(encoding="utf-8"))
        found = _all_range_warnings(report)
        assert found == [], f"{path.name}: {found[:2]}"
    # and the inputs of every example design, product-line designs included
    for path in sorted(EXAMPLES.rglob("*.toml")):
        from fleetpower.io.design_file import load_design

        try:
            design = load_design(path)
        except Exception:  # a fleet or product-line file, not a design
            continue
        assert G.design_warnings(design) == (), path.name


def _all_range_warnings(report) -> list:
    out, seen = [], 0
    stack = [report]
    while stack:
        x = stack.pop()
        if isinstance(x, dict):
            if "range_warnings" in x:
                seen += 1
                out += x["range_warnings"]
            stack += list(x.values())
        elif isinstance(x, list):
            stack += x
    assert seen, "no range_warnings list in a recorded report"
    return out


def test_product_line_example_raises_no_range_warning():
    line = EXAMPLES / "product-line" / "lantern-works-line.toml"
    rc, out, err = run_captured(["line", line, "--json"])
    assert rc == 0, err
    r = json.loads(out)
    assert r["range_warnings"] == [] and not any("range of small" in w for w in r["warnings"])


def test_paths_are_what_the_warnings_quote():
    # the warnings name the table by its path in the repository
    assert (Path(__file__).resolve().parent.parent / "data" / G.RANGES_FILE).is_file()


def test_readme_quotes_the_table_as_shipped():
    # the README's table is a copy for readers: it must say what the data file says
    readme = (Path(__file__).resolve().parent.parent / "README.md").read_text(encoding="utf-8")
    quoted = set()
    for line in readme.splitlines():
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        if len(cells) == 5 and cells[0].startswith("`") and cells[3] in ("refuse", "warn"):
            text = cells[2].replace("µ", "u").replace("Ω", "ohm").replace("−", "-")
            quoted.add((cells[0].strip("`"), cells[1], text, cells[3], cells[4]))
    shipped = {(r.key, r.quantity, r.range_text, r.outside, r.provenance) for r in G.ranges()}
    assert quoted == shipped


def test_design_warnings_read_models_and_duck_typed_holders_alike():
    # design_warnings is duck-typed (its docstring): holders that are not pydantic models
    # are read by attribute; a part model is read from its fields (a faster path); both
    # give the same warnings. Range ends from data/gadget_ranges.csv (dropper capacitance
    # 10 nF to 10 uF).
    from types import SimpleNamespace

    from fleetpower.gadget_range import design_warnings
    from fleetpower.io.design_file import load_design

    design = load_design(EXAMPLES / "nightlight-dropper.toml")
    odd = design.model_copy(update={"parts": design.parts.model_copy(
        update={"series_capacitance": 22e-6})})
    keys = [w.key for w in design_warnings(odd)]
    assert keys == ["parts.series_capacitance"]
    duck = SimpleNamespace(name=odd.name, mains=SimpleNamespace(**dict(odd.mains)),
                           parts=SimpleNamespace(**dict(odd.parts)), states=odd.states,
                           load_current_a=odd.load_current_a, load_power_w=odd.load_power_w)
    assert [w.to_dict() for w in design_warnings(duck)] == \
        [w.to_dict() for w in design_warnings(odd)]
    assert design_warnings(design) == ()
