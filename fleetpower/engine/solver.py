"""Periodic steady state by shooting-Newton on the one-cycle map, for batches of variants.

Notes
-----
The circuit is a semi-explicit DAE :math:`M \\dot x = f(x, t)` with a diagonal mass
matrix (rows of zero mass are algebraic, see :mod:`fleetpower.engine.circuits`). One mains
period :math:`T` is split into ``n`` equal steps :math:`h = T/n` and integrated with the
trapezoidal rule on the differential rows while the algebraic rows are enforced at each
time point:

.. math::
    M (x_{k+1} - x_k) - \\tfrac{h}{2}\\,[f(x_{k+1}, t_{k+1}) + f(x_k, t_k)] = 0
    \\quad\\text{(differential rows)}, \\qquad f_a(x_{k+1}, t_{k+1}) = 0
    \\quad\\text{(algebraic rows)}

each solved by Newton's method. The steady state is the fixed point of the one-cycle map
:math:`\\Phi(x_0) = x_n`; it is found by Newton's method on :math:`\\Phi(x_0) - x_0 = 0`,
whose Jacobian :math:`\\partial\\Phi/\\partial x_0 - I` (the monodromy matrix less the
identity) is accumulated step by step alongside the integration from the step Jacobians
(Aprille and Trick [1]_; the same method as SPICE-family "shooting" analyses, Kundert
[2]_). Because the map is differentiated exactly, a linear circuit converges in one
iteration and a rectifier in a handful, however long its time constants are.

The samples are uniform over exactly one period, so an FFT of them is coherent.

The trapezoidal rule is second order, A-stable, and conserves the energy of a capacitor
over a period exactly in its own discrete inner product, which is why the energy
balance of :mod:`fleetpower.simulate` closes to a few parts per million.

Owns: the one-cycle integration and the shooting iteration. Knows nothing of
topologies: everything it needs per variant (the reservoir's physical upper bound
among it) arrives as numbers in the engine row (:mod:`fleetpower.engine.layout`). May
import only :mod:`fleetpower.engine` and :mod:`fleetpower.errors`.

References
----------
.. [1] T. J. Aprille and T. N. Trick, "Steady-state analysis of nonlinear circuits with
   periodic inputs", Proceedings of the IEEE 60(1), 108-114, 1972.
.. [2] K. S. Kundert, J. K. White and A. Sangiovanni-Vincentelli, "Steady-State Methods
   for Simulating Analog and Microwave Circuits", Kluwer, 1990, ch. 5.
"""

from __future__ import annotations

import math
import threading
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numba
import numpy as np
from numba import njit

from ..errors import SolverError
from .circuits import evaluate, mass_vector, probes, residual
from .layout import (
    N_PARAMS,
    N_PROBES,
    N_STATES,
    P_OMEGA,
    P_RSER,
    P_RSRC,
    P_VO_MAX,
    P_VPK,
    PROBES,
    S_VC1,
    S_VO,
)

#: the accuracy setting: samples (= integration steps) per mains cycle. Chosen by
#: measurement against the independent reference (benchmarks/bench_accuracy.py,
#: DEVELOPERS.md "Accuracy per cost"): the smallest power of two whose worst error stays
#: under 1 % of every reference tolerance (0.67 %; 1024 steps use 2.7 %, 512 8.5 %)
DEFAULT_SAMPLES_PER_CYCLE = 2048
#: steps per cycle of the coarse solve that starts the real one (0: none); measured in
#: benchmarks/bench_accuracy.py, chosen in DEVELOPERS.md "Accuracy per cost"
DEFAULT_COARSE_START = 96
#: periodicity tolerance of that coarse solve: its fixed point is only a start, within
#: the coarse grid's own discretisation error (~1e-3) of the fine one anyway
COARSE_RTOL = 1e-6
#: and of its time steps' Newton iterations
COARSE_NEWTON_RTOL = 1e-5
#: relative tolerance of the periodicity condition |x(T) - x(0)| / scale
PERIODIC_RTOL = 1e-9
MAX_SHOOTING_ITERATIONS = 80
MAX_NEWTON_ITERATIONS = 40
#: full Newton steps allowed to raise the periodicity residual in a row (watchdog)
WATCHDOG_STEPS = 3
WATCHDOG_OFF = -(10**6)  # after a watchdog restart: monotone search until progress
#: the watchdog lets a full step raise the periodicity residual only while the residual
#: is above this: nearer the fixed point (a warm start) a rise means the step crossed a
#: diode's knee too far, and halving it is cheaper than wandering (measured on spread
#: samples: DEVELOPERS.md "Accuracy per cost")
RELAXED_ABOVE = 1e-2
#: Newton step size, relative to the unknown's scale, below which a time step is accepted
#: (the accepted point's own error is then O(step^2), ~1e-12 of the scale); the cubic
#: predictor's O(h^4) error is below it at the default step, so most steps need one
#: iteration
NEWTON_RTOL = 1e-6
#: a step where the guide's own cubic predictor misses the guide's next point by more
#: than this many Newton tolerances is a device switching (a diode or zener turning on or
#: off): there the current cycle is predicted by the guide's step instead of the cubic
#: (DEVELOPERS.md "Accuracy per cost"; 1 to 10 measured alike)
GUIDE_SWITCH_TOLERANCES = 3.0

