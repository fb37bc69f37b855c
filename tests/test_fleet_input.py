"""Fleet files from the command line: one clear line and exit 2 on bad input; --csv, --json.

Every bad-input case is run through ``fleetpower.cli.main(["fleet", path])``; the message
must be a single stderr line ``fleetpower: <file>: <key or row>: ...`` (the project's
error convention, DEVELOPERS.md).
"""

from __future__ import annotations

import json
import os
import stat

import pandas as pd
import pytest
from conftest import example_path, toml_value
from hypothesis import given, settings
from hypothesis import strategies as st

from fleetpower.cli import EXIT_INPUT

PROFILE = ["idle"] * 8 + ["active"] * 10 + ["idle"] * 6


_value = toml_value  # the TOML writer of conftest.py


def base_fleet() -> dict:
    return {
        "name": "input checks",
        "site": {
            "system": "three-phase-wye",
            "voltage": "120 V",
            "frequency": "60 Hz",
            "short_circuit_current": "10 kA",
            "phase_conductor_rating": "100 A",
            "neutral_conductor_rating": "100 A",
            "currency": "USD",
        },
        "tariff": {"energy_price": 0.15, "demand_price": 10.0, "co2_kg_per_kwh": 0.4},
        "group": [
            {
                "name": "sensors",
                "design": "dropper.toml",
                "count": 120,
                "phase": "balanced",
                "hours": {"active": 3, "idle": 21},
            },
            {
                "name": "controllers",
                "design": "smps.toml",
                "count": 40,
                "phase": "L2",
                "profile": PROFILE,
            },
        ],
    }


def write_fleet(folder, data: dict, name: str = "fleet.toml"):
    lines = []
    for k, v in data.items():
        if not isinstance(v, (dict, list)) or k == "inventory":
            lines.append(f"{k} = {_value(v)}")
    for k in ("site", "tariff"):
        if k in data:
            lines += ["", f"[{k}]"] + [f"{a} = {_value(b)}" for a, b in data[k].items()]
    for g in data.get("group", []):
        lines += ["", "[[group]]"] + [f"{a} = {_value(b)}" for a, b in g.items()]
    path = folder / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


@pytest.fixture
def folder(tmp_path):
    """A folder with the two 120 V / 60 Hz example designs as dropper.toml and smps.toml."""
    for src, dst in (("nightlight-dropper", "dropper.toml"), ("corridor-smps", "smps.toml")):
        (tmp_path / dst).write_text(example_path(src).read_text(encoding="utf-8"), "utf-8")
    return tmp_path


def one_line_error(cli, path, file, where):
    """Run the fleet verb; assert exit 2 and one stderr line naming file and place."""
    rc, out, err = cli("fleet", path)
    assert rc == EXIT_INPUT, err
    assert out == ""
    lines = err.strip("\n").split("\n")
    assert len(lines) == 1, err
    assert lines[0].startswith(f"fleetpower: {file}: {where}: "), lines[0]
    return lines[0]


# ----------------------------------------------------------------------------------------
# bad fleet files
# ----------------------------------------------------------------------------------------
def _g(**edits):
    def edit(data):
        data["group"][0].update(edits)
        for k, v in edits.items():
            if v is None:
                del data["group"][0][k]

    return edit


def _site(**edits):
    def edit(data):
        data["site"].update(edits)

    return edit


def _top(**edits):
    def edit(data):
        data.update(edits)

    return edit


