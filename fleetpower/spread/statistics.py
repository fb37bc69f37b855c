"""Statistics of a spread run, built from per-sample scalars only (never waveforms).

Chunks of samples arrive in any order; each brings, for every sample, the scalar figures
of interest (P, S, I rms, PF, output voltage, each loss and stress) and pass/fail flags of
each limit. Percentiles are exact: the scalars are kept (8 bytes per figure and sample,
80 MB for 10 figures of 10^6 samples) and sorted when asked.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import TYPE_CHECKING

import numpy as np

from ..ties import alike

if TYPE_CHECKING:  # pragma: no cover  (pandas is imported where a DataFrame is built)
    import pandas as pd

#: percentiles reported by default [%]
DEFAULT_PERCENTILES = (5.0, 50.0, 95.0)


class SpreadStatistics:
    """Accumulates per-sample scalars and failure flags of a spread run.

    Chunks are keyed by their first sample index, so the result does not depend on the
    order chunks arrive in: figures and flags are listed in the order they first occur in
    sample-index order, and a flag a chunk does not carry counts as not failing for that
    chunk's samples (a check a unit was not subject to is not a failure of that unit).
    """

    def __init__(self) -> None:
        self._chunks: dict[int, tuple[dict[str, np.ndarray], dict[str, np.ndarray]]] = {}
        self._lengths: dict[int, int] = {}

    def _first_seen(self, part: int) -> list[str]:
        """Names of figures (part 0) or flags (part 1) in sample-index order of first use."""
        return list(dict.fromkeys(k for c in sorted(self._chunks) for k in self._chunks[c][part]))

    @property
    def _names(self) -> list[str]:
        return self._first_seen(0)

    @property
    def _flags(self) -> list[str]:
        return self._first_seen(1)

    def add(self, start: int, scalars: dict[str, np.ndarray],
            failing: dict[str, np.ndarray] | None = None) -> None:
        """Record a chunk of samples starting at index ``start``.

        Parameters
        ----------
        start : int
            Index of the chunk's first sample.
        scalars : dict of str -> numpy.ndarray
            Per-sample figures, all of one length.
        failing : dict of str -> numpy.ndarray of bool, optional
            Per-sample flags, True where the sample fails that limit or stress.
        """
        failing = {} if failing is None else failing
        lengths = {len(np.asarray(v)) for v in [*scalars.values(), *failing.values()]}
        if len(lengths) != 1:
            raise ValueError("a chunk needs figures with one value per sample")
        if start in self._chunks:
            raise ValueError(f"chunk starting at sample {start} recorded twice")
        self._chunks[start] = (
            {k: np.asarray(v, dtype=float) for k, v in scalars.items()},
            {k: np.asarray(v, dtype=bool) for k, v in failing.items()},
        )
        self._lengths[start] = lengths.pop()

    @property
    def n_samples(self) -> int:
        """Samples recorded so far."""
        return sum(self._lengths.values())

    def values(self, name: str) -> np.ndarray:
        """All recorded values of figure ``name``, in sample-index order."""
        parts = [self._chunks[k][0][name] for k in sorted(self._chunks)
                 if name in self._chunks[k][0]]
        return np.concatenate(parts) if parts else np.empty(0)

    def flags(self, name: str) -> np.ndarray:
        """Flag ``name`` of every recorded sample, in sample-index order (False for the
        samples of a chunk that does not carry it)."""
        parts = [self._chunks[k][1].get(name, np.zeros(self._lengths[k], dtype=bool))
                 for k in sorted(self._chunks)]
        return np.concatenate(parts) if parts else np.empty(0, dtype=bool)

    def sample_indices(self) -> np.ndarray:
        """Index of every recorded sample, in order."""
        out = [np.arange(k, k + self._lengths[k]) for k in sorted(self._chunks)]
        return np.concatenate(out) if out else np.empty(0, dtype=np.int64)

    def percentiles(self, percentiles: Iterable[float] = DEFAULT_PERCENTILES) -> pd.DataFrame:
        """Percentiles, minimum and maximum of every figure.

        Returns
        -------
        pandas.DataFrame
            Indexed by figure name, columns ``p5``, ``p50``, ``p95`` (per
            ``percentiles``), ``min``, ``max`` and ``samples``. Percentiles are the
            linear interpolation of the order statistics (numpy's default, Hyndman &
            Fan 1996 definition 7).

        References
        ----------
        .. [1] R. J. Hyndman, Y. Fan, "Sample quantiles in statistical packages",
           The American Statistician 50 (1996) 361-365.
        """
        import pandas as pd

        ps = list(percentiles)
        rows = {}
        for name in self._names:
            v = self.values(name)
            v = v[np.isfinite(v)]
            row = {f"p{p:g}": (float(np.percentile(v, p)) if v.size else float("nan"))
                   for p in ps}
            row["min"] = float(v.min()) if v.size else float("nan")
            row["max"] = float(v.max()) if v.size else float("nan")
            row["samples"] = int(v.size)
            rows[name] = row
        return pd.DataFrame.from_dict(rows, orient="index")

    def failure_fractions(self) -> pd.Series:
        """Fraction of recorded samples failing each flag [-]."""
        import pandas as pd

        return pd.Series({name: float(np.mean(self.flags(name))) if self.flags(name).size
                          else float("nan") for name in self._flags}, dtype=float)

    def worst(self, name: str, largest: bool = True) -> tuple[int, float]:
        """Sample index and value of the largest (or smallest) value of ``name``."""
        v = self.values(name)
        if not v.size:
            raise ValueError(f"no samples of {name!r} recorded")
        j = int(np.nanargmax(v) if largest else np.nanargmin(v))
        return int(self.sample_indices()[j]), float(v[j])

    def alike(self, name: str, largest: bool = True) -> int:
        """How many recorded samples share the extreme :meth:`worst` names (to rounding,
        :func:`fleetpower.ties.alike`), the named one included: more than one means it is
        the first of equals (every unit in regulation holds the same output)."""
        v = self.values(name)
        if not v.size:
            raise ValueError(f"no samples of {name!r} recorded")
        return alike(v, largest)