#: columns of the per-variant ``info`` row of :func:`_shoot`
N_INFO = 5
INFO_RESIDUALS = 3
INFO_JACOBIANS = 4

STATUS_OK = 0
STATUS_STEP_FAILED = 1
STATUS_NOT_PERIODIC = 2
STATUS_NAN = 3
STATUS_TEXT = {
    STATUS_OK: "converged",
    STATUS_STEP_FAILED: "a time step's Newton iteration did not converge",
    STATUS_NOT_PERIODIC: "the one-cycle map did not reach a fixed point",
    STATUS_NAN: "the solution became NaN",
}


@njit(cache=True)
def _solve_small(a, b, n):
    """Solve a x = b in place (Gaussian elimination, partial pivoting); b becomes x.

    ``b`` may have several columns. Returns False on a singular matrix.
    """
    ncol = b.shape[1]
    for k in range(n):
        piv = k
        big = abs(a[k, k])
        for r in range(k + 1, n):
            if abs(a[r, k]) > big:
                big = abs(a[r, k])
                piv = r
        if big == 0.0 or not math.isfinite(big):
            return False
        if piv != k:
            for c in range(n):
                tmp = a[k, c]
                a[k, c] = a[piv, c]
                a[piv, c] = tmp
            for c in range(ncol):
                tmp = b[k, c]
                b[k, c] = b[piv, c]
                b[piv, c] = tmp
        for r in range(k + 1, n):
            fac = a[r, k] / a[k, k]
            if fac != 0.0:
                for c in range(k, n):
                    a[r, c] -= fac * a[k, c]
                for c in range(ncol):
                    b[r, c] -= fac * b[k, c]
    for k in range(n - 1, -1, -1):
        for c in range(ncol):
            s = b[k, c]
            for j in range(k + 1, n):
                s -= a[k, j] * b[j, c]
            b[k, c] = s / a[k, k]
    return True


@njit(cache=True)
def jacobian_fd(x, t, p, f0, jac, scale):
    """Forward-difference Jacobian of the residual at ``x`` (``f0`` = residual there).

    Used by the tests as an independent check of :func:`fleetpower.engine.circuits.jacobian`.
    """
    n = N_STATES
    xp = x.copy()
    fp = np.empty(n)
    for j in range(n):
        d = 1.5e-8 * max(abs(x[j]), scale[j])
        xp[j] = x[j] + d
        residual(xp, t, p, fp)
        for i in range(n):
            jac[i, j] = (fp[i] - f0[i]) / d
        xp[j] = x[j]


@njit(cache=True)
def _consistent(x, t, p, m, scale, info):
    """Solve the algebraic rows at time ``t`` for fixed differential unknowns.

    Counts its residual and Jacobian evaluations in ``info`` (see :func:`_shoot`).
    """
    n = N_STATES
    f = np.empty(n)
    jac = np.empty((n, n))
    a = np.empty((n, n))
    b = np.empty((n, 1))
    for _ in range(4 * MAX_NEWTON_ITERATIONS):
        evaluate(x, t, p, f, jac)
        info[INFO_RESIDUALS] += 1
        info[INFO_JACOBIANS] += 1
        for i in range(n):
            for j in range(n):
                a[i, j] = jac[i, j]
            b[i, 0] = -f[i]
            if m[i] > 0.0:  # hold differential unknowns: identity rows
                for j in range(n):
                    a[i, j] = 0.0
                a[i, i] = 1.0
                b[i, 0] = 0.0
        # the size as a run-time int, as the shooting step passes it: one compiled
        # _solve_small, not a second one specialised on the constant 4 (0.4-0.6 s of compile)
        if not _solve_small(a, b, a.shape[0]):
            return False
        # limit each update to 5 % of the unknown's scale (junction-voltage limiting, as
        # SPICE does): from a reverse-biased diode the first Newton step is far too long
        worst = 0.0
        for i in range(n):
            worst = max(worst, abs(b[i, 0]) / scale[i])
        shrink = 1.0 if worst <= 0.05 else 0.05 / worst
        done = True
        for i in range(n):
            x[i] += shrink * b[i, 0]
            if abs(b[i, 0]) > 1e-12 * scale[i] + 1e-10 * abs(x[i]):
                done = False
        if done:
            return True
    return False


