"""Files fleetpower writes: atomic, never overwritten without --force, named after writing;
a run interrupted (Ctrl-C) or killed mid-write leaves no partial file.

Source: the promises are the project's own (README "Files written"); the mechanism is the
POSIX one: rename(2) replaces its target atomically (POSIX.1-2017, rename(), "If the link
named by the new argument exists, it shall be removed and old renamed to new... a link
named new shall remain visible to other threads throughout the renaming operation"), and
link(2) fails with EEXIST when the new name exists (POSIX.1-2017, link()). Exit 130 =
128 + SIGINT is the shells' convention (common practice, no source).
"""

from __future__ import annotations

import os
import signal
import stat
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest
from conftest import example_path, run_captured

from fleetpower import cli
from fleetpower.cli import build_parser
from fleetpower.errors import InputError
from fleetpower.io import files
from fleetpower.io.files import TMP_INFIX, check_writable, write_atomic

REPO = Path(__file__).resolve().parent.parent


def _run(*argv) -> tuple[int, str, str]:
    return run_captured(list(argv))


def _leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if TMP_INFIX in p.name)


def _refused(err: str, path) -> None:
    """One line on stderr naming ``path`` and telling to use --force."""
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert str(path) in lines[0] and "--force" in lines[0], lines[0]


# ----------------------------------------------------------------------------------------
# write_atomic itself
# ----------------------------------------------------------------------------------------
def test_write_atomic_writes_text_bytes_and_a_writer(tmp_path):
    write_atomic(tmp_path / "a.txt", "grüße\r\nline\n")
    assert (tmp_path / "a.txt").read_bytes() == "grüße\r\nline\n".encode()  # as given
    write_atomic(tmp_path / "b.bin", b"\x00\x01")
    assert (tmp_path / "b.bin").read_bytes() == b"\x00\x01"
    write_atomic(tmp_path / "sub" / "c.bin", lambda fh: fh.write(b"made"))
    assert (tmp_path / "sub" / "c.bin").read_bytes() == b"made"
    assert _leftovers(tmp_path) == [] and _leftovers(tmp_path / "sub") == []


@pytest.mark.parametrize("mask", [0o022, 0o027, 0o077])
def test_write_atomic_gives_the_permissions_open_would(tmp_path, mask):
    # mkstemp makes 0600; a written report must be as readable as one open() makes
    # (POSIX: open() creates with 0666 & ~umask), and the umask is read, not changed
    umask = os.umask(mask)
    try:
        with open(tmp_path / "by-open.md", "w") as fh:
            fh.write("x")
        write_atomic(tmp_path / "r.md", "x")
        assert os.umask(mask) == mask
    finally:
        os.umask(umask)
    made = stat.S_IMODE((tmp_path / "by-open.md").stat().st_mode)
    assert stat.S_IMODE((tmp_path / "r.md").stat().st_mode) == made == 0o666 & ~mask


@pytest.mark.parametrize("exc", [KeyboardInterrupt, RuntimeError, OSError])
def test_an_exception_mid_write_leaves_the_old_file_and_no_temporary(tmp_path, exc):
    target = tmp_path / "t.csv"
    target.write_text("old, complete\n", encoding="utf-8")

    def half_then_fail(fh):
        fh.write(b"new, half")
        fh.flush()
        assert _leftovers(tmp_path), "the temporary file sits beside the target"
        raise exc("stopped")

    expected = InputError if exc is OSError else exc  # an OSError is a one-line refusal
    with pytest.raises(expected):
        write_atomic(target, half_then_fail)
    assert target.read_text(encoding="utf-8") == "old, complete\n"
    assert _leftovers(tmp_path) == []


def test_without_overwrite_an_existing_file_is_refused_and_kept(tmp_path):
    target = tmp_path / "t.csv"
    target.write_text("old\n", encoding="utf-8")
    with pytest.raises(InputError, match="use --force") as info:
        write_atomic(target, "new\n", overwrite=False, option="--csv")
    assert info.value.file == str(target) and info.value.where == "--csv"
    assert target.read_text(encoding="utf-8") == "old\n" and _leftovers(tmp_path) == []
    write_atomic(target, "new\n", overwrite=True)
    assert target.read_text(encoding="utf-8") == "new\n"


