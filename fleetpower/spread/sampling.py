"""Monte Carlo samples and corner combinations of a set of toleranced values.

Reproducibility
---------------
Sample ``i`` of a run with seed ``s`` draws from its own generator, seeded by
``numpy.random.SeedSequence(s, spawn_key=(i,))``: the same stream numpy's
``SeedSequence.spawn`` would hand to the ``i``-th child. A sample's values therefore
depend only on (run seed, sample index), never on how the run is cut into chunks, on
the order chunks finish in, or on how many workers run them. Each part takes one
uniform variate of its sample, in declaration order, mapped through the part's inverse
distribution (:meth:`PartSpread.from_uniform`).

References
----------
.. [1] NumPy, "Parallel random number generation" (``SeedSequence`` spawning),
   https://numpy.org/doc/stable/reference/random/parallel.html
.. [2] M. E. O'Neill, "PCG: A family of simple fast space-efficient statistically good
   algorithms for random number generation", HMC-CS-2014-0905, 2014.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence

import numpy as np

from ..errors import InputError
from .tolerance import PartSpread

#: most corner combinations a corner analysis will enumerate (2**12)
MAX_CORNERS = 4096


def sample_uniforms(seed: int, start: int, stop: int, k: int) -> np.ndarray:
    """Uniform variates of samples ``start .. stop-1``, ``k`` per sample.

    Parameters
    ----------
    seed : int
        Run seed (non-negative).
    start, stop : int
        Sample indices (half-open range).
    k : int
        Variates per sample.

    Returns
    -------
    numpy.ndarray
        Shape ``(stop - start, k)`` in [0, 1); row ``j`` is a function of
        ``(seed, start + j)`` only.
    """
    if seed < 0:
        raise ValueError("the run seed must be a non-negative integer")
    if not 0 <= start <= stop:
        raise ValueError("need 0 <= start <= stop")
    out = np.empty((stop - start, k))
    for j, i in enumerate(range(start, stop)):
        rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence(seed, spawn_key=(i,))))
        out[j] = rng.random(k)
    return out


def monte_carlo_values(
    spreads: Sequence[PartSpread], seed: int, start: int, stop: int
) -> np.ndarray:
    """Values of every toleranced part for samples ``start .. stop-1``.

    Returns
    -------
    numpy.ndarray
        Shape ``(stop - start, len(spreads))`` in SI units; column ``j`` is
        ``spreads[j]``.
    """
    u = sample_uniforms(seed, start, stop, len(spreads))
    out = np.empty_like(u)
    for j, spread in enumerate(spreads):
        out[:, j] = spread.from_uniform(u[:, j])
    return out


def corner_values(
    spreads: Sequence[PartSpread], *, cap: int = MAX_CORNERS, file: str = "<input>",
    where: str = "corners",
) -> tuple[np.ndarray, list[str]]:
    """Every combination of each varying part at its low or high extreme.

    Parts that do not vary sit at their nominal. Combinations are enumerated in
    :func:`itertools.product` order over (low, high) of the parts in declaration order,
    so corner 0 has every part low and the last has every part high.

    Returns
    -------
    values : numpy.ndarray
        Shape ``(2**k, len(spreads))`` [SI], ``k`` the number of varying parts.
    labels : list of str
        ``"series_capacitance low, zener_voltage high"`` for each row.

    Raises
    ------
    InputError
        When ``2**k`` exceeds ``cap``.
    """
    varying = [j for j, s in enumerate(spreads) if s.varies]
    k = len(varying)
    if 2**k > cap:
        raise InputError(
            file, where,
            f"{k} toleranced values make 2^{k} = {2**k} corners, more than the {cap} a "
            "corner analysis enumerates; use Monte Carlo samples or fix some tolerances")
    base = np.array([s.nominal for s in spreads], dtype=float)
    rows, labels = [], []
    for combo in itertools.product((0, 1), repeat=k):
        row = base.copy()
        words = []
        for j, hi in zip(varying, combo, strict=True):
            s = spreads[j]
            row[j] = s.high if hi else s.low
            words.append(f"{s.key.removeprefix('parts.')} {'high' if hi else 'low'}")
        rows.append(row)
        labels.append(", ".join(words) if words else "nominal")
    return np.array(rows).reshape(len(rows), len(spreads)), labels


def monte_carlo_chunk(spreads: Sequence[PartSpread], seed: int,
                      bounds: tuple[int, int]) -> np.ndarray:
    """:func:`monte_carlo_values` of the half-open index range ``bounds`` (one work item)."""
    start, stop = bounds
    return monte_carlo_values(spreads, seed, start, stop)