@njit(cache=True)
def _lu_factor(a, piv, n):
    """LU-factor ``a`` in place (Gaussian elimination, partial pivoting; L's multipliers
    below the diagonal, row swaps in ``piv``). Returns False on a singular matrix.

    The same operations in the same order as :func:`_solve_small`, so solving with
    :func:`_lu_solve` afterwards gives bit for bit its result.
    """
    for k in range(n):
        piv[k] = k
        big = abs(a[k, k])
        for r in range(k + 1, n):
            if abs(a[r, k]) > big:
                big = abs(a[r, k])
                piv[k] = r
        if big == 0.0 or not math.isfinite(big):
            return False
        pk = piv[k]
        if pk != k:
            for c in range(n):
                tmp = a[k, c]
                a[k, c] = a[pk, c]
                a[pk, c] = tmp
        for r in range(k + 1, n):
            fac = a[r, k] / a[k, k]
            a[r, k] = fac
            if fac != 0.0:
                for c in range(k + 1, n):
                    a[r, c] -= fac * a[k, c]
    return True


@njit(cache=True)
def _lu_solve(a, piv, b, n, ncol):
    """Solve with the factors of :func:`_lu_factor`; the first ``ncol`` columns of ``b``
    become the solution."""
    for k in range(n):  # every row swap first: a's rows (L with them) were swapped whole
        pk = piv[k]
        if pk != k:
            for c in range(ncol):
                tmp = b[k, c]
                b[k, c] = b[pk, c]
                b[pk, c] = tmp
    for k in range(n):
        for r in range(k + 1, n):
            fac = a[r, k]
            if fac != 0.0:
                for c in range(ncol):
                    b[r, c] -= fac * b[k, c]
    for k in range(n - 1, -1, -1):
        for c in range(ncol):
            s = b[k, c]
            for j in range(k + 1, n):
                s -= a[k, j] * b[j, c]
            b[k, c] = s / a[k, k]


@njit(cache=True)
def _one_cycle(p, x0, n_steps, m, scale, xs, tape, idx, nd, info, newton_rtol, guide,
               use_guide):
    """Integrate one period from ``x0``; store states in ``xs`` (n_steps+1, n).

    ``tape`` (a :func:`_new_tape`) receives what d x(T) / d x0 along the ``nd``
    differential directions ``idx`` is made of (the algebraic unknowns follow from them):
    the initial sensitivity and each step's factored Newton matrix and Jacobian;
    :func:`_replay_sensitivity` makes it when the shooting iteration needs it, which a
    cycle that is already periodic does not. Returns a status code. Residual and
    Jacobian evaluations are counted in ``info`` (see :func:`_shoot`).

    ``guide`` (n_steps, n), used when ``use_guide``: one period of a nearby trajectory at
    the same steps (a nominal unit's steady state). Each step is
    predicted by a cubic through the last four points, except where the guide shows a
    device switching (its own cubic misses its next point by more than
    :data:`GUIDE_SWITCH_TOLERANCES` Newton tolerances) and at the first three steps, which
    have no four points yet: there the prediction is this cycle's point plus the guide's
    step, ``x_k + (g_{k+1} - g_k)``. The predictor only sets where each step's Newton
    iteration starts, never the accepted point's tolerance.
    """
    n = N_STATES
    period = 2.0 * math.pi / p[P_OMEGA]
    h = period / n_steps
    f_old = np.empty(n)
    f_new = np.empty(n)
    jac_old = np.empty((n, n))
    jac_new = np.empty((n, n))
    a = np.empty((n, n))
    piv = np.empty(n, dtype=np.int64)
    b = np.empty((n, 1))
    rhs = np.empty((n, nd))
    tape_lu, tape_piv, tape_jac, tape_s0 = tape
    x = x0.copy()

    evaluate(x, 0.0, p, f_old, jac_old)
    info[INFO_RESIDUALS] += 1
    info[INFO_JACOBIANS] += 1
    # initial sensitivity, column c for differential unknown j = idx[c]: the
    # differential rows are the unit vector e_j, the algebraic rows follow from
    # J_aa ds_a = -J_ad e_j
    for i in range(n):
        for j in range(n):
            if m[i] > 0.0:
                a[i, j] = 1.0 if i == j else 0.0
            else:
                a[i, j] = jac_old[i, j]
        for c in range(nd):
            rhs[i, c] = 1.0 if (m[i] > 0.0 and i == idx[c]) else 0.0
    if not _lu_factor(a, piv, n):
        return STATUS_STEP_FAILED
    _lu_solve(a, piv, rhs, n, nd)
    for i in range(n):
        for c in range(nd):
            tape_s0[i, c] = rhs[i, c]

    for i in range(n):
        xs[0, i] = x[i]
    x_prev = x.copy()
    x_prev2 = x.copy()
    x_prev3 = x.copy()
    xn = np.empty(n)
    for k in range(n_steps):
        t1 = (k + 1) * h
        # predictor: the cubic through the last four points (lower orders at the first
        # steps); its error O(h^4) is below the Newton tolerance at a fine step, so most
        # steps take one Newton iteration (a quadratic's O(h^3) took two per step at 256
        # steps per cycle: DEVELOPERS.md "Accuracy per cost")
        for i in range(n):
            if k > 2:
                xn[i] = 4.0 * x[i] - 6.0 * x_prev[i] + 4.0 * x_prev2[i] - x_prev3[i]
            elif k > 1:
                xn[i] = 3.0 * x[i] - 3.0 * x_prev[i] + x_prev2[i]
            elif k == 1:
                xn[i] = 2.0 * x[i] - x_prev[i]
            else:
                xn[i] = x[i]
        if use_guide:
            # the guide is periodic: its points before k = 0 are the period's last ones
            k1 = (k + 1) % n_steps
            switching = k < 3
            for i in range(n):
                g_cubic = (4.0 * guide[k, i] - 6.0 * guide[k - 1, i]
                           + 4.0 * guide[k - 2, i] - guide[k - 3, i])
                if abs(guide[k1, i] - g_cubic) > GUIDE_SWITCH_TOLERANCES * newton_rtol * scale[i]:
                    switching = True
            if switching:
                for i in range(n):
                    xn[i] = x[i] + guide[k1, i] - guide[k, i]
        ok = False
        for _ in range(MAX_NEWTON_ITERATIONS):
            evaluate(xn, t1, p, f_new, jac_new)
            info[INFO_RESIDUALS] += 1
            info[INFO_JACOBIANS] += 1
            for i in range(n):
                if m[i] > 0.0:
                    b[i, 0] = -(m[i] * (xn[i] - x[i]) - 0.5 * h * (f_new[i] + f_old[i]))
                    for j in range(n):
                        a[i, j] = -0.5 * h * jac_new[i, j]
                    a[i, i] += m[i]
                else:
                    b[i, 0] = -f_new[i]
                    for j in range(n):
                        a[i, j] = jac_new[i, j]
            if not _lu_factor(a, piv, n):
                return STATUS_STEP_FAILED
            _lu_solve(a, piv, b, n, 1)
            done = True
            for i in range(n):
                xn[i] += b[i, 0]
                if not math.isfinite(xn[i]):
                    return STATUS_NAN
                if abs(b[i, 0]) > newton_rtol * scale[i]:
                    done = False
            if done:
                ok = True
                break
        if not ok:
            return STATUS_STEP_FAILED
        # the residual at the accepted point from its linear model f + J dx (error
        # O(|dx|^2), dx below the Newton tolerance: far below it) instead of one more
        # evaluation; the Jacobian of the last iterate serves the sensitivity (it only
        # steers the shooting iteration, never the accepted waveform).
        for i in range(n):
            acc = f_new[i]
            for j in range(n):
                acc += jac_new[i, j] * b[j, 0]
            f_new[i] = acc
        # the sensitivity's step, A_new s_{k+1} = -B_old s_k (A_new the Newton matrix of
        # the last iterate, already factored in ``a``), goes on the tape
        for i in range(n):
            tape_piv[k, i] = piv[i]
            for j in range(n):
                tape_lu[k, i, j] = a[i, j]
                tape_jac[k, i, j] = jac_old[i, j]
        for i in range(n):
            x_prev3[i] = x_prev2[i]
            x_prev2[i] = x_prev[i]
            x_prev[i] = x[i]
            x[i] = xn[i]
            xs[k + 1, i] = x[i]
            f_old[i] = f_new[i]
            for j in range(n):
                jac_old[i, j] = jac_new[i, j]
    return STATUS_OK


