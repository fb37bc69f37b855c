"""Reading a measured supply's files: a voltage/current capture and a harmonic table.

File formats (our own; both are plain CSV, ``#`` starts a comment line):

Capture
    Three columns, in any order, named ``time``, ``voltage`` and ``current`` (or ``t``,
    ``v``/``u``, ``i``), each with its unit in square brackets in the header::

        # scope export, 12 bit, 20 kS/s
        time [ms],voltage [V],current [mA]
        0.000,-12.4,0.81
        0.050,-1.2,0.77

    Any pint unit of the right dimension is accepted (``s``, ``ms``, ``us``; ``V``,
    ``kV``; ``A``, ``mA``). A header without brackets may be used when the units are
    declared separately (the ``units`` argument of :func:`read_capture`). Other columns
    are ignored. Voltage is line-to-neutral at the gadget's plug; current is the line
    current in the consumer sign (into the gadget positive).
Harmonic table
    Columns ``h`` (integer order, 1 required; 0 = DC allowed), ``current [unit]`` (rms) and,
    optionally, ``phase [deg]`` or ``phase [rad]`` relative to h times the voltage
    fundamental's angle (the project's convention). When the phase column is absent every
    order is taken in phase (0 deg): see :func:`read_harmonic_table`.

Every defect is an :class:`~fleetpower.errors.InputError` naming the file and what is wrong.
The analysis is :mod:`fleetpower.pq.capture`. May import ``units``, ``errors`` and
``io.files`` (:func:`write_capture` writes a simulated waveform in the capture format).
"""

from __future__ import annotations

import io
import re
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from ..errors import InputError
from ..units import registry
from .files import MAX_CAPTURE_BYTES, read_text_bounded, write_atomic

if TYPE_CHECKING:  # pragma: no cover  (pandas is imported when a capture is read)
    import pandas as pd

#: highest harmonic order a table may list (fleetpower.pq.spectrum.H_MAX)
H_TABLE_MAX = 50
#: time steps may wander by this fraction of the median step (timestamps printed with
#: few digits); beyond it the capture has a gap or a rate change and is refused
TIME_JITTER = 0.1

_ROLES = {
    "time": ("time", {"t", "time"}),
    "voltage": ("voltage", {"v", "u", "voltage"}),
    "current": ("current", {"i", "current"}),
}
_HEADER = re.compile(r"^\s*([^\[\]]*?)\s*(?:\[\s*([^\]]*?)\s*\])?\s*$")


def _read_table(path: str | Path) -> pd.DataFrame:
    import pandas as pd

    file = str(path)
    # bounded like the design files (a regular file, UTF-8), at most MAX_CAPTURE_BYTES:
    # a FIFO or /dev/zero named as a capture is refused instead of read for ever
    text = read_text_bounded(path, MAX_CAPTURE_BYTES).removeprefix("\ufeff")  # a BOM
    try:
        df = pd.read_csv(io.StringIO(text), comment="#", skipinitialspace=True, dtype=str,
                         keep_default_na=False)
    except (pd.errors.ParserError, pd.errors.EmptyDataError) as exc:
        first = str(exc).strip().splitlines()[0] if str(exc).strip() else "empty file"
        raise InputError(file, "", f"not a readable CSV table: {first}") from None
    if df.empty:
        raise InputError(file, "", "the table has a header but no data rows")
    return df


def _columns(df: pd.DataFrame, file: str, wanted: dict[str, tuple[str, set[str]]],
             required: tuple[str, ...], units: dict[str, str] | None) -> dict[str, tuple[str, str]]:
    """Map role -> (column header, unit text); refuse a missing column or unit."""
    found: dict[str, tuple[str, str]] = {}
    for col in df.columns:
        m = _HEADER.match(str(col))
        if not m:
            continue
        name, unit = m.group(1).strip().lower(), (m.group(2) or "").strip()
        for role, (_label, names) in wanted.items():
            if name in names:
                if role in found:
                    raise InputError(file, f"column {col!r}",
                                     f"a second {role} column (first: {found[role][0]!r})")
                if not unit and units and role in units:
                    unit = str(units[role])
                found[role] = (str(col), unit)
    names = ", ".join(repr(str(c)) for c in df.columns)
    for role in required:
        if role not in found:
            raise InputError(file, "header",
                             f"no {role} column (found {names}); name it e.g. "
                             f"'{role} [{_EXAMPLE_UNIT[role]}]'")
    return found


_EXAMPLE_UNIT = {"time": "ms", "voltage": "V", "current": "mA", "h": "-", "phase": "deg"}
_SI = {"time": "s", "voltage": "V", "current": "A"}