def test_a_file_appearing_during_the_write_is_not_replaced(tmp_path, monkeypatch):
    # the commit links the temporary file to the target, which fails when it exists now
    target = tmp_path / "t.csv"

    def another_writer(fh):
        fh.write(b"mine")
        target.write_text("theirs", encoding="utf-8")

    with pytest.raises(InputError, match="use --force"):
        write_atomic(target, another_writer, overwrite=False)
    assert target.read_text(encoding="utf-8") == "theirs" and _leftovers(tmp_path) == []


def test_check_writable_refuses_a_folder_even_with_force(tmp_path):
    with pytest.raises(InputError, match="is a folder"):
        check_writable([tmp_path], force=True)
    check_writable([tmp_path / "new.csv"], force=False)  # absent: fine


# ----------------------------------------------------------------------------------------
# --force on every verb that writes files
# ----------------------------------------------------------------------------------------
WRITING_VERBS = {"unit", "fleet", "compare", "demo", "spread", "line"}


def _verbs():
    import argparse

    sub = next(a for a in build_parser()._actions if isinstance(a, argparse._SubParsersAction))
    return dict(sub.choices)


def test_every_verb_that_writes_files_takes_force():
    verbs = _verbs()
    writers = {name for name, p in verbs.items()
               if any(o in p._option_string_actions for o in
                      ("--csv", "--markdown", "--plots", "--waveform-csv"))}
    assert writers == WRITING_VERBS
    for name in verbs:
        action = verbs[name]._option_string_actions.get("--force")
        if name in WRITING_VERBS:
            assert action is not None and action.help == "overwrite files that already exist"
        else:
            assert action is None, name


def _must_not_run(*args, **kwargs):
    raise AssertionError("the expensive work ran before the existing file was refused")


def test_fleet_csv_existing_is_refused_before_evaluating(tmp_path, monkeypatch):
    import fleetpower.fleet

    out = tmp_path / "groups.csv"
    out.write_text("mine\n", encoding="utf-8")
    monkeypatch.setattr(fleetpower.fleet, "evaluate_fleet", _must_not_run)
    code, stdout, err = _run("fleet", example_path("maple-clinic-120-208"), "--csv", out)
    assert code == 2 and stdout == ""
    _refused(err, out)
    assert err.strip() == f"fleetpower: {out}: --csv: exists; use --force to overwrite it"
    assert out.read_text(encoding="utf-8") == "mine\n"


def test_fleet_csv_force_overwrites_and_says_so(tmp_path):
    out = tmp_path / "groups.csv"
    out.write_text("mine\n", encoding="utf-8")
    code, stdout, err = _run("fleet", example_path("maple-clinic-120-208"), "--csv", out,
                             "--force", "--json")
    assert code == 0
    assert out.read_text(encoding="utf-8").startswith("group,design,")  # the table
    assert err.strip().splitlines()[-1] == f"fleetpower: wrote {out}"
    import json

    json.loads(stdout)  # the note went to stderr: stdout stays pure JSON
    assert _leftovers(tmp_path) == []


def test_unit_waveform_csv_checks_every_state_file_before_solving(tmp_path, monkeypatch):
    import fleetpower.unit

    base = tmp_path / "w.csv"
    taken = tmp_path / "w-relay_off.csv"  # the second of heater-resistive's two states
    taken.write_text("mine\n", encoding="utf-8")
    monkeypatch.setattr(fleetpower.unit, "analyse_unit", _must_not_run)
    code, _, err = _run("unit", example_path("heater-resistive"), "--waveform-csv", base)
    assert code == 2
    _refused(err, taken)
    assert not (tmp_path / "w-relay_on.csv").exists()  # none written: all or nothing


@pytest.mark.parametrize("option,existing", [
    ("--markdown", "report.md"),
    ("--csv", "tables/designs.csv"),
    ("--csv", "tables/groups_B_desk-sensor-smps-230.csv"),
    ("--plots", "figs/spectrum.svg"),
])
def test_compare_outputs_existing_are_refused_before_solving(tmp_path, monkeypatch, option,
                                                             existing):
    import fleetpower.compare

    taken = tmp_path / existing
    taken.parent.mkdir(parents=True, exist_ok=True)
    taken.write_text("mine\n", encoding="utf-8")
    monkeypatch.setattr(fleetpower.compare, "compare", _must_not_run)
    target = {"--markdown": taken, "--csv": tmp_path / "tables",
              "--plots": tmp_path / "figs"}[option]
    code, _, err = _run("compare", example_path("harbour-office"),
                        "--design", example_path("sensor-dropper-230"),
                        "--design", example_path("desk-sensor-smps-230"), option, target)
    assert code == 2
    _refused(err, taken)
    assert f": {option}: " in err
    assert taken.read_text(encoding="utf-8") == "mine\n"