@njit(cache=True)
def _new_tape(n_steps, nd):
    """What :func:`_one_cycle` records for the sensitivity: per step the factored Newton
    matrix, its row swaps and the Jacobian at the step's start, and the initial
    sensitivity (n, nd)."""
    n = N_STATES
    return (np.empty((n_steps, n, n)), np.empty((n_steps, n), dtype=np.int64),
            np.empty((n_steps, n, n)), np.empty((n, nd)))


@njit(cache=True)
def _replay_sensitivity(p, n_steps, m, tape, nd, sens):
    """d x(T) / d x0 (n, nd) of the cycle last recorded on ``tape``, into ``sens``.

    The sensitivity of the trapezoidal step, ``A_new s_{k+1} = -B_old s_k`` with
    ``B_old`` the rows ``-(M + h/2 J_old)`` of the differential unknowns (zero for the
    algebraic ones), step by step from the initial sensitivity: the operations, in the
    order, of computing it alongside the integration, done only for a cycle whose
    periodicity residual calls for a shooting step (a spread sample's first cycle is
    mostly periodic already: 4 in 5 at the default setting).
    """
    n = N_STATES
    period = 2.0 * math.pi / p[P_OMEGA]
    h = period / n_steps
    tape_lu, tape_piv, tape_jac, tape_s0 = tape
    s = tape_s0.copy()
    rhs = np.empty((n, nd))
    for k in range(n_steps):
        for i in range(n):
            for c in range(nd):
                acc = 0.0
                if m[i] > 0.0:
                    acc = m[i] * s[i, c]
                    for j in range(n):
                        acc += 0.5 * h * tape_jac[k, i, j] * s[j, c]
                rhs[i, c] = acc
        _lu_solve(tape_lu[k], tape_piv[k], rhs, n, nd)
        for i in range(n):
            for c in range(nd):
                s[i, c] = rhs[i, c]
    for i in range(n):
        for c in range(nd):
            sens[i, c] = s[i, c]


