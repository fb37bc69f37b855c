"""What a quick command imports: heavy libraries stay out of the paths that do not need
them (a structural check, not a timing: benchmarks/bench_cli_speed.py times them).

Source: the project's own speed targets (README, Performance); which libraries are heavy
was measured with ``python -X importtime`` (pint with its registry ~1 s, pandas ~0.45 s,
scipy.special ~0.25 s, dask ~0.1 s on the development machine).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent


def _imported_after(code: str, watch: tuple[str, ...]) -> list[str]:
    probe = f"import sys\n{code}\nprint(' '.join(m for m in {watch!r} if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", probe], cwd=REPO, capture_output=True,
                         text=True, check=True)
    return out.stdout.split()


def test_unit_path_leaves_out_pint_dask_scipy_special_matplotlib():
    code = (
        "from fleetpower.io.design_file import load_design\n"
        "import fleetpower.unit, fleetpower.report, fleetpower.cli\n"
        "load_design('examples/nightlight-dropper.toml')\n"
    )
    assert _imported_after(code, ("pint", "dask", "scipy.special", "matplotlib")) == []


def test_unit_run_leaves_out_pandas_matplotlib_pint():
    # the whole verb, solves and rendering included, with a user's limit file read too:
    # the limit tables are read into plain records, DataFrames are built only where the
    # library API returns one (README, Performance: pandas costs ~0.45 s of a unit run)
    code = (
        "import contextlib, io\n"
        "import fleetpower.cli\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        "    code = fleetpower.cli.main(['unit', 'examples/nightlight-dropper.toml',\n"
        "                                '--limits', 'data/limits/eu-standby.csv'])\n"
        "assert code == 0, code\n"
    )
    assert _imported_after(code, ("pandas", "matplotlib", "pint", "dask",
                                  "scipy.special")) == []


def test_command_line_unit_leaves_out_scipy_linalg_with_the_same_figures(cli):
    # the console script's own process answers numba's BLAS probe with scipy's BLAS
    # wrapper module alone (fleetpower.cli._blas_probe_without_scipy_linalg); the figures
    # must be those of a library caller's process, where scipy.linalg is imported whole
    watch = ("scipy.linalg", "pandas")
    code = (
        "import atexit, sys\n"
        f"atexit.register(lambda: print('IMPORTED', *[m for m in {watch!r} "
        "if m in sys.modules]))\n"
        "sys.argv = ['fleetpower', 'unit', 'examples/nightlight-dropper.toml', '--json']\n"
        "import fleetpower.cli\n"
        "fleetpower.cli.run()\n"
    )
    out = subprocess.run([sys.executable, "-c", code], cwd=REPO, capture_output=True,
                         text=True, check=True).stdout
    report, _, imported = out.rpartition("IMPORTED")
    assert imported.split() == []
    rc, in_process, _ = cli("unit", REPO / "examples" / "nightlight-dropper.toml", "--json")
    assert rc == 0
    mine, theirs = json.loads(report), json.loads(in_process)
    mine.pop("file"), theirs.pop("file")
    assert mine == theirs


def test_limit_listing_leaves_out_pandas_and_numba():
    code = ("import fleetpower.cli\n"
            "from fleetpower.limits.catalogue import set_summaries\nset_summaries()\n")
    assert _imported_after(code, ("pandas", "numba", "pint")) == []


def test_limit_set_screen_leaves_out_pandas_and_numba():
    code = (
        "import contextlib, io\n"
        "import fleetpower.cli\n"
        "with contextlib.redirect_stdout(io.StringIO()):\n"
        "    assert fleetpower.cli.main(['limits', 'iec61000-3-2-class-a']) == 0\n"
        "    assert fleetpower.cli.main(['limits', 'data/limits/eu-standby.csv']) == 0\n"
    )
    assert _imported_after(code, ("pandas", "numba", "pint")) == []


def test_help_leaves_out_the_engine():
    code = "import fleetpower.cli\nfleetpower.cli.build_parser().format_help()\n"
    assert _imported_after(code, ("pandas", "numba", "pint", "pydantic")) == []
