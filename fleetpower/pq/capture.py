"""A measured supply: a voltage/current capture or a test report's harmonic table.

Gadgets nobody here designed enter a fleet through what their owners can measure: a
scope or power-analyser capture of voltage and current at the plug, or the harmonic table
of a test report. This module analyses both: it estimates the mains frequency, cuts an
integer-cycle window, finds the harmonic phasors h = 0..50 in the project's convention
and hands them to the same IEEE 1459 code as a simulated supply
(:func:`MeasuredSpectrum.power_quality`). It also holds the declared models of how a
measured gadget's current follows a site voltage that differs from the measurement's
(:func:`scale_to_voltage`).

The files are read by :mod:`fleetpower.io.capture_file` (formats documented there); this
module works on numpy arrays and imports nothing else of fleetpower. What a capture cannot
give (no whole cycle, too few samples) raises :class:`CaptureError`, which the caller turns
into a one-line :class:`~fleetpower.errors.InputError` naming the file.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from .ieee1459 import PowerQuality, power_quality
from .spectrum import H_MAX, thd_pct

# ----------------------------------------------------------------------------------
# constants of the method (each stated with its origin)
# ----------------------------------------------------------------------------------
#: IEC 61000-4-7 measurement window: 10 cycles in 50 Hz systems, 12 in 60 Hz systems
#: (about 200 ms), indexed by nominal frequency [Hz] -> cycles
IEC_WINDOW_CYCLES = {50.0: 10, 60.0: 12}
#: highest order whose resolution decides "too coarse" (IEC 61000-3-2 limits go to h = 40)
H_LIMITS = 40
#: sample rate / analysis bandwidth of FFT analysers (common practice, no source): a
#: capture resolves h = 40 credibly when fs >= 2.56 x 40 x f1
BANDWIDTH_RATIO = 2.56
#: IEC 61000-3-2 Annex A test-supply voltage harmonics, % of the fundamental (from memory):
#: 0.9 (h3), 0.4 (h5), 0.3 (h7), 0.2 (h9), 0.2 (even 2..10), 0.1 (11..40)
TEST_SUPPLY_PCT = {3: 0.9, 5: 0.4, 7: 0.3, 9: 0.2, **{h: 0.2 for h in (2, 4, 6, 8, 10)},
                   **{h: 0.1 for h in range(11, 41)}}
#: share of the current's rms not explained by h = 0..50 above which a warning is given
REST_WARN = 0.02
#: a flat top lasts at least this many samples and this fraction of a cycle ...
CLIP_MIN_SAMPLES = 3
CLIP_MIN_CYCLE_FRACTION = 0.005
#: ... in at least this fraction of the window's cycles, entered with a step of more than
#: this many quantisation steps (a quantised smooth peak is entered with one step)
CLIP_CYCLE_SHARE = 0.5
CLIP_SHOULDER_STEPS = 2.0
#: voltage harmonics used in the frequency refinement (odd distortion of a real mains)
H_FREQUENCY = 13
#: samples of the record used in the frequency refinement (the first ones; memory bound)
FREQUENCY_SAMPLES = 1 << 17
#: highest order fitted (orders above 50 up to the Nyquist frequency are fitted so that
#: they do not leak into 0..50; their power joins the totals, not the spectrum). Measured
#: by benchmarks/bench_capture_methods.py on anti-aliased captures: worst h <= 40 error
#: 5e-4 fitting to 50, 1e-5 fitting to 100, 1e-6 fitting to 400 (4x the cost)
H_FIT_CAP = 100
#: orders above the joint fit are fitted to its residual in blocks of H_FIT_CAP up to this
#: order (or the Nyquist frequency), so that a narrow pulse's harmonics are not mistaken
#: for unexplained content
H_TOP = 400
#: samples per cycle of the coherent cycle handed to the IEEE 1459 code
SYNTH_SAMPLES = 1024



class CaptureError(ValueError):
    """What a capture cannot give; ``where`` names the channel or "" (whole capture)."""

    def __init__(self, where: str, message: str):
        self.where = where
        self.message = message
        super().__init__(f"{where}: {message}" if where else message)


# ----------------------------------------------------------------------------------
# result
# ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class MeasuredSpectrum:
    """Harmonic phasors of a measured gadget and how they were obtained.

    Attributes
    ----------
    source : str
        The file read (for messages).
    f1_hz : float
        Fundamental frequency [Hz] (estimated from the voltage, or declared for a table).
    window_cycles : int
        Whole cycles analysed (0 for a harmonic table).
    window_s : float
        Length of the analysed window [s].
    method : str
        One sentence: window, phasor method, what departs from IEC 61000-4-7.
    v_h_v, i_h_a : ndarray of complex, shape (H_MAX + 1,)
        Rms phasors [V], [A], index = harmonic order, phase relative to h times the
        voltage fundamental's angle, cosine reference; orders not resolved are 0.
    v_rest_rms_v, i_rest_rms_a : float
        Rms of what h = 0..50 does not explain in the window [V], [A] (content above
        h = 50, interharmonics, noise); added to the rms values in quadrature.
    p_rest_w : float
        Mean product of the two unexplained parts [W]; added to P.
    i_peak_a : float
        Largest absolute current sample of the window [A].
    sample_rate_hz : float
        Sample rate of the capture [Hz] (0 for a table).
    h_resolved : int
        Highest order the sample rate resolves (<= 50).
    thd_v_pct : float
        Voltage THD of the capture, h = 2..50 [%].
    warnings : tuple of str
        Quality flags, one line each (clipped, too short, too coarse, voltage distorted,
        unexplained content).
    clipped : tuple of str
        Channels ("voltage", "current") with flat tops at the instrument's range.
    v_hi_v, i_hi_a : ndarray of complex
        Phasors of the fitted orders above 50 (index 0 = order 51), same reference; their
        power is already in the ``rest`` figures. Kept so that a waveform rebuilt from the
        spectrum (:func:`cycle`) holds a narrow pulse's high orders as the capture did.
    """

    source: str
    f1_hz: float
    window_cycles: int
    window_s: float
    method: str
    v_h_v: np.ndarray
    i_h_a: np.ndarray
    v_rest_rms_v: float
    i_rest_rms_a: float
    p_rest_w: float
    i_peak_a: float
    sample_rate_hz: float
    h_resolved: int
    thd_v_pct: float
    warnings: tuple[str, ...]
    clipped: tuple[str, ...] = ()
    v_hi_v: np.ndarray = dataclasses.field(default_factory=lambda: np.zeros(0, complex))
    i_hi_a: np.ndarray = dataclasses.field(default_factory=lambda: np.zeros(0, complex))

    def power_quality(self) -> PowerQuality:
        """IEEE 1459 quantities of the measured gadget (see :func:`spectrum_power_quality`)."""
        return spectrum_power_quality(self)

    def scaled(self, v_site_v: float, model: str) -> MeasuredSpectrum:
        """The same gadget on a site voltage ``v_site_v`` [V rms] (:func:`scale_to_voltage`)."""
        v_h, i_h, k_v, k_i = scale_to_voltage(self.v_h_v, self.i_h_a, v_site_v, model)
        note = (f"scaled from {abs(self.v_h_v[1]):.1f} V to {v_site_v:.1f} V as {model} "
                f"(current x {k_i:.4f})")
        return dataclasses.replace(
            self,
            v_h_v=v_h,
            i_h_a=i_h,
            v_hi_v=self.v_hi_v * k_v,
            i_hi_a=self.i_hi_a * k_i,
            v_rest_rms_v=self.v_rest_rms_v * k_v,
            i_rest_rms_a=self.i_rest_rms_a * k_i,
            p_rest_w=self.p_rest_w * k_v * k_i,
            i_peak_a=self.i_peak_a * k_i,
            method=f"{self.method}; {note}",
        )


# ----------------------------------------------------------------------------------
# analysis
# ----------------------------------------------------------------------------------
def _design_matrix(t: np.ndarray, omega: float, h_max: int, h_lo: int = 0) -> np.ndarray:
    """Columns [1,] cos(hωt), sin(hωt) for h = max(h_lo, 1)..h_max (the 1 when h_lo = 0)."""
    ph = np.outer(t, omega * np.arange(max(h_lo, 1), h_max + 1))
    cols = [np.ones((t.size, 1))] if h_lo == 0 else []
    return np.hstack(cols + [np.cos(ph), np.sin(ph)])


def _lsq(t: np.ndarray, x: np.ndarray, omega: float, h_max: int, h_lo: int = 0,
         chunk: int = 4096) -> np.ndarray:
    """Least-squares coefficients [a0,] a_lo..a_H, b_lo..b_H of x(t) (x may be 2-D).

    Normal equations accumulated in chunks (the basis is near-orthogonal over whole
    cycles, so they are well conditioned), solved by ``numpy.linalg.solve``.
    """
    m = 2 * (h_max - max(h_lo, 1) + 1) + (1 if h_lo == 0 else 0)
    g = np.zeros((m, m))
    r = np.zeros((m,) + x.shape[1:])
    for s in range(0, t.size, chunk):
        a = _design_matrix(t[s:s + chunk], omega, h_max, h_lo)
        g += a.T @ a
        r += a.T @ x[s:s + chunk]
    return np.linalg.solve(g, r)


def _model(t: np.ndarray, omega: float, h_max: int, c: np.ndarray, h_lo: int = 0,
           chunk: int = 4096) -> np.ndarray:
    """The fitted series at t (chunked)."""
    return np.concatenate([_design_matrix(t[s:s + chunk], omega, h_max, h_lo) @ c
                           for s in range(0, t.size, chunk)])


def _coef_to_phasors(c: np.ndarray, h_max: int) -> np.ndarray:
    """[a0, a_h, b_h] -> complex rms phasors, index = order (cosine reference).

    a cos(hωt) + b sin(hωt) = Re{(a − jb) e^{jhωt}}, so the rms phasor is (a − jb)/√2.
    """
    out = np.zeros((h_max + 1,) + c.shape[1:], dtype=complex)
    out[0] = c[0]
    out[1:] = (c[1:h_max + 1] - 1j * c[h_max + 1:]) / np.sqrt(2.0)
    return out


def _crossings(t: np.ndarray, v: np.ndarray, rising: bool) -> np.ndarray:
    """Interpolated zero crossings of v, with a hysteresis of 10 % of the peak.

    A crossing counts when the signal came from below −10 % of its peak since the last
    one counted and reaches +10 % after it; of several sample-level crossings on the way
    (noise near zero) the last is taken.
    """
    x = (v - v.mean()) * (1.0 if rising else -1.0)
    hyst = 0.1 * np.max(np.abs(x))
    n = x.size
    cand = np.flatnonzero((x[:-1] < 0) & (x[1:] >= 0))
    last_low = np.maximum.accumulate(np.where(x < -hyst, np.arange(n), -1))
    high_idx = np.where(x > hyst, np.arange(n), n)
    next_high = np.minimum.accumulate(high_idx[::-1])[::-1]
    out, prev = [], -1
    for j, k in enumerate(cand):
        if last_low[k] <= prev or next_high[k] >= n:
            continue
        if j + 1 < cand.size and cand[j + 1] < next_high[k]:
            continue  # a later crossing comes before the signal is clearly high
        out.append(t[k] - x[k] * (t[k + 1] - t[k]) / (x[k + 1] - x[k]))
        prev = k
    return np.asarray(out)


def estimate_frequency(t_s: np.ndarray, v_v: np.ndarray, f_hint_hz: float | None = None
                       ) -> float:
    """Fundamental frequency [Hz] of a sampled voltage.

    Parameters
    ----------
    t_s, v_v : ndarray
        Uniform time [s] and voltage [V].
    f_hint_hz : float, optional
        Nominal frequency, used only when the capture has too few zero crossings.

    Returns
    -------
    float

    Notes
    -----
    1. Zero crossings (rising and falling, hysteresis 10 % of the peak so noise cannot
       add crossings) are located by linear interpolation between the samples around
       them; the period is the slope of a straight line fitted through the crossing
       times of each kind against their count (a common slope, one intercept per kind).
    2. Refinement: Gauss-Newton on the least-squares fit of
       :math:`v(t) = a_0 + \\sum_{h\\le 13} a_h\\cos h\\omega t + b_h\\sin h\\omega t`
       over the whole record with ω as the extra unknown (the four-parameter sine fit of
       IEEE Std 1057 extended to the odd distortion of a real mains). The Jacobian column
       of ω is :math:`\\sum_h h t(-a_h\\sin h\\omega t + b_h\\cos h\\omega t)`; t is taken
       from the record's centre so it is near-orthogonal to the rest.

    References
    ----------
    .. [1] IEEE Std 1057-2017, "IEEE Standard for Digitizing Waveform Recorders",
       four-parameter (frequency-estimating) sine fit.
    """
    rising, falling = _crossings(t_s, v_v, True), _crossings(t_s, v_v, False)
    rows, cols, y = [], [], []
    for kind, tc in enumerate((rising, falling)):
        for n, tk in enumerate(tc):
            rows.append(n)
            cols.append(kind)
            y.append(tk)
    if len(rising) >= 2 or len(falling) >= 2:
        a = np.zeros((len(y), 3))
        a[:, 0] = rows
        a[np.arange(len(y)), 1 + np.asarray(cols)] = 1.0
        used = [j for j in range(3) if a[:, j].any()]
        sol = np.linalg.lstsq(a[:, used], np.asarray(y), rcond=None)[0]
        period = float(sol[0])
    elif f_hint_hz:
        period = 1.0 / f_hint_hz
    else:
        raise CaptureError("voltage", "fewer than two zero crossings in the same "
                         "direction: the capture holds no whole cycle of the voltage (or "
                         "declare its mains frequency)")
    omega = 2.0 * np.pi / period
    t_s, v_v = t_s[:FREQUENCY_SAMPLES], v_v[:FREQUENCY_SAMPLES]
    tc = t_s - 0.5 * (t_s[0] + t_s[-1])
    h_max = int(min(H_FREQUENCY, np.floor(0.5 * np.pi / (omega * np.median(np.diff(t_s))))))
    h_max = max(h_max, 1)
    for _ in range(8):
        c = _lsq(tc, v_v, omega, h_max)
        a, b = c[1:h_max + 1], c[h_max + 1:]
        hh = np.arange(1, h_max + 1)
        ph = np.outer(tc, omega * hh)
        d = (tc[:, None] * hh * (-a * np.sin(ph) + b * np.cos(ph))).sum(axis=1)
        resid = v_v - _model(tc, omega, h_max, c)
        step = float(d @ resid / (d @ d)) if d @ d > 0 else 0.0
        omega += step
        if abs(step) < 1e-13 * omega:
            break
    return float(omega / (2.0 * np.pi))


def window_cycles(f1_hz: float, cycles_available: float) -> tuple[int, bool]:
    """Whole cycles to analyse and whether the IEC 61000-4-7 window was achieved.

    The IEC window is 10 cycles for a 50 Hz system and 12 for 60 Hz (about 200 ms); the
    nominal system is the one nearer to ``f1_hz``. A shorter capture gives its largest
    whole number of cycles.
    """
    nominal = min(IEC_WINDOW_CYCLES, key=lambda f: abs(f - f1_hz))
    n_iec = IEC_WINDOW_CYCLES[nominal]
    n_avail = int(np.floor(cycles_available + 1e-9))
    return (n_iec, True) if n_avail >= n_iec else (n_avail, False)


def _flat_tops(x: np.ndarray, per_cycle: float, n_cycles: int) -> bool:
    """Does x sit at its extreme value in flat runs (clipping at the instrument's range)?

    A run of equal samples at the channel's maximum (or minimum) that lasts at least
    ``CLIP_MIN_SAMPLES`` samples and ``CLIP_MIN_CYCLE_FRACTION`` of a cycle, found in
    at least half the cycles, and entered from a sample more than ``CLIP_SHOULDER_STEPS``
    quantisation steps away. A smooth peak read by a coarse converter also gives a run of
    equal codes, but it is entered one step at a time.
    """
    u = np.unique(x)
    if u.size < 3:
        return False
    q = float(np.min(np.diff(u)))  # quantisation step (or the print resolution)
    need = max(CLIP_MIN_SAMPLES, int(np.ceil(CLIP_MIN_CYCLE_FRACTION * per_cycle)))
    for extreme in (u[-1], u[0]):
        at = x == extreme
        edges = np.diff(np.concatenate([[0], at.astype(int), [0]]))
        starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
        long = [(s, e) for s, e in zip(starts, ends, strict=True) if e - s >= need]
        sharp = [(s, e) for s, e in long
                 if (s > 0 and abs(x[s - 1] - extreme) > CLIP_SHOULDER_STEPS * q)
                 or (e < x.size and abs(x[e] - extreme) > CLIP_SHOULDER_STEPS * q)]
        if len(sharp) >= max(1, int(np.ceil(CLIP_CYCLE_SHARE * n_cycles))):
            return True
    return False


def analyse_capture(t_s: np.ndarray, v_v: np.ndarray, i_a: np.ndarray,
                    f_hint_hz: float | None = None, source: str = "<capture>"
                    ) -> MeasuredSpectrum:
    """Harmonic phasors h = 0..50 of a capture, with its quality flags.

    Parameters
    ----------
    t_s, v_v, i_a : ndarray, shape (n,)
        Uniform time [s], line-to-neutral voltage [V] and line current (consumer sign)
        [A], e.g. from :func:`fleetpower.io.capture_file.read_capture`.
    f_hint_hz : float, optional
        Nominal mains frequency [Hz], used only to start the frequency estimate of a
        capture with fewer than two zero crossings of one kind.

    Returns
    -------
    MeasuredSpectrum

    source : str
        Name of the capture, kept in the result.

    Raises
    ------
    CaptureError
        When the capture holds no whole cycle, or too few samples per cycle to resolve
        even the fundamental.

    Notes
    -----
    **Frequency** from the voltage (:func:`estimate_frequency`).

    **Window** (IEC 61000-4-7): the first N whole cycles of the estimated frequency,
    N = 10 at 50 Hz or 12 at 60 Hz when the capture is that long, else its largest whole
    number of cycles (:func:`window_cycles`); the method text says which.

    **Phasors.** IEC 61000-4-7 takes a DFT of a window synchronised to the mains (the
    instrument's sampling locked to f1), so that order h falls on bin N·h. A capture from
    a free-running instrument is not synchronised: the window holds a non-integer number
    of samples. Two ways to recover coherence were compared on synthetic captures with a
    closed-form spectrum (``benchmarks/bench_capture_methods.py``): cubic-spline
    resampling to a coherent grid followed by an FFT, and an exact-frequency least-squares
    DFT: the least-squares fit over the window's samples of

    .. math:: x(t) = a_0 + \\sum_{h=1}^{H} a_h \\cos h\\omega_1 t + b_h \\sin h\\omega_1 t,

    H = min(50, the highest order below the Nyquist frequency). For a band-limited
    signal it is exact whatever the sample alignment; over whole cycles the basis is
    near-orthogonal, so it equals the DFT at the harmonic frequencies. It was the more
    accurate (the spline's error grows as (hω/fs)^4) and is used. The rms phasor of order h
    is :math:`(a_h - j b_h)/\\sqrt 2`; all orders are then rotated by
    :math:`-h\\,\\arg V_1` (the project's phase reference).

    **Departure from IEC 61000-4-7:** harmonic groups (the order's bin plus half of the
    interharmonic bins around it) are not formed: the phasor of each order is kept (a fleet
    sums phasors), and what the orders h = 0..50 do not explain is measured as the rms of
    the fit's residual over the window and reported (``i_rest_rms_a``; warning above 2 %
    of the current's rms). That residual also keeps the rms values and P true to the
    samples: :math:`I^2 = \\sum_h |I_h|^2 + I_{rest}^2`,
    :math:`P = \\sum_h \\mathrm{Re}\\,V_h I_h^* + \\overline{v_{rest} i_{rest}}`.

    **Quality flags:** clipped channels (:func:`_flat_tops`); a window shorter than IEC's;
    a sample rate below 2.56 × 40 × f1 (h = 40 not resolved with an FFT analyser's usual
    margin; common practice, no source); voltage harmonics above the IEC 61000-3-2
    Annex A test-supply levels (the measured current then reflects a distorted voltage);
    unexplained content above 2 %.

    References
    ----------
    .. [1] IEC 61000-4-7:2002+A1:2008, "Testing and measurement techniques - General guide
       on harmonics and interharmonics measurements and instrumentation", clause 4
       (window of 10/12 cycles, grouping).
    .. [2] IEEE Std 1459-2010 for the power quantities computed from the phasors.
    .. [3] IEC 61000-3-2:2018, Annex A (test-supply voltage), from memory.
    """
    file = source
    t, v, i = (np.asarray(x, dtype=float) for x in (t_s, v_v, i_a))
    dt = float(t[1] - t[0])
    fs = 1.0 / dt
    f1 = estimate_frequency(t, v, f_hint_hz)
    if not (np.isfinite(f1) and f1 > 0):
        raise CaptureError("voltage", "the mains frequency cannot be estimated")
    span = t.size * dt  # each sample stands for one interval
    n_cyc, iec = window_cycles(f1, span * f1)
    if n_cyc < 1:
        raise CaptureError("", f"the capture holds no whole cycle: it spans "
                         f"{span * f1:.2f} cycles of {f1:.3f} Hz")
    h_nyq = int(np.ceil(fs / (2.0 * f1)) - 1)  # highest order below the Nyquist frequency
    h_res = min(H_MAX, h_nyq)
    h_fit = min(H_FIT_CAP, h_nyq - 1) if h_nyq > H_MAX + 1 else h_res
    if h_res < 1:
        raise CaptureError("time", f"sample rate {fs:g} Hz cannot resolve the "
                         f"{f1:.3f} Hz fundamental")
    t_win = n_cyc / f1
    sel = (t - t[0]) < t_win - 0.5 * dt
    tw = t[sel] - t[0]
    x = np.column_stack([v[sel], i[sel]])
    omega = 2.0 * np.pi * f1
    c = _lsq(tw, x, omega, h_fit)
    ph = _coef_to_phasors(c, h_fit)
    resid = x - _model(tw, omega, h_fit, c)
    # orders above the joint fit, up to H_TOP, fitted to the residual block by block (one
    # pass suffices: the blocks are near-orthogonal over whole cycles)
    above = [ph[H_MAX + 1:]]
    h_top = min(H_TOP, h_nyq - 1)
    for lo in range(h_fit + 1, h_top + 1, H_FIT_CAP):
        hi = min(lo + H_FIT_CAP - 1, h_top)
        cb = _lsq(tw, resid, omega, hi, lo)
        resid = resid - _model(tw, omega, hi, cb, lo)
        m = hi - lo + 1
        above.append((cb[:m] - 1j * cb[m:]) / np.sqrt(2.0))
    h_fitted = max(h_fit, h_top)
    above = np.vstack(above)
    # what orders above 50 and the residual carry, kept for the rms values and P
    rest_ms = np.sum(np.abs(above) ** 2, axis=0) + np.mean(resid**2, axis=0)
    p_rest = float(np.sum((above[:, 0] * np.conj(above[:, 1])).real)
                   + np.mean(resid[:, 0] * resid[:, 1]))
    ph = np.vstack([ph[: H_MAX + 1], np.zeros((max(0, H_MAX + 1 - ph.shape[0]), 2))])
    vh, ih = ph[:, 0], ph[:, 1]
    ref = np.angle(vh[1])
    rot = np.exp(-1j * ref * np.arange(H_MAX + 1))
    vh, ih = vh * rot, ih * rot
    hi = above * np.exp(-1j * ref * np.arange(H_MAX + 1, H_MAX + 1 + above.shape[0]))[:, None]

    warnings: list[str] = []
    per_cycle = fs / f1
    clipped = tuple(name for name, chan in (("voltage", v[sel]), ("current", i[sel]))
                    if _flat_tops(chan, per_cycle, n_cyc))
    for name in clipped:
        warnings.append(f"{name} clipped: flat tops at the instrument's range; figures "
                        "from this capture understate its peaks and harmonics")
    if not iec:
        nominal = min(IEC_WINDOW_CYCLES, key=lambda f: abs(f - f1))
        warnings.append(f"capture too short for the IEC 61000-4-7 window "
                        f"({IEC_WINDOW_CYCLES[nominal]} cycles at {nominal:g} Hz): "
                        f"{n_cyc} whole cycle(s) used")
    if fs < BANDWIDTH_RATIO * H_LIMITS * f1:
        warnings.append(f"sample rate {fs:.0f} Hz too coarse for h = {H_LIMITS} "
                        f"(needs >= {BANDWIDTH_RATIO * H_LIMITS * f1:.0f} Hz); orders "
                        f"resolved up to h = {h_res}")
    thd_v = float(thd_pct(vh))
    v1 = abs(vh[1])
    over = [(h, 100.0 * abs(vh[h]) / v1) for h, lim in TEST_SUPPLY_PCT.items()
            if h <= h_res and 100.0 * abs(vh[h]) / v1 > lim]
    if over:
        h_w, pct = max(over, key=lambda hp: hp[1] / TEST_SUPPLY_PCT[hp[0]])
        warnings.append(f"voltage distorted: THD_V {thd_v:.2f} % (h{h_w} at {pct:.2f} % "
                        f"exceeds the {TEST_SUPPLY_PCT[h_w]} % of an IEC 61000-3-2 test "
                        "supply); the current reflects this voltage")
    rest_rms = np.sqrt(rest_ms)
    resid_i = float(np.sqrt(np.mean(resid[:, 1] ** 2)))
    i_rms = float(np.sqrt(np.sum(np.abs(ih) ** 2) + rest_ms[1]))
    if i_rms > 0 and resid_i > REST_WARN * i_rms:
        warnings.append(f"{100 * resid_i / i_rms:.1f} % of the current's rms is not a "
                        f"harmonic h <= {h_fitted} of {f1:.3f} Hz (interharmonics, switching "
                        "ripple, noise or a load that changed during the capture)")
    window = (f"IEC 61000-4-7 window of {n_cyc} cycles" if iec
              else f"{n_cyc} whole cycle(s), shorter than the IEC 61000-4-7 window")
    method = (f"f1 {f1:.4f} Hz from the voltage (zero crossings, least-squares refined); "
              f"{window} ({1e3 * t_win:.1f} ms, {int(sel.sum())} samples at {fs:.0f} Hz); "
              f"phasors h = 0..{h_res} by exact-frequency least-squares DFT (fit to "
              f"h = {h_fitted}), no harmonic grouping")
    return MeasuredSpectrum(
        source=file,
        f1_hz=f1,
        window_cycles=n_cyc,
        window_s=t_win,
        method=method,
        v_h_v=vh,
        i_h_a=ih,
        v_rest_rms_v=float(rest_rms[0]),
        i_rest_rms_a=float(rest_rms[1]),
        p_rest_w=p_rest,
        i_peak_a=float(np.max(np.abs(i[sel]))),
        sample_rate_hz=fs,
        h_resolved=h_res,
        thd_v_pct=thd_v,
        warnings=tuple(warnings),
        clipped=clipped,
        v_hi_v=hi[:, 0].copy(),
        i_hi_a=hi[:, 1].copy(),
    )


def spectrum_from_table(h: np.ndarray, i_h_a: np.ndarray, v_rms_v: float, f1_hz: float,
                        source: str = "<table>") -> MeasuredSpectrum:
    """A harmonic table as a :class:`MeasuredSpectrum` on a sinusoidal voltage.

    Parameters
    ----------
    h : ndarray of int
        Orders listed (0..50).
    i_h_a : ndarray of complex
        Rms current phasors [A] relative to h times the voltage fundamental's angle.
    v_rms_v : float
        Test voltage [V rms], taken as sinusoidal (a test report's supply meets
        IEC 61000-3-2 Annex A, whose harmonics are a fraction of a per cent).
    f1_hz : float
        Test frequency [Hz].

    Returns
    -------
    MeasuredSpectrum
        Orders not listed are zero; nothing unexplained (the table is all there is).
    """
    vh = np.zeros(H_MAX + 1, dtype=complex)
    vh[1] = v_rms_v
    ih = np.zeros(H_MAX + 1, dtype=complex)
    ih[np.asarray(h, dtype=int)] = i_h_a
    ih[0] = ih[0].real  # a DC row: phase 0 or 180 deg gives its sign
    cycle = _synthesise(ih, f1_hz)
    return MeasuredSpectrum(
        source=source, f1_hz=float(f1_hz), window_cycles=0, window_s=0.0,
        method=f"harmonic table, orders {_orders_text(h)} "
               f"on a sinusoidal {v_rms_v:g} V {f1_hz:g} Hz supply",
        v_h_v=vh, i_h_a=ih, v_rest_rms_v=0.0, i_rest_rms_a=0.0, p_rest_w=0.0,
        i_peak_a=float(np.max(np.abs(cycle))), sample_rate_hz=0.0,
        h_resolved=int(np.max(h)), thd_v_pct=0.0, warnings=(),
    )


def _orders_text(h: np.ndarray) -> str:
    """Listed orders as runs: "1..40" or "1, 3, 5..9"."""
    hs = sorted(int(x) for x in h)
    runs, start = [], hs[0]
    for a, b in zip(hs, hs[1:] + [None], strict=True):
        if b != a + 1:
            runs.append(str(start) if start == a else f"{start}..{a}")
            start = b
    return ", ".join(runs)


def _synthesise(x_h: np.ndarray, f1_hz: float, n: int = SYNTH_SAMPLES) -> np.ndarray:
    """One coherent cycle of n samples from rms phasors (index = order, cosine ref.)."""
    spec = np.zeros(n // 2 + 1, dtype=complex)
    m = min(x_h.size, n // 2)
    spec[:m] = x_h[:m] * n / np.sqrt(2.0)
    spec[0] = x_h[0].real * n
    return np.fft.irfft(spec, n)


def cycle(spec: MeasuredSpectrum, n: int = SYNTH_SAMPLES
          ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """One coherent cycle (time [s], voltage [V], current [A]) rebuilt from a spectrum.

    Orders 0..50 and the fitted orders above 50 (as far as n samples resolve them); the
    unexplained residual (interharmonics, noise) is not a periodic waveform and is left
    out.
    """
    v = _synthesise(np.concatenate([spec.v_h_v, spec.v_hi_v]), spec.f1_hz, n)
    i = _synthesise(np.concatenate([spec.i_h_a, spec.i_hi_a]), spec.f1_hz, n)
    return np.arange(n) / (n * spec.f1_hz), v, i


def repeat_cycle(t_s: np.ndarray, v_v: np.ndarray, i_a: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A steady-state cycle repeated over the IEC 61000-4-7 window (10 cycles at 50 Hz,
    12 at 60 Hz), as a capture of it would record it.

    Parameters
    ----------
    t_s, v_v, i_a : ndarray, shape (n,)
        One cycle sampled uniformly, ``t_s[k] = k T / n`` [s], voltage [V], current [A].

    Returns
    -------
    t_s, v_v, i_a : ndarray, shape (N n,)
        N whole cycles, N from :func:`window_cycles` at f = 1/T.
    """
    n = t_s.size
    dt = float(t_s[1] - t_s[0])
    f_hz = 1.0 / (n * dt)
    cycles, _ = window_cycles(f_hz, 1e6)
    return np.arange(n * cycles) * dt, np.tile(v_v, cycles), np.tile(i_a, cycles)


def spectrum_power_quality(spec: MeasuredSpectrum) -> PowerQuality:
    """IEEE 1459 quantities of a measured spectrum, by the project's own code.

    Parameters
    ----------
    spec : MeasuredSpectrum

    Returns
    -------
    PowerQuality

    Notes
    -----
    One coherent cycle is synthesised from the phasors h = 0..50 (voltage fundamental at
    0 rad, so the convention is untouched) and passed to
    :func:`fleetpower.analysis.power_quality`, which computes the fundamental, THD and
    IEEE 1459 quantities exactly as for a simulated supply. The totals that the orders
    h <= 50 do not hold are then restored from the capture's residual:
    :math:`V^2 = V_{fit}^2 + V_{rest}^2`, :math:`I^2 = I_{fit}^2 + I_{rest}^2`,
    :math:`P = P_{fit} + \\overline{v_{rest} i_{rest}}`, and S = VI, N, PF and
    :math:`D_I = V_1\\sqrt{I^2 - I_1^2}` follow (IEEE 1459-2010 clause 3.2.2). The peak
    current is the largest sample in the window (for a table: of the synthesised cycle).

    References
    ----------
    .. [1] IEEE Std 1459-2010, clause 3.2.2 (single-phase nonsinusoidal).
    """
    v = _synthesise(spec.v_h_v, spec.f1_hz)
    i = _synthesise(spec.i_h_a, spec.f1_hz)
    pq = power_quality(v, i)
    v_rms = float(np.hypot(pq.v_rms_v, spec.v_rest_rms_v))
    i_rms = float(np.hypot(pq.i_rms_a, spec.i_rest_rms_a))
    p = pq.p_w + spec.p_rest_w
    s = v_rms * i_rms
    i_h_rms = float(np.sqrt(max(i_rms * i_rms - pq.i1_rms_a**2, 0.0)))
    return dataclasses.replace(
        pq,
        v_rms_v=v_rms,
        i_rms_a=i_rms,
        i_peak_a=spec.i_peak_a,
        crest_factor=spec.i_peak_a / i_rms if i_rms > 0 else 0.0,
        p_w=p,
        s_va=s,
        n_var=float(np.sqrt(max(s * s - p * p, 0.0))),
        pf=p / s if s > 0 else 1.0,
        d_i_var=pq.v1_rms_v * i_h_rms,
    )


# ----------------------------------------------------------------------------------
# a measured gadget on another mains voltage
# ----------------------------------------------------------------------------------
#: the declared models of how a gadget's current follows the supply voltage
SCALING_MODELS = ("constant-current", "constant-power", "constant-impedance")
#: default model by kind of gadget (common practice, no source; see scale_to_voltage)
DEFAULT_SCALING = {
    "switch-mode": "constant-power",
    "capacitive-dropper": "constant-impedance",
    "resistive": "constant-impedance",
    "linear": "constant-current",
    "unknown": "constant-current",
}


def scale_to_voltage(v_h_v: np.ndarray, i_h_a: np.ndarray, v_site_v: float, model: str
                     ) -> tuple[np.ndarray, np.ndarray, float, float]:
    """Voltage and current phasors of a measured gadget on a site voltage.

    Parameters
    ----------
    v_h_v, i_h_a : ndarray of complex
        Measured rms phasors [V], [A] (index = order).
    v_site_v : float
        The site's voltage [V rms], taken as the new fundamental.
    model : str
        One of :data:`SCALING_MODELS`.

    Returns
    -------
    v_h_v, i_h_a : ndarray of complex
        Scaled phasors (every order by the same factor, phases unchanged).
    k_v, k_i : float
        Voltage ratio k = V_site / V1_measured and the current factor applied.

    Notes
    -----
    With k = V_site / V1 (the measured fundamental):

    - **constant current**, I' = I, P' = k P: a load whose current is set downstream
      (a linear regulator fed from a transformer or rectifier draws its load current);
      the neutral default for an undeclared kind, since it lies between the other two and
      is in error by at most the voltage deviation either way;
    - **constant power**, I' = I / k, P' = P: a regulated switch-mode supply draws the
      power its load needs whatever the mains (default for ``switch-mode``);
    - **constant impedance**, I' = k I, P' = k² P: a resistor, a heater, a capacitive
      dropper whose series capacitor sets the current (default for ``resistive`` and
      ``capacitive-dropper``).

    The whole spectrum is scaled by one factor: the waveform's shape, hence THD, PF and
    DPF, is kept. That is a departure from physics (a rectifier's conduction angle
    changes with the voltage); for the ±10 % of a public supply it is a first-order
    model, the one a load-flow study's ZIP load model uses.

    References
    ----------
    .. [1] IEEE Task Force on Load Representation for Dynamic Performance, "Load
       representation for dynamic performance analysis", IEEE Trans. Power Systems
       8(2), 1993 (the constant-impedance/current/power "ZIP" static load model), from
       memory.
    """
    if model not in SCALING_MODELS:
        raise ValueError(f"unknown voltage-scaling model {model!r}")
    v1 = abs(v_h_v[1])
    if not v1 > 0 or not v_site_v > 0:
        raise ValueError("voltages must be positive")
    k = float(v_site_v / v1)
    k_i = {"constant-current": 1.0, "constant-power": 1.0 / k, "constant-impedance": k}[model]
    return np.asarray(v_h_v) * k, np.asarray(i_h_a) * k_i, k, k_i