def test_compare_csv_of_a_symlinked_design_is_checked_before_solving(tmp_path, monkeypatch):
    # compare labels a candidate by its file's resolved name, so its groups file is named
    # after a symlink's target: the early check must predict that name too
    import fleetpower.compare

    link = tmp_path / "my-pick.toml"
    link.symlink_to(example_path("desk-sensor-smps-230"))
    taken = tmp_path / "tables" / "groups_A_desk-sensor-smps-230.csv"
    taken.parent.mkdir()
    taken.write_text("mine\n", encoding="utf-8")
    monkeypatch.setattr(fleetpower.compare, "compare", _must_not_run)
    code, _, err = _run("compare", example_path("harbour-office"), "--design", link,
                        "--csv", tmp_path / "tables")
    assert code == 2
    _refused(err, taken)
    assert taken.read_text(encoding="utf-8") == "mine\n"


def test_demo_markdown_existing_is_refused(tmp_path, monkeypatch):
    import fleetpower.compare

    taken = tmp_path / "demo.md"
    taken.write_text("mine\n", encoding="utf-8")
    monkeypatch.setattr(fleetpower.compare, "compare", _must_not_run)
    code, out, err = _run("demo", "--markdown", taken)
    assert code == 2 and out == ""  # refused before the demo's banner
    _refused(err, taken)


def test_line_outputs_existing_are_refused_before_solving(tmp_path, monkeypatch):
    import fleetpower.product_line

    monkeypatch.setattr(fleetpower.product_line, "run_line", _must_not_run)
    line = REPO / "examples" / "product-line" / "lantern-works-line.toml"
    for option, target, taken in (("--csv", tmp_path / "t", tmp_path / "t" / "checks.csv"),
                                  ("--plots", tmp_path / "f",
                                   tmp_path / "f" / "installed_energy.png"),
                                  ("--markdown", tmp_path / "l.md", tmp_path / "l.md")):
        taken.parent.mkdir(parents=True, exist_ok=True)
        taken.write_text("mine\n", encoding="utf-8")
        code, _, err = _run("line", line, option, target)
        assert code == 2, err
        _refused(err, taken)


def test_spread_plots_existing_are_refused_before_solving(tmp_path, monkeypatch):
    import fleetpower.spread.study

    taken = tmp_path / "figs" / "spread_v_dc_min_v.svg"
    taken.parent.mkdir()
    taken.write_text("mine\n", encoding="utf-8")
    monkeypatch.setattr(fleetpower.spread.study, "plan_spread", _must_not_run)
    code, _, err = _run("spread", example_path("desk-sensor-dropper-lean"), "--plots",
                        tmp_path / "figs")
    assert code == 2
    _refused(err, taken)


