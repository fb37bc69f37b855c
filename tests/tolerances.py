"""Per-quantity tolerances of the engine's acceptance tests, kept in one place.

The acceptance figures come from the engine's issue: "P, I rms and h1..h15 within 1 %,
harmonics within 1 % of I1; energy balance within 0.5 %". The others are stated where
they are defined, with their origin.
"""

# --- engine against the brute-force Radau reference (issue acceptance) -----------------
#: active power, relative to the reference's P
REL_P = 0.01
#: rms line current, relative to the reference's I rms
REL_I_RMS = 0.01
#: each harmonic phasor h = 0..15 (complex difference), as a fraction of the reference I1
HARMONIC_OF_I1 = 0.01
#: highest harmonic order compared
H_COMPARED = 15
#: energy balance P_in = delivered + losses (+ source resistance), % of P_in
BALANCE_PCT = 0.5
#: each loss term and the delivered power against the reference, as a fraction of P_in
#: (the P budget of the acceptance, applied to its parts)
LOSS_OF_P_IN = 0.01

#: a spread's accuracy setting (256 steps per cycle, periodicity 1e-6) against the
#: reference and against unit's 2048 steps, relative (P, I rms, S, V dc) or as a fraction
#: of I1 (harmonics) / of P in (delivered power): its measured worst error is 0.36 % of
#: I rms (benchmarks/bench_accuracy.py, DEVELOPERS.md "Accuracy per cost"), so 0.5 %
SPREAD_SETTING_REL = 0.005

# --- the reference's own convergence ---------------------------------------------------
#: largest cycle-to-cycle change of the reference's line current, relative to its peak,
#: before its last cycle is used: three orders below the 1 % acceptance so the
#: reference's remaining start-up transient cannot decide a comparison
REF_CYCLE_CHANGE = 1e-5
#: the reference's own energy balance (Radau at rtol 1e-9; a settled cycle stores no
#: energy), fraction of P_in: two orders below the acceptance
REF_BALANCE = 5e-5

# --- trade figures ---------------------------------------------------------------------
#: a capacitive dropper's power factor stays below this (common practice, no source)
DROPPER_PF_MAX = 0.1
#: a quoted reactance like "803 ohm" is rounded to the ohm [ohm]
XC_QUOTED_OHM = 0.5
#: a quoted current like "74.6 mA" is rounded to 0.1 mA [A]
I_QUOTED_A = 0.05e-3

# --- analysis against closed-form Fourier series --------------------------------------
#: relative error of the FFT of a sampled, band-limited or 1/n^2-decaying waveform
#: (aliasing of a 1/n^2 tail at 4096 samples is ~1e-7; rounding ~1e-13)
FFT_REL = 1e-6
#: relative error for a square wave, whose 1/n tail aliases back by ~1/N (N = 65536)
SQUARE_REL = 1e-4
#: "PF = 1 / THD = 0" of an ideal waveform, up to rounding
EXACT = 1e-9

# --- fleets ---------------------------------------------------------------------------
#: sums that are exact algebra (P = sum of counts x unit P, N identical units = N x one)
#: up to floating-point rounding
REL_EXACT = 1e-9
#: rms from a truncated (h <= 50) spectrum against rms from time samples (Parseval)
REL_PARSEVAL = 1e-6
#: a cancelled phasor (balanced fundamentals in the neutral), relative to the uncancelled
CANCEL_REL = 1e-9
#: the hand estimate Q = -N V^2 w C of a dropper fleet against the simulated circuit
#: (the estimate ignores the clamp and the series resistor, a few per cent)
REL_HAND_Q = 0.05

# --- measured supplies (captures and harmonic tables) -------------------------------
#: I rms, P, DPF and each harmonic h = 1..40 of a synthetic capture against its
#: closed-form series, relative (the measured-supply issue's acceptance: 0.5 %)
CAPTURE_REL = 0.005
#: harmonics are compared when above this fraction of the fundamental (same acceptance)
CAPTURE_H_FLOOR = 0.01
#: the estimated mains frequency, relative: a clean capture gives ~1e-9; 1e-6 leaves room
#: for 12-bit quantisation and still keeps the window's phase drift at h = 40 below 0.03 %
FREQ_REL = 1e-6
#: a harmonic table written from a spectrum (10 significant digits) and read back
TABLE_REL = 1e-7

# --- measured gadgets (issue 13 acceptance) --------------------------------------------
#: a modelled design exported with --waveform-csv and read back as a measured design:
#: P, I rms, PF, harmonics and the fleet figures "within 0.1 %" (issue acceptance 2)
ROUND_TRIP_REL = 1e-3
#: a voltage-scaling model applied to a spectrum is arithmetic: the scaled figures equal
#: the hand-derived factor times the measured ones to rounding
SCALING_REL = 1e-9