def _unit_factor(file: str, col: str, unit: str, role: str) -> float:
    """Multiplier from the column's unit to SI; refuse a missing or wrong-dimension unit."""
    if not unit:
        raise InputError(file, f"column {col!r}",
                         f"no unit; write the header as '{col.strip()} [{_EXAMPLE_UNIT[role]}]'")
    import pint  # here, not at the top: pint (and what it pulls in) costs a quick command

    ureg = registry()
    cleaned = unit.replace("µ", "u").replace("μ", "u")
    try:
        q = ureg.Quantity(1.0, cleaned)
    except (pint.errors.UndefinedUnitError, pint.errors.DefinitionSyntaxError, ValueError,
            AttributeError, TypeError, AssertionError):
        raise InputError(file, f"column {col!r}", f"unknown unit {unit!r}") from None
    si = "radian" if role == "phase" else _SI[role]
    target = ureg.Quantity(1.0, si)
    if q.dimensionality != target.dimensionality or (role == "phase" and cleaned.lower() in
                                                      ("", "1", "-", "%", "percent")):
        what = "an angle (deg or rad)" if role == "phase" else f"a {role}"
        raise InputError(file, f"column {col!r}", f"unit {unit!r} is not {what}")
    return float(q.to(si).magnitude)


def _numbers(df: pd.DataFrame, file: str, col: str, label: str) -> np.ndarray:
    import pandas as pd

    raw = df[col].astype(str).str.strip()
    values = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float)
    bad = ~np.isfinite(values)
    if bad.any():
        k = int(np.argmax(bad))
        text = raw.iloc[k]
        what = ("missing value" if text == "" else
                f"{text!r} is not a number (NaN)" if text.lower() in ("nan", "na", "n/a")
                else f"{text!r} is not a finite number")
        raise InputError(file, f"data row {k + 1}, column {label!r}", what)
    return values


@dataclass(frozen=True)
class Capture:
    """A validated capture in SI units on a uniform time grid.

    Attributes
    ----------
    source : str
    t_s, v_v, i_a : ndarray, shape (n,)
        Time [s] (uniform, fitted to the file's stamps), voltage [V], current [A].
    """

    source: str
    t_s: np.ndarray
    v_v: np.ndarray
    i_a: np.ndarray


def read_capture(path: str | Path, units: dict[str, str] | None = None) -> Capture:
    """Read and validate a capture CSV (time, voltage, current).

    Parameters
    ----------
    path : str or Path
        The CSV file (format in the module docstring).
    units : dict, optional
        Units of columns whose header carries none, e.g. ``{"time": "ms"}``.

    Returns
    -------
    Capture
        Samples in s, V, A on a uniform grid.

    Raises
    ------
    InputError
        Missing column, missing or wrong-dimension unit, a non-number or NaN (naming the
        data row), time not increasing, irregular time steps (gap or rate change), fewer
        than 8 rows.

    Notes
    -----
    Non-uniform time is refused rather than resampled: a step that departs from the
    median by more than ``TIME_JITTER`` (10 %) means the instrument lost samples or
    changed rate, and a waveform with a hole is not a steady state one can trust.
    Smaller departures are printing jitter of the timestamps (a scope exports time with
    a few digits), so the stamps are replaced by the least-squares straight line
    :math:`t_k = t_0 + k\\,\\Delta t` through them.
    """
    file = str(path)
    df = _read_table(path)
    cols = _columns(df, file, _ROLES, ("time", "voltage", "current"), units)
    data = {}
    for role, (col, unit) in cols.items():
        factor = _unit_factor(file, col, unit, role)
        data[role] = _numbers(df, file, col, col) * factor
    t = data["time"]
    if t.size < 8:
        raise InputError(file, "", f"only {t.size} data rows; a capture needs at least one "
                         "whole cycle of samples")
    dt = np.diff(t)
    if np.any(dt <= 0):
        k = int(np.argmax(dt <= 0))
        what = "repeats" if dt[k] == 0 else "goes backwards"
        raise InputError(file, f"data row {k + 2}, column {cols['time'][0]!r}",
                         f"time {what} (must increase monotonically)")
    med = float(np.median(dt))
    dev = np.abs(dt - med) / med
    if np.any(dev > TIME_JITTER):
        k = int(np.argmax(dev > TIME_JITTER))
        raise InputError(
            file, f"data row {k + 2}, column {cols['time'][0]!r}",
            f"time step {dt[k] / med:.3g} x the median step: samples missing or the rate "
            "changed; a capture must be uniformly sampled (resampling is not attempted)")
    k = np.arange(t.size, dtype=float)
    slope, intercept = np.polyfit(k, t, 1)
    return Capture(file, intercept + slope * k, data["voltage"], data["current"])


