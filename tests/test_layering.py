"""Architecture guards: the seams the package is built on stay where they are.

Source: the project's own layering rules (DEVELOPERS.md); the cache test's physics is the
reactance of a capacitor, X = 1/(2 pi f C) (any circuits textbook), which makes a smaller
series capacitor pass less current.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from fleetpower import simulate as sim
from fleetpower._resources import examples_dir
from fleetpower.engine import layout
from fleetpower.io.design_file import load_design

ROOT = Path(__file__).resolve().parent.parent
INDEX_NAMES = {n for n in dir(layout) if n.startswith(("P_", "PR_", "S_"))} | {"N_PARAMS"}


def _index_imports(path: Path) -> list[str]:
    """Engine index names a module imports or reads off the layout module."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            found += [a.name for a in node.names if a.name in INDEX_NAMES]
        elif isinstance(node, ast.Attribute) and node.attr in INDEX_NAMES:
            found.append(node.attr)
    return found


def test_no_parameter_index_outside_engine_and_topologies():
    allowed = {ROOT / "fleetpower" / "engine", ROOT / "fleetpower" / "topologies"}
    files = [p for d in ("fleetpower", "tests", "benchmarks") for p in (ROOT / d).rglob("*.py")
             if not any(a in p.parents for a in allowed)]
    assert len(files) > 20
    offenders = {str(p.relative_to(ROOT)): names for p in files if (names := _index_imports(p))}
    assert not offenders, offenders


def test_the_index_scan_can_fail(tmp_path):
    bad = tmp_path / "bad.py"
    bad.write_text("from fleetpower.engine.layout import P_C1\nx = layout.P_VPK\n")
    assert _index_imports(bad) == ["P_C1", "P_VPK"]


def test_probe_indices_follow_their_names():
    # the kernels write by PR_* constants derived from the names, so they cannot drift
    for name in dir(layout):
        if name.startswith("PR_"):
            assert 0 <= getattr(layout, name) < layout.N_PROBES
    assert len({getattr(layout, n) for n in dir(layout) if n.startswith("PR_")}) == \
        layout.N_PROBES


@pytest.fixture
def design():
    return load_design(examples_dir() / "nightlight-dropper.toml")


def test_a_design_changed_in_memory_gets_its_own_result(design):
    cache = sim.ResultCache()
    state = next(iter(design.states))
    (nominal,) = sim.run([sim.Case(design, state)], cache=cache)
    parts = design.parts.model_copy(
        update={"series_capacitance": 0.8 * design.parts.series_capacitance})
    smaller = design.model_copy(update={"parts": parts})
    (changed,) = sim.run([sim.Case(smaller, state)], cache=cache)
    assert cache.solves == 2
    # a 20 % smaller series capacitor has 25 % more reactance: less line current
    assert changed.pq.i_rms_a < 0.9 * nominal.pq.i_rms_a


def test_the_same_design_twice_is_solved_once(design):
    cache = sim.ResultCache()
    state = next(iter(design.states))
    calls = []

    def counting_executor(func, items, on_done=None):
        calls.append(sum(len(b.labels) for b in items))
        return [func(b) for b in items]

    copy = design.model_copy(update={"source": "elsewhere.toml"})  # same content
    first = sim.run([sim.Case(design, state), sim.Case(copy, state)], cache=cache,
                    executor=counting_executor)
    again = sim.run([sim.Case(design, state)], cache=cache, executor=counting_executor)
    assert calls == [1]
    assert cache.solves == 1
    assert first[0] is first[1] is again[0]


def test_the_cache_is_bounded_least_recently_used_first(design):
    """The cache keeps at most ``max_results``; the least recently used result goes first
    and is solved again when asked (the bound costs time, never a figure)."""
    states = list(design.states)
    assert len(states) >= 2
    cache = sim.ResultCache(max_results=2)
    a, b = (sim.Case(design, s) for s in states[:2])
    c = sim.Case(design, states[0], mains_factor=1.1)
    (ra,) = sim.run([a], cache=cache)
    (rb0,) = sim.run([b], cache=cache)
    assert sim.run([a], cache=cache)[0] is ra  # a is now the most recently used
    sim.run([c], cache=cache)  # drops b, the least recently used
    assert len(cache) == 2 and cache.evicted == 1 and cache.solves == 3
    (rb,) = sim.run([b], cache=cache)  # solved again (dropping a), the same figures
    assert cache.solves == 4 and cache.evicted == 2
    assert rb is not rb0 and rb.pq.p_w == rb0.pq.p_w
    assert sim.run([a], cache=cache)[0] is not ra and cache.solves == 5