CASES = [
    (
        "missing design",
        _g(design="no-such-design.toml"),
        "group[1].design",
        ["design file not found", "no-such-design.toml"],
    ),
    ("zero count", _g(count=0), "group[1].count", ["greater than zero"]),
    ("negative count", _g(count=-5), "group[1].count", ["greater than zero"]),
    ("fractional count", _g(count=2.5), "group[1].count", ["whole number", "2.5"]),
    ("count as text", _g(count="many"), "group[1].count", ["expected a number"]),
    (
        "misspelt phase",
        _g(phase="balance"),
        "group[1].phase",
        ["unknown phase 'balance'", "did you mean 'balanced'", "L1, L2, L3, balanced"],
    ),
    (
        "phase the site lacks",
        _g(phase="L4"),
        "group[1].phase",
        ["unknown phase 'L4'", "L1, L2, L3, balanced"],
    ),
    (
        "unknown state in hours",
        _g(hours={"activ": 3, "idle": 21}),
        "group[1].hours.activ",
        ["unknown state 'activ'", "did you mean 'active'"],
    ),
    (
        "unknown state in profile",
        _g(hours=None, profile=["idle"] * 5 + ["sleeping"] + ["idle"] * 18),
        "group[1].profile[5]",
        ["unknown state 'sleeping'"],
    ),
    (
        "hours not summing to 24",
        _g(hours={"active": 3, "idle": 20}),
        "group[1].hours",
        ["sum to 23", "not 24"],
    ),
    (
        "negative hours",
        _g(hours={"active": -3, "idle": 27}),
        "group[1].hours.active",
        ["at least 0"],
    ),
    (
        "profile too short",
        _g(hours=None, profile=["idle"] * 23),
        "group[1].profile",
        ["24 state names"],
    ),
    ("both hours and profile", _g(profile=PROFILE), "group[1].hours", ["not both"]),
    ("diversity out of range", _g(diversity=1.5), "group[1].diversity", ["(0, 1]"]),
    (
        "unknown site system",
        _site(system="three-phase-delta"),
        "site.system",
        ["unknown system 'three-phase-delta'", "single-phase, split-phase, three-phase-wye"],
    ),
    ("site voltage not a voltage", _site(voltage="120 A"), "site.voltage", []),
    ("unknown group key", _g(colour="red"), "group[1].colour", ["unknown key"]),
    (
        "unknown site key",
        _site(volts="120 V"),
        "site.volts",
        ["unknown key", "did you mean 'voltage'"],
    ),
    (
        "unknown top-level key",
        _top(sumation="phasor"),
        "sumation",
        ["unknown key", "did you mean 'summation'"],
    ),
    ("unknown summation", _top(summation="rss"), "summation", ["iec61000-3-6"]),
    # the range of small mains gadgets (data/gadget_ranges.csv): no low-voltage mains
    # runs above 1000 V (IEC 60038, from memory), none at 1 kHz
    ("site voltage above low voltage", _site(voltage="11 kV"), "site.voltage",
     ["outside what fleetpower can model"]),
    ("site frequency of no mains", _site(frequency="1 kHz"), "site.frequency",
     ["outside what fleetpower can model"]),
]


@pytest.mark.parametrize(("label", "edit", "where", "fragments"), CASES, ids=[c[0] for c in CASES])
def test_bad_fleet_file_gives_one_line_and_exit_2(cli, folder, label, edit, where, fragments):
    data = base_fleet()
    edit(data)
    path = write_fleet(folder, data)
    line = one_line_error(cli, path, path, where)
    for f in fragments:
        assert f in line, (label, line)


def test_error_in_a_second_group_names_that_group(cli, folder):
    data = base_fleet()
    data["group"][1]["count"] = 0
    path = write_fleet(folder, data)
    one_line_error(cli, path, path, "group[2].count")


def test_missing_fleet_file(cli, tmp_path):
    path = tmp_path / "absent.toml"
    rc, out, err = cli("fleet", path)
    assert rc == EXIT_INPUT and out == ""
    assert err == f"fleetpower: {path}: file not found\n"


# ----------------------------------------------------------------------------------------
# CSV inventories
# ----------------------------------------------------------------------------------------
INV_HEADER = "name,design,count,phase,hours,profile"
INV_GOOD = [
    "meters,dropper.toml,30,L1,active=3 idle=21,",
    "panels,smps.toml,12,balanced,," + " ".join(PROFILE),
]


