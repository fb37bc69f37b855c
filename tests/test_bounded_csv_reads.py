"""A fleet's inventory CSV and a user's limit-set CSV are read like the design files:
bounded, and refused in one line naming the file (README "Input bounds").

Source: the bounds are the project's own (README "Input bounds", fleetpower.io.files);
a FIFO or /dev/zero never ends a read(2) with end-of-file on its own, so a reader that
does not refuse them first hangs or fills memory (POSIX.1-2017, read(); common practice,
no source for the consequence). UTF-8 is RFC 3629; 0xE9 0xFF is not UTF-8 (0xFF never
occurs in UTF-8, RFC 3629 section 1).
"""

from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

import pytest

from fleetpower.io import files

REPO = Path(__file__).resolve().parent.parent
INVENTORY = "design,count,phase,hours\nheater-resistive.toml,3,L1,relay_on=24\n"
LIMITS = (REPO / "data" / "limits" / "eu-standby.csv").read_text(encoding="utf-8")


@pytest.fixture
def site(tmp_path):
    """A copy of the examples, where a fleet file can name an inventory."""
    shutil.copytree(REPO / "examples", tmp_path / "ex")
    return tmp_path / "ex"


def _fleet(site: Path, ref: str) -> Path:
    text = (site / "harbour-office.toml").read_text(encoding="utf-8")
    f = site / "fleet.toml"
    f.write_text(f"inventory = {json.dumps(ref)}\n" + text, encoding="utf-8")  # TOML escapes
    return f


def _one_line(cli, *argv) -> str:
    rc, out, err = cli(*argv)
    assert rc == 2, (rc, err)
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("fleetpower: "), err
    assert "Traceback" not in err
    return lines[0]


def _make(kind: str, path: Path) -> tuple[str, ...]:
    """Put a bad input of ``kind`` at ``path``; return the paths a reader may name."""
    if kind == "folder":
        path.mkdir()
    elif kind == "fifo":
        os.mkfifo(path)
    elif kind == "dev-zero":
        path.symlink_to("/dev/zero")
        return str(path), str(path.resolve())
    elif kind == "latin-1":
        path.write_bytes("design,count\nchauffe-eau é,3\n".encode("latin-1") + b"\xff\n")
    elif kind == "utf-16":
        path.write_bytes(INVENTORY.encode("utf-16"))
    elif kind == "too-large":  # past the inventory's bound, which is the larger
        path.write_bytes(b"design,count,phase\n" + b"x" * files.MAX_INVENTORY_BYTES)
    return (str(path),)


KINDS = ["folder", "fifo", "dev-zero", "latin-1", "utf-16", "too-large"]
WHY = {"folder": "a directory", "fifo": "not a regular file", "dev-zero": "not a regular file",
       "latin-1": "not UTF-8", "utf-16": "not UTF-8", "too-large": "too large"}


@pytest.mark.parametrize("kind", KINDS)
def test_inventory_that_cannot_be_a_table_is_one_line(cli, site, kind):
    named = _make(kind, site / "units.csv")
    line = _one_line(cli, "fleet", _fleet(site, "units.csv"))
    assert any(n in line for n in named) and WHY[kind] in line, line


def test_inventory_path_with_a_nul_byte_or_too_long_names_the_fleet_key(cli, site):
    for ref, why in (("units\x00.csv", "NUL"), ("u" * 2000 + ".csv", "too long")):
        f = _fleet(site, ref)
        line = _one_line(cli, "fleet", f)
        assert str(f) in line and "inventory" in line and why in line, line


def test_inventory_with_a_spreadsheets_byte_order_mark_reads_as_without(cli, site):
    (site / "plain.csv").write_text(INVENTORY, encoding="utf-8")
    (site / "marked.csv").write_bytes(b"\xef\xbb\xbf" + INVENTORY.encode("utf-8"))
    rc1, out1, err1 = cli("fleet", _fleet(site, "plain.csv"), "--json")
    rc2, out2, err2 = cli("fleet", _fleet(site, "marked.csv"), "--json")
    assert rc1 == rc2 == 0, err1 + err2
    assert "heater-resistive" in out1
    assert out1.replace("plain.csv", "F") == out2.replace("marked.csv", "F")