def read_harmonic_table(path: str | Path) -> tuple[np.ndarray, np.ndarray]:
    """Read a test report's harmonic table: orders and current phasors.

    Parameters
    ----------
    path : str or Path
        CSV with ``h``, ``current [unit]`` (rms) and optionally ``phase [deg|rad]``.

    Returns
    -------
    h : ndarray of int
        Orders, as listed (1 is required; 0..50 accepted, each once).
    i_h_a : ndarray of complex
        Rms current phasors [A], phase relative to h times the voltage fundamental.

    Raises
    ------
    InputError
        Missing column or unit, non-number or NaN, non-integer or repeated order, order
        outside 0..50, no fundamental, a negative magnitude.

    Notes
    -----
    **Phase absent.** A test report often lists magnitudes only. Every order is then taken
    at 0 deg relative to h times the voltage fundamental's angle: the spectrum of a
    narrow current pulse centred on the voltage peak (a capacitor-input rectifier whose
    displacement is negligible; the Fourier coefficients of an even pulse train are real
    and, for a narrow pulse, positive). This is the conservative choice for a fleet:
    identical gadgets then add arithmetically at every order (no cancellation) and the
    displacement power factor is 1, so P = V1 I1. A report that states P or DPF should
    be entered with its phase column.
    """
    file = str(path)
    df = _read_table(path)
    wanted = {"h": ("h", {"h", "order", "n"}),
              "current": ("current", {"i", "current"}),
              "phase": ("phase", {"phase", "phi", "angle"})}
    cols = _columns(df, file, wanted, ("h", "current"), None)
    h_col = cols["h"][0]
    h = _numbers(df, file, h_col, h_col)
    if np.any(h != np.round(h)) or np.any(h < 0) or np.any(h > H_TABLE_MAX):
        k = int(np.argmax((h != np.round(h)) | (h < 0) | (h > H_TABLE_MAX)))
        raise InputError(file, f"data row {k + 1}, column {h_col!r}",
                         f"order {h[k]:g} is not an integer in 0..{H_TABLE_MAX}")
    h = h.astype(int)
    if len(set(h.tolist())) != h.size:
        dup = [x for x in h.tolist() if h.tolist().count(x) > 1][0]
        raise InputError(file, f"column {h_col!r}", f"order {dup} listed twice")
    if 1 not in h:
        raise InputError(file, f"column {h_col!r}", "no fundamental (h = 1) row")
    i_col, i_unit = cols["current"]
    mag = _numbers(df, file, i_col, i_col) * _unit_factor(file, i_col, i_unit, "current")
    if np.any(mag < 0):
        k = int(np.argmax(mag < 0))
        raise InputError(file, f"data row {k + 1}, column {i_col!r}",
                         f"negative magnitude {mag[k]:g} A (give the rms value and put the "
                         "sign in the phase)")
    if "phase" in cols:
        p_col, p_unit = cols["phase"]
        phase = _numbers(df, file, p_col, p_col) * _unit_factor(file, p_col, p_unit, "phase")
    else:
        phase = np.zeros_like(mag)
    if mag[h == 1][0] <= 0:
        raise InputError(file, f"column {i_col!r}", "the fundamental current is zero")
    return h, mag * np.exp(1j * phase)




def capture_csv(t_s: np.ndarray, v_v: np.ndarray, i_a: np.ndarray,
                comments: list[str] = ()) -> str:
    """A capture file's text: ``time [ms],voltage [V],current [mA]`` (format above).

    Values are printed with 12 significant digits, so a capture read back loses nothing
    a power analysis could see.
    """
    lines = [f"# {c}" for c in comments]
    lines.append("time [ms],voltage [V],current [mA]")
    lines += [f"{t:.12g},{v:.12g},{i:.12g}"
              for t, v, i in zip(np.asarray(t_s) * 1e3, v_v, np.asarray(i_a) * 1e3,
                                 strict=True)]
    return "\n".join(lines) + "\n"


def write_capture(path: str | Path, t_s: np.ndarray, v_v: np.ndarray, i_a: np.ndarray,
                  comments: list[str] = (), *, overwrite: bool = True,
                  option: str = "") -> None:
    """Write a capture file atomically (:func:`fleetpower.io.files.write_atomic`); an
    existing file is refused unless ``overwrite``."""
    write_atomic(path, capture_csv(t_s, v_v, i_a, comments), overwrite=overwrite,
                 option=option)