def _inventory_fleet(folder, rows, header=INV_HEADER):
    (folder / "inventory.csv").write_text("\n".join([header, *rows]) + "\n", "utf-8")
    data = base_fleet()
    data["inventory"] = "inventory.csv"
    return write_fleet(folder, data)


INV_CASES = [
    (
        "non-numeric count",
        ["meters,dropper.toml,ten,L1,active=3 idle=21,"],
        3,
        "row 3, column count",
        ["not a number", "'ten'"],
    ),
    (
        "fractional count",
        ["meters,dropper.toml,2.5,L1,active=3 idle=21,"],
        3,
        "row 3, column count",
        ["whole number"],
    ),
    (
        "zero count",
        ["meters,dropper.toml,0,L1,active=3 idle=21,"],
        3,
        "row 3, column count",
        ["greater than zero"],
    ),
    (
        "unknown phase",
        ["meters,dropper.toml,5,L7,active=3 idle=21,"],
        3,
        "row 3, column phase",
        ["unknown phase 'L7'"],
    ),
    (
        "bad hours cell",
        ["meters,dropper.toml,5,L1,active:3,"],
        3,
        "row 3, column hours",
        ["state=hours"],
    ),
    (
        "unknown state in hours",
        ["meters,dropper.toml,5,L1,activ=3 idle=21,"],
        3,
        "row 3, column hours",
        ["did you mean 'active'"],
    ),
    (
        "unknown state in profile",
        ["m,dropper.toml,5,L1,," + " ".join(["nap"] * 24)],
        3,
        "row 3, column profile",
        ["unknown state 'nap'"],
    ),
    (
        "missing design",
        ["meters,gone.toml,5,L1,active=3 idle=21,"],
        3,
        "row 3, column design",
        ["not found"],
    ),
]


@pytest.mark.parametrize(
    ("label", "bad", "row", "where", "fragments"), INV_CASES, ids=[c[0] for c in INV_CASES]
)
def test_bad_inventory_row_names_row_and_column(cli, folder, label, bad, row, where, fragments):
    # the bad row is the second data row: header = row 1, first good row = row 2
    path = _inventory_fleet(folder, [INV_GOOD[0], *bad])
    inv = (folder / "inventory.csv").resolve()
    line = one_line_error(cli, path, inv, where)
    assert f"row {row}," in line
    for f in fragments:
        assert f in line, (label, line)


def test_inventory_unknown_column(cli, folder):
    path = _inventory_fleet(
        folder,
        ["meters,dropper.toml,30,L1,active=3 idle=21,red"],
        header="name,design,count,phase,hours,colour",
    )
    line = one_line_error(cli, path, (folder / "inventory.csv").resolve(), "row 1, column colour")
    assert "unknown column" in line


@pytest.mark.parametrize("ref", [[], ["inventory.csv"], 3, {"file": "inventory.csv"}])
def test_inventory_not_a_path_names_the_key(cli, folder, ref):
    # found by the robustness properties: `inventory = []` was a TypeError (exit 4)
    data = base_fleet()
    data["inventory"] = ref
    path = write_fleet(folder, data)
    line = one_line_error(cli, path, path, "inventory")
    assert "expected the path of a CSV file" in line


def test_inventory_row_with_a_bad_design_names_the_design_file(cli, folder):
    # an error inside a design file is that file's error (file and key), not a CSV column
    text = (folder / "dropper.toml").read_text("utf-8")
    (folder / "bad-design.toml").write_text(
        text.replace('series_capacitance = "3.3 uF"', 'series_capacitance = "3.3 V"'), "utf-8"
    )
    path = _inventory_fleet(folder, ["meters,bad-design.toml,30,L1,active=3 idle=21,"])
    one_line_error(cli, path, (folder / "bad-design.toml").resolve(), "parts.series_capacitance")