@njit(cache=True)
def _periodic_norm(x0, x1, idx, nd, scale):
    worst = 0.0
    for r in range(nd):
        i = idx[r]
        worst = max(worst, abs(x1[i] - x0[i]) / scale[i])
    return worst


@njit(cache=True)
def _integrate(p, x, n_steps, m, scale, xs, tape, idx, nd, x_end, info, newton_rtol, guide,
               use_guide):
    """One cycle from ``x``; returns (status, periodicity norm) and fills ``x_end``.

    Predicted along ``guide`` when ``use_guide`` (see :func:`_one_cycle`).
    """
    status = _one_cycle(p, x, n_steps, m, scale, xs, tape, idx, nd, info, newton_rtol,
                        guide, use_guide)
    if status != STATUS_OK:
        return status, np.inf
    for i in range(x.shape[0]):
        x_end[i] = xs[n_steps, i]
    return status, _periodic_norm(x, x_end, idx, nd, scale)


@njit(cache=True)
def _differential_unknowns(m, idx):
    """Fill ``idx`` with the rows of non-zero mass; returns how many (a typed count: a
    counter started from the literal 0 in the caller made numba compile every function
    it is passed to twice, once for the literal)."""
    nd = 0
    for i in range(m.shape[0]):
        if m[i] > 0.0:
            idx[nd] = i
            nd += 1
    return nd


@njit(cache=True)
def _shoot(p, x0, n_steps, xs, out_probe, info, tols, guide, use_guide):
    """Periodic steady state of one variant. Fills ``xs``, ``out_probe`` and ``info``.

    ``guide`` (n_steps, n), when ``use_guide``, is a nearby steady state's period at the
    same steps (see :func:`_one_cycle`), the same for every cycle: the one-cycle map the
    shooting iteration solves must not change between its iterations (a guide taken from
    each previous cycle moved the accepted points by up to the Newton tolerance from one
    iteration to the next, and 2 of 120 random designs then stalled short of 1e-9).

    ``info`` = [status, shooting iterations, periodicity residual (relative), residual
    evaluations, Jacobian evaluations] (the last two counted, the cost measure of
    ``benchmarks/bench_accuracy.py``).
    """
    n = N_STATES
    rtol = tols[0]  # periodicity
    newton_rtol = tols[1]  # each time step's Newton iteration
    m = np.empty(n)
    mass_vector(p, m)
    vpk = p[P_VPK]
    r_tot = max(p[P_RSER] + p[P_RSRC], 1e-3)
    scale = np.empty(n)
    scale[0] = vpk
    scale[1] = vpk
    scale[2] = vpk
    scale[3] = min(vpk / r_tot, 10.0)
    x = x0.copy()
    info[0] = STATUS_NOT_PERIODIC
    info[1] = 0
    info[2] = np.inf
    info[INFO_RESIDUALS] = 0
    info[INFO_JACOBIANS] = 0
    if not _consistent(x, 0.0, p, m, scale, info):
        info[0] = STATUS_STEP_FAILED
        return
    idx = np.empty(n, dtype=np.int64)
    nd = _differential_unknowns(m, idx)
    sens = np.empty((n, nd))
    tape = _new_tape(n_steps, nd)
    a = np.empty((nd, nd))
    b = np.empty((nd, 1))
    xt = np.empty(n)
    xt_end = np.empty(n)
    x_best = x.copy()
    norm_best = np.inf
    watch = 0
    cycles = 0
    # the topology's physical bound on the reservoir voltage (its engine row carries it)
    vo_max = p[P_VO_MAX]

    x_end = np.empty(n)  # x(T) of the accepted iterate x
    status, norm = _integrate(p, x, n_steps, m, scale, xs, tape, idx, nd, x_end, info,
                                  newton_rtol, guide, use_guide)
    cycles += 1
    while status == STATUS_OK and norm >= rtol and cycles < MAX_SHOOTING_ITERATIONS:
        info[2] = norm
        # Newton direction on Phi(x) - x = 0; every path below ends by integrating the
        # accepted x, so xs, the tape and x_end belong to it here
        _replay_sensitivity(p, n_steps, m, tape, nd, sens)
        for r in range(nd):
            i = idx[r]
            for cc in range(nd):
                a[r, cc] = sens[i, cc] - (1.0 if r == cc else 0.0)
            b[r, 0] = -(x_end[i] - x[i])
        if not _solve_small(a, b, nd):
            for r in range(nd):
                b[r, 0] = x_end[idx[r]] - x[idx[r]]
        # no unknown moves by more than half the peak voltage at once
        lam = 1.0
        for r in range(nd):
            step = abs(b[r, 0])
            cap = 0.5 * scale[idx[r]]
            if step * lam > cap:
                lam = cap / step
        # backtracking line search on the periodicity residual (damped Newton) with a
        # watchdog: a full step may raise the residual up to WATCHDOG_STEPS times in a
        # row (Newton often passes through a worse point on its way across a diode's
        # knee); if that does not end below the residual it started from, the search
        # returns there and backtracks (Chamberlain et al., Math. Prog. Study 16, 1982).
        if watch >= WATCHDOG_STEPS:
            for i in range(n):
                x[i] = x_best[i]
            status, norm = _integrate(p, x, n_steps, m, scale, xs, tape, idx, nd, x_end, info,
                                  newton_rtol, guide, use_guide)
            cycles += 1
            watch = WATCHDOG_OFF
            continue
        accepted = False
        for ls in range(8):
            for i in range(n):
                xt[i] = x[i]
            for r in range(nd):
                xt[idx[r]] += lam * b[r, 0]
            # project onto physically reachable states (the reservoir cannot charge above
            # its clamp, nor below zero; the series capacitor not beyond the mains peak)
            xt[S_VO] = min(max(xt[S_VO], 0.0), vo_max)
            xt[S_VC1] = min(max(xt[S_VC1], -1.2 * vpk), 1.2 * vpk)
            lam *= 0.5
            if not _consistent(xt, 0.0, p, m, scale, info):
                continue
            st, trial = _integrate(p, xt, n_steps, m, scale, xs, tape, idx, nd, xt_end, info,
                                   newton_rtol, guide, use_guide)
            cycles += 1
            if st != STATUS_OK:
                continue
            decrease = trial < (1.0 - 2e-4 * lam) * norm
            relaxed = ls == 0 and 0 <= watch < WATCHDOG_STEPS and trial < 50.0 * norm and norm > RELAXED_ABOVE
            if decrease or relaxed:
                if not decrease and watch == 0:
                    for i in range(n):
                        x_best[i] = x[i]
                    norm_best = norm
                if decrease and (watch == 0 or trial < norm_best):
                    watch = 0
                elif not decrease:
                    watch += 1
                for i in range(n):
                    x[i] = xt[i]
                    x_end[i] = xt_end[i]
                norm = trial
                accepted = True
                break
        if not accepted:
            # fall back to one plain cycle from the last accepted state (a physical
            # transient, which always makes progress towards a stable steady state); its
            # end is consistent at t = T, so at t = 0 (the source is periodic): its
            # algebraic unknowns are the start the consistency solve needs (from the
            # cycle's start values it could fail where a rectifier's KCL is flat)
            for i in range(n):
                x[i] = x_end[i]
            if not _consistent(x, 0.0, p, m, scale, info):
                status = STATUS_STEP_FAILED
                break
            status, norm = _integrate(p, x, n_steps, m, scale, xs, tape, idx, nd, x_end, info,
                                  newton_rtol, guide, use_guide)
            cycles += 1
    info[1] = cycles
    info[2] = norm
    if status != STATUS_OK:
        info[0] = status
        return
    if norm >= rtol:
        return  # STATUS_NOT_PERIODIC
    info[0] = STATUS_OK
    # xs holds the accepted iterate's cycle: the loop ends right after integrating x
    # record probes on the converged cycle (samples 0..n_steps-1) straight into their
    # rows: each probe's waveform is contiguous (``out_probe`` is (N_PROBES, n_steps));
    # written in place, not through a per-sample buffer copied out (-30 % for the pass)
    w = p[P_OMEGA]
    h = 2.0 * math.pi / w / n_steps
    out_probe[:, :] = 0.0  # the probes this circuit family does not have
    for k in range(n_steps):
        probes(xs[k], k * h, p, out_probe, k)
    for j in range(N_PROBES):
        for k in range(n_steps):
            if not math.isfinite(out_probe[j, k]):
                info[0] = STATUS_NAN


