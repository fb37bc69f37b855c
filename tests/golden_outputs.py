"""Golden outputs of the bundled examples: the guard for refactors.

``python tests/golden_outputs.py --write`` records the JSON that ``demo``, ``unit`` (every
example design) and ``fleet`` (every example fleet) print into ``tests/golden/``;
``tests/test_golden.py`` checks that the current code prints the same. A behaviour change
re-records them in a commit of its own that says why.

Absolute paths are written relative to the repository so the files compare on any checkout.
"""

from __future__ import annotations

import contextlib
import io
import json
import math
import sys
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent
EXAMPLES = REPO / "examples"
GOLDEN = Path(__file__).resolve().parent / "golden"

#: floats compare to this relative tolerance (floating-point order may change in a refactor)
REL_TOL = 1e-12
#: and to this absolute tolerance, for figures that are zero up to rounding
ABS_TOL = 1e-15


def _is_fleet(path: Path) -> bool:
    text = path.read_text(encoding="utf-8")
    return "[[group]]" in text or "\ninventory" in text


def cases() -> dict[str, list[str]]:
    """Golden name -> CLI arguments, in a stable order."""
    out: dict[str, list[str]] = {"demo": ["demo", "--json"]}
    for p in sorted(EXAMPLES.glob("*.toml")):
        if _is_fleet(p):
            out[f"fleet-{p.stem}"] = ["fleet", str(p), "--json"]
        else:
            out[f"unit-{p.stem}"] = ["unit", str(p), "--json"]
    return out


def _relative(x):
    if isinstance(x, dict):
        return {k: _relative(v) for k, v in x.items()}
    if isinstance(x, list):
        return [_relative(v) for v in x]
    if isinstance(x, str):
        return x.replace(str(REPO) + "/", "")
    return x


def run(args: list[str]) -> dict:
    from fleetpower.cli import main

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(list(args))
    if code != 0:
        raise RuntimeError(f"fleetpower {' '.join(args)} exited {code}: {err.getvalue()}")
    return _relative(json.loads(out.getvalue()))


def differences(expected, actual, where: str = "$") -> list[str]:
    """Every place where ``actual`` departs from ``expected`` (empty when they agree)."""
    if isinstance(expected, dict) and isinstance(actual, dict):
        diffs = []
        for k in sorted(set(expected) | set(actual), key=str):
            if k not in actual:
                diffs.append(f"{where}.{k}: missing")
            elif k not in expected:
                diffs.append(f"{where}.{k}: new key")
            else:
                diffs += differences(expected[k], actual[k], f"{where}.{k}")
        return diffs
    if isinstance(expected, list) and isinstance(actual, list):
        if len(expected) != len(actual):
            return [f"{where}: length {len(actual)}, expected {len(expected)}"]
        diffs = []
        for i, (e, a) in enumerate(zip(expected, actual, strict=True)):
            diffs += differences(e, a, f"{where}[{i}]")
        return diffs
    numbers = all(isinstance(v, (int, float)) and not isinstance(v, bool)
                  for v in (expected, actual))
    if numbers and (isinstance(expected, float) or isinstance(actual, float)):
        if math.isclose(expected, actual, rel_tol=REL_TOL, abs_tol=ABS_TOL):
            return []
    elif type(expected) is type(actual) and expected == actual:
        return []
    return [f"{where}: {actual!r}, expected {expected!r}"]


def write() -> None:
    GOLDEN.mkdir(exist_ok=True)
    for name, args in cases().items():
        path = GOLDEN / f"{name}.json"
        path.write_text(json.dumps(run(args), indent=1, sort_keys=True) + "\n", encoding="utf-8")
        print(f"wrote {path.relative_to(REPO)}")


if __name__ == "__main__":
    # run as a script, record THIS checkout's package, not whichever one is installed
    sys.path.insert(0, str(REPO))
    if sys.argv[1:] != ["--write"]:
        sys.exit("usage: python tests/golden_outputs.py --write")
    write()
