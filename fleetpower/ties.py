"""Extremes that are stable to rounding: which case, state or unit is the largest.

Figures from the engine carry rounding of ~1e-12; two cases equal to that are a tie, and
a named worst case, peak hour, heaviest state or worst unit must not flip on it. Within
:data:`TIE_RTOL` of the extreme values are alike and the first of them is named.

Owns: :data:`TIE_RTOL`, :func:`first_largest`, :func:`first_smallest`, :func:`alike`.
Imports nothing of fleetpower (numpy only), so light callers (the spread's statistics)
and the fleet share one rule.
"""

from __future__ import annotations

import numpy as np

#: figures within this relative distance of the extreme are a tie (common practice, no
#: source: far above the engine's ~1e-12 rounding, far below any reported digit)
TIE_RTOL = 1e-9


def first_largest(values, axis=None):
    """Index of the largest of ``values`` (along ``axis``; flat when None), the first of
    those within :data:`TIE_RTOL` of it on a tie: ``np.argmax`` made stable to rounding."""
    a = np.asarray(values, dtype=float)
    top = np.max(a, axis=axis, keepdims=axis is not None)
    with np.errstate(invalid="ignore"):  # -inf entries (impossible states) stay out
        near = a >= top - TIE_RTOL * np.abs(top)
    return np.argmax(near, axis=axis)


def first_smallest(values, axis=None):
    """:func:`first_largest` of the smallest."""
    return first_largest(-np.asarray(values, dtype=float), axis=axis)


def alike(values, largest: bool = True) -> int:
    """How many of ``values`` (NaN left out) are within :data:`TIE_RTOL` of their largest
    (or smallest): more than one means the one named is the first of equals."""
    v = np.asarray(values, dtype=float)
    end = np.nanmax(v) if largest else np.nanmin(v)
    return int(np.sum(np.abs(v - end) <= TIE_RTOL * abs(end)))
