"""numba's cache of the compiled engine, kept in step with every engine source file.

numba discards a function's cached machine code when *that function's own* source file
changes (it stamps the cache with the file's time and size). The engine's kernels in
:mod:`fleetpower.engine.solver` compile in the device and circuit functions of
:mod:`~fleetpower.engine.devices` and :mod:`~fleetpower.engine.circuits` and the indices of
:mod:`~fleetpower.engine.layout`; a change to one of those alone would leave the solver's
cached code as it was, and the program would print the old circuit's figures without a word
(seen once: V = 0 and P = 0 after such a change). This module stamps the cache directory with
a hash of every engine source file (and the numba and Python versions) and empties numba's
index of every engine function when the stamp differs, so they compile afresh.

Owns: the stamp. Imports only the standard library; touches numba's per-function cache
through the dispatcher's cache object (``dispatcher._cache``: its path and ``flush()``), and
does nothing when numba lays that out otherwise.
"""

from __future__ import annotations

import hashlib
import os
import platform
import tempfile
from collections.abc import Iterable
from pathlib import Path

#: the stamp file, beside numba's index files of the engine
STAMP_NAME = "fleetpower-engine.stamp"


def source_stamp(folder: Path | None = None, numba_version: str = "") -> str:
    """Hash of every ``*.py`` file of the engine package (names and bytes, sorted by name),
    the numba version and the Python implementation and version."""
    folder = Path(__file__).resolve().parent if folder is None else Path(folder)
    h = hashlib.sha256(f"{numba_version}|{platform.python_implementation()}|"
                       f"{platform.python_version()}".encode())
    for p in sorted(folder.glob("*.py")):
        h.update(p.name.encode() + b"\0" + p.read_bytes() + b"\0")
    return h.hexdigest()


def _cache_dir(dispatcher) -> Path | None:
    try:
        return Path(dispatcher._cache._cache_path)
    except (AttributeError, TypeError):  # not cached, or numba's internals moved
        return None


def keep_in_step(dispatchers: Iterable, stamp: str) -> bool:
    """Empty the cache index of every dispatcher when the directory's stamp is not ``stamp``.

    Parameters
    ----------
    dispatchers : iterable of numba dispatchers
        The engine's ``@njit(cache=True)`` functions (their caches share one directory).
    stamp : str
        :func:`source_stamp` of the sources they were compiled from.

    Returns
    -------
    bool
        True when the caches were emptied (the next call compiles), False when the stamp
        matched or nothing could be done (no cache directory, numba laid out otherwise).
    """
    dispatchers = list(dispatchers)
    folder = next((d for d in map(_cache_dir, dispatchers) if d is not None), None)
    if folder is None:
        return False
    target = folder / STAMP_NAME
    try:
        if target.read_text(encoding="ascii") == stamp:
            return False
    except (OSError, UnicodeDecodeError):
        pass  # no stamp yet (a cache from before stamps, or none): start clean
    for d in dispatchers:
        try:
            d._cache.flush()
        except Exception:  # noqa: BLE001 - a cache numba cannot empty is left to numba
            pass
    try:  # atomically, so a concurrent start never reads half a stamp
        folder.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{STAMP_NAME}.", dir=folder)
        with os.fdopen(fd, "w", encoding="ascii") as f:
            f.write(stamp)
        os.replace(tmp, target)
    except OSError:
        pass  # a read-only cache: numba will not save there either
    return True


def engine_dispatchers(*modules) -> list:
    """Every numba dispatcher defined in ``modules`` (in a stable order)."""
    from numba.core.registry import CPUDispatcher

    return [v for m in modules for _, v in sorted(vars(m).items())
            if isinstance(v, CPUDispatcher)
            and getattr(v.py_func, "__module__", None) == m.__name__]


__all__ = ["source_stamp", "keep_in_step", "engine_dispatchers", "STAMP_NAME"]
