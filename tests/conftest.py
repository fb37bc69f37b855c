"""Shared fixtures: design files built from the bundled examples, and in-process CLI runs."""

from __future__ import annotations

import contextlib
import io
import json
import math
import os
import sys
from pathlib import Path

import pytest
from hypothesis import settings

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

from fleetpower.cli import main

# Hypothesis profiles, chosen with HYPOTHESIS_PROFILE (tests without their own case count
# take it from here; tests/test_robustness_cli.py sizes its properties from it):
#   short   - the default: a few dozen cases per property, for quick local runs;
#   ci      - .ci/run exports it: 1,000 cases per verb, reproducible (derandomized);
#   explore - many random cases, for hunting new failures by hand.
settings.register_profile("short", max_examples=30, deadline=None, derandomize=True)
settings.register_profile("ci", max_examples=1000, deadline=None, derandomize=True,
                          print_blob=True)
settings.register_profile("explore", max_examples=5000, deadline=None)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "short"))

REPO = Path(__file__).resolve().parent.parent
EXAMPLES = REPO / "examples"
DELETE = None  # an override value of None removes the key


def example_path(name: str) -> Path:
    """Path of a bundled example, e.g. ``example_path("nightlight-dropper")``."""
    return EXAMPLES / f"{name}.toml"


def load_example(name: str) -> dict:
    return tomllib.loads(example_path(name).read_text(encoding="utf-8"))


# ----------------------------------------------------------------------------------------
# a small TOML writer (enough for design files: scalars, arrays, nested tables)
# ----------------------------------------------------------------------------------------
def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if not math.isfinite(v):
            raise ValueError("TOML writer: non-finite float")
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v)  # JSON string escapes are valid TOML basic-string escapes
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):  # inline table
        return "{ " + ", ".join(f"{k} = {_toml_value(x)}" for k, x in v.items()) + " }"
    raise TypeError(f"TOML writer: cannot write {type(v).__name__}")


toml_value = _toml_value  # shared by the fleet tests


def _toml_table(data: dict, prefix: str, lines: list[str]) -> None:
    tables = {k: v for k, v in data.items() if isinstance(v, dict)}
    for k, v in data.items():
        if not isinstance(v, dict):
            lines.append(f"{k} = {_toml_value(v)}")
    for k, v in tables.items():
        name = f"{prefix}.{k}" if prefix else k
        lines.append("")
        lines.append(f"[{name}]")
        _toml_table(v, name, lines)


def dumps_toml(data: dict) -> str:
    lines: list[str] = []
    _toml_table(data, "", lines)
    return "\n".join(lines) + "\n"


def _merge(base: dict, edits: dict) -> dict:
    out = dict(base)
    for k, v in edits.items():
        if v is DELETE:
            out.pop(k, None)
        elif isinstance(v, dict) and isinstance(out.get(k), dict):
            out[k] = _merge(out[k], v)
        else:
            out[k] = v
    return out


def build_design(example: str = "nightlight-dropper", **overrides) -> dict:
    """The example's table with ``overrides`` applied.

    A dict value edits that section key by key (``parts={"series_capacitance": "3.3 V"}``);
    ``None`` removes a key (top level or inside a section); any other value replaces it.
    ``replace_states={...}`` replaces the whole ``[states]`` table.
    """
    data = load_example(example)
    states = overrides.pop("replace_states", None)
    data = _merge(data, overrides)
    if states is not None:
        data["states"] = dict(states)
    return data


def write_design(
    tmp_path: Path, example: str = "nightlight-dropper", filename: str = "design.toml", **overrides
) -> Path:
    """Write the example with ``overrides`` (see :func:`build_design`) to ``tmp_path``."""
    path = tmp_path / filename
    path.write_text(dumps_toml(build_design(example, **overrides)), encoding="utf-8")
    return path


# ----------------------------------------------------------------------------------------
# in-process CLI runs
# ----------------------------------------------------------------------------------------
def run_captured(argv: list[str]) -> tuple[int, str, str]:
    """Run ``fleetpower.cli.main(argv)`` in-process; return (status, stdout, stderr).

    argparse's own exits (``--help``, ``--version``, usage errors) give their status."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            rc = main([str(a) for a in argv])
        except SystemExit as exc:
            rc = exc.code
    return rc, out.getvalue(), err.getvalue()


@pytest.fixture
def cli(capsys):
    """Call ``cli(*argv)`` -> (status, stdout, stderr), via ``main`` and capsys."""

    def run(*argv):
        rc = main([str(a) for a in argv])
        captured = capsys.readouterr()
        return rc, captured.out, captured.err

    return run


@pytest.fixture
def design_file(tmp_path):
    """Call ``design_file(example="nightlight-dropper", **overrides)`` -> Path."""

    def make(example: str = "nightlight-dropper", **overrides) -> Path:
        return write_design(tmp_path, example, **overrides)

    return make


def json_report(*argv) -> dict:
    """``fleetpower unit ... --json`` run in-process, parsed; fails on a non-zero status."""
    rc, out, err = run_captured(["unit", *argv, "--json"])
    assert rc == 0, err
    return json.loads(out)
