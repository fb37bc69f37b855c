"""numba's cache of the engine follows every engine source file (fleetpower.engine.cache).

numba discards a function's cached code only when that function's own file changes; the
engine's kernels compile in functions of other files, so a change there alone once left
the solver's cached code stale (V = 0 and P = 0 printed without a word). The check values
here are numba's own: its cache index is empty after ``flush`` and filled after a compile
(numba documentation, "Notes on caching"); the rest is the project's invariant.
"""

from __future__ import annotations

import importlib.util
import sys

import numba

from fleetpower.engine import cache, circuits, devices, solver


def _module(tmp_path, name: str):
    src = tmp_path / f"{name}.py"
    src.write_text("from numba import njit\n\n@njit(cache=True)\ndef plus_one(x):\n"
                   "    return x + 1\n")
    spec = importlib.util.spec_from_file_location(name, src)
    mod = importlib.util.module_from_spec(spec)
    sys.modules[name] = mod
    spec.loader.exec_module(mod)
    return mod


def _index(dispatcher) -> dict:
    return dispatcher._cache._cache_file._load_index()


def test_a_new_stamp_empties_the_cache_and_the_same_stamp_keeps_it(tmp_path):
    mod = _module(tmp_path, "fp_cache_probe")
    try:
        assert mod.plus_one(1) == 2 and _index(mod.plus_one)  # compiled and saved
        fns = cache.engine_dispatchers(mod)
        assert fns == [mod.plus_one]
        assert cache.keep_in_step(fns, "A") is True  # no stamp yet: start clean
        assert not _index(mod.plus_one)
        assert (tmp_path / "__pycache__" / cache.STAMP_NAME).read_text() == "A"
        mod.plus_one.recompile()  # compiles again and saves under stamp A
        assert _index(mod.plus_one)
        assert cache.keep_in_step(fns, "A") is False and _index(mod.plus_one)
        assert cache.keep_in_step(fns, "B") is True and not _index(mod.plus_one)
    finally:
        sys.modules.pop("fp_cache_probe", None)


def test_the_stamp_covers_every_engine_source_file(tmp_path):
    """Any engine file changing (not only solver.py) changes the stamp; so does numba."""
    for name in ("solver.py", "circuits.py", "devices.py", "layout.py"):
        (tmp_path / name).write_text("x = 1\n")
    base = cache.source_stamp(tmp_path, "0.1")
    assert cache.source_stamp(tmp_path, "0.1") == base
    assert cache.source_stamp(tmp_path, "0.2") != base
    for name in ("circuits.py", "layout.py"):
        (tmp_path / name).write_text("x = 2\n")
        changed = cache.source_stamp(tmp_path, "0.1")
        assert changed != base
        base = changed


def test_the_engine_carries_a_current_stamp():
    """Importing the engine stamps its cache with the sources it has now, and every
    ``@njit(cache=True)`` function of the engine is covered."""
    fns = cache.engine_dispatchers(devices, circuits, solver)
    assert solver._shoot_rows in fns and circuits.residual in fns
    folder = fns[0]._cache._cache_path
    stamp = cache.source_stamp(numba_version=numba.__version__)
    assert (folder and open(f"{folder}/{cache.STAMP_NAME}").read() == stamp)
    assert cache.keep_in_step(fns, stamp) is False  # in step: nothing emptied