@njit(cache=True, nogil=True)
def _shoot_rows(params, x0, guides, n_steps, xs, out_probe, info, tols, start, stop):
    """Shoot rows ``start .. stop-1`` of a batch (rows are independent; the GIL is
    released, so threads of one process run several ranges at once). ``guides`` is
    (batch, n_steps, n), a row of NaN meaning none, or (0, n_steps, n) for none at all."""
    none = np.empty((n_steps, N_STATES))
    for b in range(start, stop):
        # one call site: LLVM inlines _shoot, the engine's bulk, wherever it is called
        # (two sites had cost 40 % more compile time)
        use = guides.shape[0] > 0 and not math.isnan(guides[b, 0, 0])
        guide = guides[b] if use else none
        _shoot(params[b], x0[b], n_steps, xs[b], out_probe[b], info[b], tols, guide, use)


#: the batch's worker threads by count (made on first use, kept for the process)
_POOLS: dict[int, ThreadPoolExecutor] = {}
_POOL_LOCK = threading.Lock()


def engine_threads() -> int:
    """Threads a batch runs on: ``NUMBA_NUM_THREADS`` when set, else one per core."""
    return max(1, int(numba.config.NUMBA_NUM_THREADS))


def _pool(threads: int) -> ThreadPoolExecutor:
    with _POOL_LOCK:
        if threads not in _POOLS:
            _POOLS[threads] = ThreadPoolExecutor(max_workers=threads,
                                                 thread_name_prefix="fleetpower-engine")
        return _POOLS[threads]