def test_inventory_groups_add_to_the_toml_groups(cli, folder):
    # 120 + 40 units in [[group]] tables, 30 + 12 in the CSV (hand count)
    path = _inventory_fleet(folder, INV_GOOD)
    rc, out, err = cli("fleet", path, "--json")
    assert rc == 0, err
    d = json.loads(out)
    assert d["units"] == 120 + 40 + 30 + 12
    assert [g["group"] for g in d["groups"]] == ["sensors", "controllers", "meters", "panels"]


# ----------------------------------------------------------------------------------------
# --csv and --json
# ----------------------------------------------------------------------------------------
GROUP_COLUMNS = [
    "group",
    "design",
    "design_file",
    "count",
    "phase",
    "p_unit_mean_w",
    "q1_unit_mean_var",
    "s_unit_max_va",
    "e_kwh_per_year",
    "energy_cost_per_year",
]


def test_csv_is_a_per_group_table_written_atomically(cli, folder):
    path = write_fleet(folder, base_fleet())
    out_dir = folder / "reports" / "2024"  # does not exist yet: created
    out = out_dir / "groups.csv"
    rc, stdout, err = cli("fleet", path, "--csv", out, "--json")
    assert rc == 0, err
    d = json.loads(stdout)
    df = pd.read_csv(out)
    assert list(df.columns) == GROUP_COLUMNS
    assert list(df["group"]) == ["sensors", "controllers"]
    assert list(df["count"]) == [120, 40]
    assert list(df["phase"]) == ["balanced", "L2"]
    # the table's energies and costs add up to the fleet's (sum over groups)
    assert df["e_kwh_per_year"].sum() == pytest.approx(d["e_kwh_per_year"], rel=1e-9)
    assert df["energy_cost_per_year"].sum() == pytest.approx(d["energy_cost_per_year"], rel=1e-9)
    # flat price: cost = kWh x price (hand computation)
    assert d["energy_cost_per_year"] == pytest.approx(d["e_kwh_per_year"] * 0.15, rel=1e-9)
    assert sorted(os.listdir(out_dir)) == ["groups.csv"]  # no temporary file left behind
    # permissions as a plain open() would give them: 0666 less the umask (POSIX)
    umask = os.umask(0)
    os.umask(umask)
    assert stat.S_IMODE(out.stat().st_mode) == 0o666 & ~umask


def test_csv_replaces_an_existing_file_or_leaves_it_whole(cli, folder, monkeypatch):
    path = write_fleet(folder, base_fleet())
    out = folder / "groups.csv"
    out.write_text("old,table\n1,2\n", "utf-8")
    rc, _, err = cli("fleet", path, "--csv", out)  # not without --force (README)
    assert rc == EXIT_INPUT and err == f"fleetpower: {out}: --csv: exists; use --force to " \
        "overwrite it\n"
    assert out.read_text("utf-8") == "old,table\n1,2\n"
    rc, _, err = cli("fleet", path, "--csv", out, "--force")
    assert rc == 0, err
    assert list(pd.read_csv(out).columns) == GROUP_COLUMNS

    # a failure at the final rename leaves the previous file untouched and no temp file
    out.write_text("old,table\n1,2\n", "utf-8")

    def refuse(src, dst):
        raise PermissionError(13, "Permission denied")

    monkeypatch.setattr("fleetpower.io.files.os.replace", refuse)
    rc, _, err = cli("fleet", path, "--csv", out, "--force")
    assert rc == EXIT_INPUT
    assert err.count("\n") == 1 and err.startswith(f"fleetpower: {out}: --csv: cannot write")
    assert out.read_text("utf-8") == "old,table\n1,2\n"
    assert sorted(p.name for p in folder.iterdir() if "groups" in p.name) == ["groups.csv"]