def test_figures_are_written_atomically_in_the_format_of_their_suffix(tmp_path):
    pytest.importorskip("matplotlib")
    from fleetpower.report.plots import _save, require_matplotlib

    plt = require_matplotlib()
    fig, ax = plt.subplots()
    ax.plot([0, 1], [0, 1])
    paths = _save(fig, tmp_path, "fig")
    plt.close(fig)
    assert [p.name for p in paths] == ["fig.png", "fig.svg"]
    assert (tmp_path / "fig.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature
    assert b"<svg" in (tmp_path / "fig.svg").read_bytes()[:2000]
    with pytest.raises(InputError, match="use --force"):
        _save(fig, tmp_path, "fig", overwrite=False)
    assert _leftovers(tmp_path) == []


# ----------------------------------------------------------------------------------------
# Ctrl-C and kill mid-write
# ----------------------------------------------------------------------------------------
def test_ctrl_c_mid_write_in_process_leaves_nothing(tmp_path, monkeypatch):
    """A KeyboardInterrupt raised half-way through writing the CSV: exit 130, one line,
    the old file untouched (with --force) or no file (without), no temporary file."""
    real = files._write_all

    def half_then_ctrl_c(fh, data):
        real(fh, data[: len(data) // 2])
        fh.flush()
        raise KeyboardInterrupt

    monkeypatch.setattr(files, "_write_all", half_then_ctrl_c)
    fresh = tmp_path / "fresh.csv"
    code, _, err = _run("fleet", example_path("maple-clinic-120-208"), "--csv", fresh)
    assert code == cli.EXIT_INTERRUPTED == 130
    assert err.strip().splitlines() == ["fleetpower: interrupted"]
    assert not fresh.exists() and _leftovers(tmp_path) == []
    old = tmp_path / "old.csv"
    old.write_text("old, complete\n", encoding="utf-8")
    code, _, err = _run("fleet", example_path("maple-clinic-120-208"), "--csv", old, "--force")
    assert code == 130 and err.strip().splitlines() == ["fleetpower: interrupted"]
    assert old.read_text(encoding="utf-8") == "old, complete\n"
    assert _leftovers(tmp_path) == []


#: A fleetpower run whose file writer stalls half-way (so that a signal lands mid-write):
#: the first half of the file is written and flushed, then the writer sleeps.
_SLOW_WRITER = textwrap.dedent("""
    import signal, sys, time
    import fleetpower.io.files as files

    # Ctrl-C as a terminal delivers it (a shell's background job may inherit SIGINT ignored)
    signal.signal(signal.SIGINT, signal.default_int_handler)

    def half_then_stall(fh, data):
        blob = data.encode("utf-8") if isinstance(data, str) else data
        fh.write(blob[: len(blob) // 2])
        fh.flush()
        time.sleep(120)
        fh.write(blob[len(blob) // 2:])

    files._write_all = half_then_stall
    from fleetpower.cli import run

    sys.argv = ["fleetpower", *sys.argv[1:]]
    run()
""")


@pytest.fixture(scope="module")
def compiled_engine():
    """The engine in numba's cache, so a child process prints no compile note."""
    from fleetpower.engine import solver

    if not solver.engine_is_compiled():
        solver.compile_engine()


def _start_and_stop(folder: Path, target: Path, sig: int, *extra) -> subprocess.CompletedProcess:
    """Start ``unit --waveform-csv target`` (about 0.8 MB) with the stalling writer; once
    the temporary file beside ``target`` holds the first half, send ``sig``."""
    argv = [sys.executable, "-c", _SLOW_WRITER, "unit", str(example_path("heater-resistive")),
            "--state", "relay_on", "--waveform-csv", str(target), "--json", *extra]
    env = dict(os.environ, PYTHONPATH=str(REPO) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    proc = subprocess.Popen(argv, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env,
                            cwd=folder, text=True)
    deadline = time.monotonic() + 180
    try:
        while True:
            tmp = [p for p in folder.iterdir() if TMP_INFIX in p.name]
            if tmp and tmp[0].stat().st_size > 100_000:
                break
            assert proc.poll() is None, proc.communicate()
            assert time.monotonic() < deadline, "the write never started"
            time.sleep(0.05)
        assert not target.exists() or "--force" in extra  # the target is not written yet
        proc.send_signal(sig)
        out, err = proc.communicate(timeout=60)
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    return subprocess.CompletedProcess(argv, proc.returncode, out, err)


def test_sigint_mid_write_exits_130_with_one_line_and_no_file(tmp_path, compiled_engine):
    target = tmp_path / "wave.csv"
    done = _start_and_stop(tmp_path, target, signal.SIGINT)
    assert done.returncode == 130, done.stderr
    assert done.stderr.strip().splitlines() == ["fleetpower: interrupted"], done.stderr
    assert not target.exists()
    assert _leftovers(tmp_path) == []


def test_sigkill_mid_write_leaves_the_old_file_or_none(tmp_path, compiled_engine):
    """A kill cannot be caught: the target is still the old complete file, and the one
    thing left behind is a temporary file whose name says what it is (README)."""
    target = tmp_path / "wave.csv"
    target.write_text("old, complete\n", encoding="utf-8")
    done = _start_and_stop(tmp_path, target, signal.SIGKILL, "--force")
    assert done.returncode == -signal.SIGKILL
    assert target.read_text(encoding="utf-8") == "old, complete\n"
    left = _leftovers(tmp_path)
    assert len(left) == 1 and left[0].startswith(f".{target.name}{TMP_INFIX}"), left