@pytest.mark.parametrize("kind", KINDS)
def test_limit_file_that_cannot_be_a_table_is_one_line(cli, tmp_path, kind):
    named = _make(kind, tmp_path / "mine.csv")
    line = _one_line(cli, "limits", tmp_path / "mine.csv")
    assert any(n in line for n in named) and WHY[kind] in line, line


@pytest.mark.parametrize("name", ["mine", "zero"])
def test_an_existing_non_file_without_csv_suffix_is_read_as_a_file(cli, tmp_path, name,
                                                                    monkeypatch):
    # not mistaken for a shipped set id: refused as what it is
    monkeypatch.chdir(tmp_path)
    if name == "mine":
        os.mkfifo(tmp_path / name)
        line = _one_line(cli, "limits", name)
    else:
        line = _one_line(cli, "limits", "/dev/zero")
    assert "not a regular file" in line, line


def test_unit_limits_file_is_refused_before_the_solve(cli, tmp_path, monkeypatch):
    import fleetpower.unit

    def must_not_run(*a, **k):
        raise AssertionError("solved before reading the limit file")

    monkeypatch.setattr(fleetpower.unit, "analyse_unit", must_not_run)
    bad = tmp_path / "mine.csv"
    _make("latin-1", bad)
    line = _one_line(cli, "unit", REPO / "examples" / "nightlight-dropper.toml", "--limits",
                     bad)
    assert str(bad) in line and "not UTF-8" in line, line
    line = _one_line(cli, "unit", REPO / "examples" / "nightlight-dropper.toml", "--limits",
                     "mine\x00.csv")
    assert "NUL" in line


def test_limit_file_with_a_byte_order_mark_reads_as_without(cli, tmp_path):
    plain, marked = tmp_path / "plain.csv", tmp_path / "marked.csv"
    plain.write_text(LIMITS, encoding="utf-8")
    marked.write_bytes(b"\xef\xbb\xbf" + LIMITS.encode("utf-8"))
    rc1, out1, _ = cli("limits", plain, "--json")
    rc2, out2, _ = cli("limits", marked, "--json")
    assert rc1 == rc2 == 0
    assert out1.replace("plain.csv", "F") == out2.replace("marked.csv", "F")


def test_fleet_design_name_longer_than_the_file_system_allows(cli, site):
    # NAME_MAX is 255 bytes on Linux file systems (common practice, no source): the stat
    # fails with ENAMETOOLONG, which must be one line naming the key, not exit 4
    f = site / "long.toml"
    f.write_text((site / "harbour-office.toml").read_text(encoding="utf-8").replace(
        "lobby-bridge-dropper.toml", "x" * 600), encoding="utf-8")
    line = _one_line(cli, "fleet", f)
    assert str(f) in line and ".design" in line, line


@pytest.mark.parametrize("kind", ["fifo", "dev-zero", "latin-1", "folder"])
@pytest.mark.parametrize("which", ["smart-plug-capture.csv", "smart-plug-standby-harmonics.csv"])
def test_measured_designs_capture_that_cannot_be_a_table_is_one_line(cli, site, kind, which):
    # a FIFO named as a capture was read for ever (pandas blocks on it)
    (site / which).unlink()
    named = _make(kind, site / which)
    line = _one_line(cli, "unit", site / "smart-plug-measured.toml")
    assert any(n in line for n in named) and WHY[kind] in line, line


def test_measured_design_with_a_byte_order_mark_reads_as_without(cli, site):
    rc1, out1, err1 = cli("unit", site / "smart-plug-measured.toml", "--json")
    cap = site / "smart-plug-capture.csv"
    cap.write_bytes(b"\xef\xbb\xbf" + cap.read_bytes())
    rc2, out2, err2 = cli("unit", site / "smart-plug-measured.toml", "--json")
    assert rc1 == rc2 == 0, err1 + err2
    assert out1 == out2
