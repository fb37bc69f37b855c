"""The examples print what they printed when the goldens were recorded.

Source: the project's own recorded outputs (tests/golden/), a guard against unintended
behaviour changes during refactors; it is no check of the physics (the reference tests are).
Re-record with ``python tests/golden_outputs.py --write`` only in a commit that changes
behaviour on purpose and says why.
"""

from __future__ import annotations

import json

import pytest
from golden_outputs import GOLDEN, cases, differences, run

CASES = cases()


def test_every_golden_has_a_case():
    recorded = {p.stem for p in GOLDEN.glob("*.json")}
    assert recorded == set(CASES), "examples and goldens differ: re-record on purpose"


@pytest.mark.parametrize("name", sorted(CASES))
def test_golden(name):
    expected = json.loads((GOLDEN / f"{name}.json").read_text(encoding="utf-8"))
    diffs = differences(expected, run(CASES[name]))
    assert not diffs, f"{len(diffs)} differences, first: " + "; ".join(diffs[:10])


def test_differences_sees_a_change():
    # the comparison itself must be able to fail
    assert differences({"a": [1.0, "x"]}, {"a": [1.0 + 1e-9, "x"]})
    assert differences({"a": 1}, {"b": 1})
    assert not differences({"a": [1.0]}, {"a": [1.0 * (1 + 1e-14)]})