def test_csv_into_an_impossible_folder_fails_cleanly(cli, folder):
    path = write_fleet(folder, base_fleet())
    blocker = folder / "not-a-folder"
    blocker.write_text("a file, not a folder\n", "utf-8")
    out = blocker / "groups.csv"
    rc, _, err = cli("fleet", path, "--csv", out, "--force")
    assert rc == EXIT_INPUT
    assert err.count("\n") == 1 and err.startswith(f"fleetpower: {out}: --csv: cannot write")


def test_json_carries_the_fleet_figures(cli, folder):
    path = write_fleet(folder, base_fleet())
    rc, out, err = cli("fleet", path, "--json")
    assert rc == 0, err
    d = json.loads(out)
    for key in (
        "p_kw",
        "q1_kvar",
        "s_kva",
        "pf",
        "dpf",
        "e_kwh_per_year",
        "energy_cost_per_year",
        "demand_cost_per_year",
        "co2_kg_per_year",
    ):
        assert isinstance(d[key], float), key
    assert [p["phase"] for p in d["phases"]] == ["L1", "L2", "L3"]
    assert all(p["i_rms_a"] > 0 for p in d["phases"])
    assert isinstance(d["neutral"]["i_rms_a"], float)
    # IEEE 519 rows exist because the site gives its short-circuit current
    assert d["compliance"] and all("verdict" in r for r in d["compliance"])
    assert [c["conductor"].split()[0] for c in d["conductors"]] == ["phase", "neutral"]
    # consistency by hand: CO2 = kWh x intensity; demand = peak kW x price x 12 months;
    # S = sum V I_rms over phases; PF = P / S (IEEE 1459 arithmetic apparent power)
    assert d["co2_kg_per_year"] == pytest.approx(d["e_kwh_per_year"] * 0.4, rel=1e-9)
    assert d["demand_cost_per_year"] == pytest.approx(d["p_kw"] * 10.0 * 12, rel=1e-9)
    assert d["s_kva"] == pytest.approx(sum(120 * p["i_rms_a"] for p in d["phases"]) / 1e3, rel=1e-9)
    assert d["pf_arith"] == pytest.approx(d["p_kw"] / d["s_kva"], rel=1e-9)
    assert d["pf"] == pytest.approx(d["p_kw"] / d["s_e_kva"], rel=1e-9)  # IEEE 1459 S_e
    assert 0 < d["pf"] < 1 and d["q1_kvar"] < 0


# ----------------------------------------------------------------------------------------
# inventory profiles read all at once
# ----------------------------------------------------------------------------------------
_ASCII_WORDS = ["idle", "active", "on", "a", "activex", "idl", "on_hold", "x"]
_ASCII_SPACES = [" ", "  ", "\t", "\n", "\r", "\x0b", "\x0c", "\x1c", "\x1d", "\x1e", "\x1f"]


def _profiles(words, spaces):
    one = st.lists(st.tuples(st.sampled_from(words), st.sampled_from(spaces)),
                   min_size=22, max_size=26).map(lambda ws: "".join(w + s for w, s in ws))
    return st.lists(one, min_size=1, max_size=8)


@settings(max_examples=300, deadline=None)
@given(texts=st.one_of(
    _profiles(_ASCII_WORDS, _ASCII_SPACES),  # the byte-wise reading
    _profiles(_ASCII_WORDS + ["\x00", "é"], _ASCII_SPACES + ["\xa0", "\u2003"])))
def test_profiles_read_at_once_are_read_as_one_by_one(texts):
    # The inventory's 24-hour profiles are split into words all together (on their bytes
    # when ASCII); the result must be what str.split gives each profile alone (Python's
    # documented whitespace split), word by word, for any white space and odd words.
    from fleetpower.io.fleet_file import _state_columns

    states = ("active", "idle", "on")
    got = _state_columns(texts, states)
    for k, t in enumerate(texts):
        words = t.split()
        want = [states.index(w) if w in states else -1 for w in words]
        assert list(got[k]) == (want if len(words) == 24 else [-1] * 24), repr(t)