@dataclass(frozen=True)
class SteadyState:
    """Periodic steady state of a batch of variants.

    Attributes
    ----------
    t_s : ndarray, shape (n,)
        Sample times over one period [s], uniform, excluding the period's end.
    states : ndarray, shape (batch, n, 4)
        Unknowns v_c1 [V], v_o [V], v_a [V], i_s [A] at each sample.
    probes : ndarray, shape (batch, n, len(PROBES))
        Instantaneous quantities named in :data:`fleetpower.engine.layout.PROBES` (read
        them by name with :meth:`probe`); a view of probe-major storage, so each probe's
        samples are contiguous.
    iterations : ndarray of int, shape (batch,)
        Shooting-Newton iterations (one-cycle integrations) used.
    periodic_residual : ndarray, shape (batch,)
        max |x(T) - x(0)| / scale at the accepted cycle [-].
    converged : ndarray of bool, shape (batch,)
        Whether each variant reached its periodic steady state.
    residual_evaluations : ndarray of int, shape (batch,)
        Evaluations of the circuit residual f(x, t) spent on each variant (the engine's
        cost measure: every Newton iteration of every time step evaluates it once, plus
        the Jacobian once).
    """

    t_s: np.ndarray
    states: np.ndarray
    probes: np.ndarray
    iterations: np.ndarray
    periodic_residual: np.ndarray
    converged: np.ndarray
    residual_evaluations: np.ndarray

    def probe(self, name: str) -> np.ndarray:
        """Samples of the probe ``name`` (one of :data:`~fleetpower.engine.layout.PROBES`),
        shape (batch, n)."""
        return self.probes[..., PROBES.index(name)]


