"""Command-line conventions: --version, help with worked examples, exit codes, --strict,
and the line naming what was written.

Source: the conventions are the project's own (README "Exit status"); exit 2 for a usage
error is argparse's, 130 = 128 + SIGINT is the POSIX shells' convention (common practice,
no source).
"""

from __future__ import annotations

import argparse
import json

import pytest
from conftest import example_path, run_captured

from fleetpower import __version__
from fleetpower.cli import build_parser, failed_checks, main


def _run(*argv) -> tuple[int, str, str]:
    return run_captured(list(argv))


def _verbs() -> dict[str, argparse.ArgumentParser]:
    sub = next(a for a in build_parser()._actions if isinstance(a, argparse._SubParsersAction))
    return dict(sub.choices)


def test_version():
    code, out, _ = _run("--version")
    assert code == 0 and out.strip() == f"fleetpower {__version__}"


@pytest.mark.parametrize("verb", sorted(_verbs()))
def test_every_verb_help_has_a_worked_example_and_exit_codes(verb):
    code, out, _ = _run(verb, "--help")
    assert code == 0
    assert "example:" in out and f"fleetpower {verb}" in out.split("example:")[1]
    assert "exit status:" in out and "130 interrupted" in out


@pytest.mark.parametrize("verb", sorted(_verbs()))
def test_every_option_has_a_help_line(verb):
    for action in _verbs()[verb]._actions:
        assert action.help and action.help != argparse.SUPPRESS, (verb, action.dest)


def test_usage_error_is_exit_2():
    assert _run("unit")[0] == 2  # argparse: missing argument
    assert _run("no-such-verb")[0] == 2


def test_bad_input_is_exit_2_in_one_line(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('name = "x"\ntopology = "capacitive-dropper"\n', encoding="utf-8")
    code, out, err = _run("unit", bad)
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and str(bad) in err


def test_strict_exit_1_only_when_a_check_fails():
    led = example_path("led-driver-40w")  # fails IEC 61000-3-2 Class C (README)
    assert _run("unit", led, "--state", "full", "--json")[0] == 0
    code, out, err = _run("unit", led, "--state", "full", "--json", "--strict")
    assert code == 1 and "--strict" in err
    assert json.loads(out)["compliance"]  # the report is still printed in full
    smps = example_path("desk-sensor-smps-230")  # passes every check (its golden output)
    assert _run("unit", smps, "--json", "--strict")[0] == 0


def test_failed_checks_reads_each_report_kind():
    assert failed_checks({"compliance": [{"verdict": "pass"}], "stresses": []}) == []
    assert failed_checks({"compliance": [{"verdict": "fail", "edition": "IEC X"}]}) == [
        "limit: IEC X"]
    assert failed_checks({"stresses": [{"verdict": "fail", "item": "zener power"}]}) == [
        "stress: zener power"]
    assert failed_checks({"conductors": [{"verdict": "over", "conductor": "neutral"}]})
    assert failed_checks({"designs": [{"failed_checks": 2}, {"failed_checks": 1}]})
    assert not failed_checks({"designs": [{"failed_checks": 2}, {"failed_checks": 0}]})


def test_written_files_are_named_on_stderr(tmp_path):
    out_csv = tmp_path / "groups.csv"
    code, out, err = _run("fleet", example_path("maple-clinic-120-208"), "--json",
                          "--csv", out_csv)
    assert code == 0 and out_csv.is_file()
    assert f"wrote {out_csv}" in err
    json.loads(out)  # stdout stays pure JSON


def test_quick_limit_listing_agrees_with_the_validated_tables():
    # source: the project's own tables module (pandas, validated) is the reference
    from fleetpower.limits import list_limit_sets
    from fleetpower.limits.catalogue import set_summaries

    assert set_summaries() == list_limit_sets().to_dict("records")


# ----------------------------------------------------------------------------------------
# interruption and faults of the program itself (README "Exit status"; exit 4 and the
# --debug option are the project's own convention)
# ----------------------------------------------------------------------------------------
def _raising(exc):
    def cmd(args):
        raise exc

    return cmd


def test_ctrl_c_is_one_line_and_exit_130(monkeypatch):
    from fleetpower import cli

    monkeypatch.setattr(cli, "cmd_limits", _raising(KeyboardInterrupt()))
    code, out, err = _run("limits")
    assert code == cli.EXIT_INTERRUPTED == 130
    assert err.strip().splitlines() == ["fleetpower: interrupted"] and out == ""


def test_internal_error_is_one_line_and_debug_shows_the_traceback(monkeypatch):
    from fleetpower import cli

    monkeypatch.setattr(cli, "cmd_limits", _raising(RuntimeError("table\nbroken")))
    code, out, err = _run("limits")
    assert code == cli.EXIT_INTERNAL == 4 and out == ""
    lines = err.strip().splitlines()
    assert lines == ["fleetpower: internal error: RuntimeError: table\\nbroken "
                     "(run with --debug for the traceback)"], err
    assert "Traceback" not in err
    for argv in (("--debug", "limits"), ("limits", "--debug")):  # before or after the verb
        code, _, err = _run(*argv)
        assert code == 4
        assert "Traceback (most recent call last)" in err and "RuntimeError: table" in err
        assert err.strip().splitlines()[-1].startswith("fleetpower: internal error: ")


def test_debug_is_off_by_default_and_input_errors_stay_one_line(tmp_path):
    assert build_parser().parse_args(["limits"]).debug is False
    assert build_parser().parse_args(["--debug", "limits"]).debug is True
    code, _, err = _run("limits", tmp_path / "missing.csv")
    assert code == 2 and len(err.strip().splitlines()) == 1 and "Traceback" not in err


def test_plots_onto_a_file_is_refused_before_solving(tmp_path):
    taken = tmp_path / "figs"
    taken.write_text("a file", encoding="utf-8")
    code, out, err = _run("spread", example_path("desk-sensor-dropper-lean"), "--plots", taken)
    assert code == 2 and out == ""
    assert err.strip().splitlines() == [f"fleetpower: {taken}: --plots: exists and is not "
                                        "a folder"]


def test_spread_strict_counts_any_failing_unit(capsys):
    """``spread --strict``: exit 1 when any unit fails a check. The lean desk-sensor dropper
    cannot hold its 18 mA active load: a half-wave charge pump delivers at most
    f C (2 Vpk - Vz - Vf) = 50 Hz x 470 nF x (2 x 325 - 10 - 0.7) V = 15.0 mA (closed form,
    DEVELOPERS "Ageing"), so every unit fails regulation. The isolated flyback fails none."""

    args = ["--samples", "8", "--no-limits", "--strict"]
    assert main(["spread", "examples/desk-sensor-dropper-lean.toml", *args]) == 1
    err = capsys.readouterr().err
    assert "--strict" in err and "out of regulation in 100.0% of the units" in err
    assert main(["spread", "examples/desk-sensor-smps-230.toml", *args]) == 0


def test_spread_strict_counts_the_p5_unit_failing_with_age():
    """With --years, the P5 unit's year of failure is a failed check; a spread whose every
    fraction is zero and whose P5 unit lasts is not (the rule of --strict, README)."""
    from fleetpower.cli import failed_checks

    ok = {"failing": [{"kind": "stress", "check": "zener dissipation", "fraction": 0.0}],
          "ageing": {"state": "active", "p5_fails_year": None}}
    assert failed_checks(ok) == []
    aged = ok | {"ageing": {"state": "active", "p5_fails_year": 7}}
    assert failed_checks(aged) == ["ageing: the P5 unit cannot deliver state 'active' from "
                                   "year 7"]