def _run_batch(params: np.ndarray, x0: np.ndarray, n: int, rtol: float = PERIODIC_RTOL,
               newton_rtol: float = NEWTON_RTOL, threads: int | None = None,
               guides: np.ndarray | None = None):
    """Shoot every row at ``n`` steps per cycle: (states, probes, info) arrays, the probes
    probe-major, (batch, N_PROBES, n).

    Rows are shot in ranges by ``threads`` threads (default :func:`engine_threads`); each
    row is independent of the others, so the result is the same for any number.
    ``guides`` (batch, n, 4), NaN rows for none: see :func:`solve_periodic`.
    """
    tols = np.array([rtol, newton_rtol])
    if guides is None:
        guides = np.empty((0, n, N_STATES))
    batch = params.shape[0]
    xs = np.empty((batch, n + 1, N_STATES))
    # probe-major: a probe's samples are contiguous, so the figures read from a few
    # probes over a whole batch (power quality, means, extremes) touch only those
    # (measured: 27 us per case less in simulate._state_results at 256 steps)
    pr = np.empty((batch, N_PROBES, n))
    info = np.zeros((batch, N_INFO))
    threads = min(engine_threads() if threads is None else max(1, int(threads)), batch)
    if threads <= 1:  # one row or one thread: no pool to wake
        _shoot_rows(params, x0, guides, n, xs, pr, info, tols, 0, batch)
        return xs, pr, info
    # ranges of a few rows, handed out as threads free up: a row needing many shooting
    # cycles does not hold up the rest
    step = max(1, batch // (8 * threads))
    ranges = [(a, min(a + step, batch)) for a in range(0, batch, step)]
    futures = [_pool(threads).submit(_shoot_rows, params, x0, guides, n, xs, pr, info, tols, a,
                                         b)
               for a, b in ranges]
    for f in futures:
        f.result()
    return xs, pr, info


def solve_periodic(
    params: np.ndarray,
    x0: np.ndarray,
    samples_per_cycle: int = DEFAULT_SAMPLES_PER_CYCLE,
    labels: list[str] | None = None,
    raise_on_failure: bool = True,
    coarse_start: int | None = None,
    periodic_rtol: float = PERIODIC_RTOL,
    threads: int | None = None,
    guides: np.ndarray | None = None,
) -> SteadyState:
    """Solve a batch of circuit variants to periodic steady state.

    Parameters
    ----------
    params : ndarray, shape (batch, N_PARAMS)
        Parameter rows in the layout of :mod:`fleetpower.engine.layout`.
    x0 : ndarray, shape (batch, 4)
        Initial guess of the unknowns at t = 0 (algebraic ones are made consistent).
    samples_per_cycle : int
        Samples per mains period of the result (even; the integration steps are these,
        plus half as many again when extrapolating). See :data:`DEFAULT_SAMPLES_PER_CYCLE`.
    labels : list of str, optional
        Names of the variants, for error messages.
    raise_on_failure : bool
        If False, failed variants are reported in ``SteadyState.converged`` instead.
    coarse_start : int, optional
        Steps per cycle of a cheap first solve whose fixed point (to
        :data:`COARSE_RTOL`) starts the real one (default :data:`DEFAULT_COARSE_START`;
        0 or >= ``samples_per_cycle``: none). Pass 0 when ``x0`` is already a near
        solution. See Notes.
    periodic_rtol : float
        Periodicity tolerance max |x(T) - x(0)| / scale of the accepted cycle (default
        :data:`PERIODIC_RTOL`); part of an accuracy setting (a spread's is looser, see
        ``fleetpower.spread.study``).
    threads : int, optional
        Threads the batch's rows are shot on (default :func:`engine_threads`); the
        result does not depend on it.
    guides : ndarray, shape (batch, samples_per_cycle, 4), optional
        Per row, one period of a nearby steady state's unknowns at the same samples (a
        nominal unit's ``SteadyState.states`` row), or NaN for none: the time steps of
        every cycle are predicted along it where a device switches (see
        :func:`_one_cycle`), saving Newton iterations. It sets where each Newton
        iteration starts, not where it ends (the same fixed point to the tolerances).
        Not used by the coarse first solve.

    Returns
    -------
    SteadyState

    Raises
    ------
    SolverError
        If any variant fails to converge or produces NaN, naming the variant.
    """
    params = np.ascontiguousarray(np.atleast_2d(params), dtype=np.float64)
    x0 = np.ascontiguousarray(np.atleast_2d(x0), dtype=np.float64)
    if params.shape[1] != N_PARAMS or x0.shape != (params.shape[0], N_STATES):
        raise ValueError("params must be (batch, N_PARAMS) and x0 (batch, 4)")
    if not np.all(np.isfinite(params)):
        raise SolverError("a circuit parameter is NaN or infinite")
    n = int(samples_per_cycle)
    if guides is not None:
        guides = np.ascontiguousarray(guides, dtype=np.float64)
        if guides.shape != (params.shape[0], n, N_STATES):
            raise ValueError("guides must be (batch, samples_per_cycle, 4)")
    nc = DEFAULT_COARSE_START if coarse_start is None else int(coarse_start)
    if 0 < nc < n:
        xs_c, _, info_c = _run_batch(params, x0, nc, COARSE_RTOL, COARSE_NEWTON_RTOL, threads)
        ok = info_c[:, 0] == STATUS_OK
        # each fine solve starts where its coarse one settled (else where it was asked to)
        x_warm = np.ascontiguousarray(np.where(ok[:, None], xs_c[:, 0, :], x0))
        xs, pr, info = _run_batch(params, x_warm, n, periodic_rtol, NEWTON_RTOL, threads,
                                  guides)
        info[:, 1] += info_c[:, 1]
        info[:, INFO_RESIDUALS] += info_c[:, INFO_RESIDUALS]
        info[:, INFO_JACOBIANS] += info_c[:, INFO_JACOBIANS]
    else:
        xs, pr, info = _run_batch(params, x0, n, periodic_rtol, NEWTON_RTOL, threads, guides)
    bad = np.flatnonzero(info[:, 0] != STATUS_OK)
    if bad.size and raise_on_failure:
        b = int(bad[0])
        name = labels[b] if labels else f"variant {b}"
        raise SolverError(
            f"{name}: periodic steady state not found: {STATUS_TEXT[int(info[b, 0])]} "
            f"after {int(info[b, 1])} cycle(s), periodicity residual {info[b, 2]:.2e}"
        )
    period = 2.0 * np.pi / params[0, P_OMEGA]
    return SteadyState(
        t_s=np.arange(n) * (period / n),
        states=xs[:, :n, :],
        probes=pr.transpose(0, 2, 1),
        iterations=info[:, 1].astype(int),
        periodic_residual=info[:, 2],
        converged=info[:, 0] == STATUS_OK,
        residual_evaluations=info[:, INFO_RESIDUALS].astype(np.int64),
    )


# ----------------------------------------------------------------------------------
# first run on a machine: compiling the engine
# ----------------------------------------------------------------------------------
#: the one signature the batch entry point is called with (see :func:`solve_periodic`)
_BATCH_SIGNATURE = "(float64[:, ::1], float64[:, ::1], float64[:, :, ::1], int64, " \
                   "float64[:, :, ::1], float64[:, :, ::1], float64[:, ::1], float64[::1], " \
                   "int64, int64)"


def engine_is_compiled() -> bool:
    """Whether numba's cache holds a compiled engine for this source and this machine.

    Reads numba's cache index (which numba itself discards when the source changed);
    when that cannot be read, says True, so at worst a note is not printed.
    """
    if _shoot_rows.signatures:
        return True
    try:
        index = _shoot_rows._cache._cache_file._load_index()
    except Exception:  # numba's internals moved: do not guess
        return True
    return bool(index)


def compile_engine() -> None:
    """Compile (or load from numba's cache) the batch entry point without solving."""
    _shoot_rows.compile(_BATCH_SIGNATURE)


def _keep_cache_in_step() -> None:
    """numba's cached engine follows every engine source file, not only this one
    (:mod:`fleetpower.engine.cache`): run once, before any engine function is called."""
    import sys

    from . import cache, circuits, devices

    cache.keep_in_step(cache.engine_dispatchers(devices, circuits, sys.modules[__name__]),
                       cache.source_stamp(numba_version=numba.__version__))


_keep_cache_in_step()
