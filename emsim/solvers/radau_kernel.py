"""Compiled integrators: Radau IIA of order 5 (stiff) and Dormand-Prince 5(4) (non-stiff), with events.

Method
------
Radau IIA, three stages, classical order 5 (stage order 3), for
``M y' = f(t, y)`` with ``M`` diagonal (1 on differential rows, 0 on algebraic
rows, index <= 1), as described by E. Hairer and G. Wanner, *Solving Ordinary
Differential Equations II: Stiff and Differential-Algebraic Problems*, 2nd ed.,
Springer 1996, section IV.8 (implementation of implicit Runge-Kutta methods):

* simplified Newton iteration on the collocation system, transformed with the
  eigen-decomposition of ``A^-1`` into one real system with matrix
  ``(gamma/h) M - J`` and one complex system with ``((alpha - i beta)/h) M - J``;
  starting values extrapolated from the previous collocation polynomial;
  convergence and divergence decided from the observed contraction rate;
* embedded error estimate of Hairer & Wanner (IV.8, (8.19)-(8.20)), filtered
  through the real iteration matrix, with the mass matrix; after a rejected
  step or on a first step a second, refined estimate is made;
* step-size control with the predictive (Gustafsson) controller, a safety
  factor depending on the Newton iteration count, and a hysteresis that keeps
  ``h`` (and so the LU factors) when the proposed increase is below 20 %;
* dense output from the collocation polynomial (degree 3 in the step).

Coefficients (nodes, ``A``, ``T``, ``T^-1``, eigenvalues, dense-output matrix)
are derived below at import from the collocation conditions, not typed in;
only the error-estimate weights are the published values.

The explicit alternative (``iopt[4] = 1``, :class:`emsim.solvers.compiled.DormandPrince5`)
replaces only the step attempt and the step-size proposal: Dormand-Prince 5(4) (Dormand &
Prince 1980; Hairer, Norsett & Wanner, *Solving ODEs I*, II.4-II.5) with the algebraic rows
solved at every stage (:func:`dopri_attempt`), first-same-as-last, the PI controller of
DOPRI5 and its 4th-order dense output (quartic, ``qd[3]``). Events, time events, outputs,
logs and failure reports are the same loop for both methods.

How this file is used
---------------------
``radau_integrate`` takes the problem's system functions as its first ten
arguments: C callbacks with the fixed signatures of :mod:`emsim.solvers.abi`
(``rhs``, ``events``, ``on_event``, ``next_time``, ``at_time``, ``start``,
``record``, ``jacobian``, ``stages``, ``rhs_quad``; their contract is in
``emsim/assembly/problem.py`` and ``abi.py``).
Because those argument types are signatures, not particular functions, numba
compiles and caches this kernel once for every system; a new system compiles
only its own small functions. Helpers receive the callbacks they need.

Quadrature rows ``y[n_main:]`` are integrated by the same collocation formula
(``Z_q = h A F_q`` at the converged stage points: Newton evaluates the
integrands with every stage evaluation, and when its final correction was
below a tenth of its stopping tolerance those are used; otherwise one more
``stages`` callback evaluates them at the converged stages), appear in dense output, and
are excluded from the error norm (they never feed back, so they cannot make a
step fail; their accuracy follows that of the main rows).

Event detection looks for sign changes between the step start and the step
end, and optionally (``iopt[3] = 1``, ``Radau5(event_stage_checks=True)``) at
the first two stage points as well, at two more event-function evaluations
per step. A function that crosses zero and comes back between two of these
check points is not seen; in particular after an event a
function left just past zero (the right end of the root bracket) re-arms only
when it is seen on its original side again, so an accumulation of events in
finite time (a bouncing ball coming to rest) may end unseen: model a rest
mode, or bound the step with ``max_step``.

Event order at one instant: state events located at that instant are applied
first, in increasing event index, then the time events due at that instant.
A located state-event time is the right end of the final root bracket, where
the event function already shows its new sign, so an event never re-triggers
on the same crossing. Output rows exactly at an event instant show the state
after the events (right-continuous); rows before it are interpolated with the
modes and discrete states that held during the step.
"""
import math as radau_math

import numpy as radau_np
from llvmlite import ir as radau_llvm
from numba import njit as radau_njit
from numba import types as radau_types
from numba.extending import intrinsic as radau_intrinsic
from scipy.integrate import RK45 as radau_RK45

from emsim.solvers import dense as radau_dense

# numba's on-disk cache of this kernel is keyed on THIS file's text only, yet the kernel has dense.py's
# helpers inlined: the digest of dense.py written here makes every change there change this file too
# (tests/test_dense.py fails until it is updated), so no stale kernel survives an edit or an upgrade
radau_DENSE_SHA256 = "3d901333e3c1d79368325a466363c13852292999e08f9f2a6208203bcc2c7fc0"


def radau_coefficients():
    """Radau IIA (s = 3) coefficients derived from the collocation conditions.

    Returns a dict with nodes ``c``, matrix ``A``, the real eigenvalue ``gamma``
    and complex pair ``alpha +- i beta`` of ``A^-1``, the transformation ``T``
    (with ``T^-1 A^-1 T = [[gamma,0,0],[0,alpha,beta],[0,-beta,alpha]]``), its
    inverse ``TI``, the dense-output matrix ``P`` (``Q = P Z`` gives the
    polynomial ``sum_k Q[k] x**(k+1)`` through the stage increments) and the
    error weights ``e``.
    """
    s6 = radau_math.sqrt(6.0)
    # Nodes: zeros of the Radau right polynomial (Hairer & Wanner, Table IV.5.6).
    c = radau_np.array([(4.0 - s6) / 10.0, (4.0 + s6) / 10.0, 1.0])
    # Lagrange basis l_j(s) = sum_k L[k, j] s**k on the nodes.
    vand = radau_np.vander(c, 3, increasing=True)
    lag = radau_np.linalg.inv(vand)
    a = radau_np.empty((3, 3))
    for i in range(3):
        for j in range(3):
            a[i, j] = sum(lag[k, j] * c[i] ** (k + 1) / (k + 1) for k in range(3))
    ainv = radau_np.linalg.inv(a)
    vals, vecs = radau_np.linalg.eig(ainv)
    i_real = int(radau_np.argmin(radau_np.abs(vals.imag)))
    i_cplx = [k for k in range(3) if k != i_real and vals[k].imag > 0.0][0]
    gamma = float(vals[i_real].real)
    u = vecs[:, i_real].real
    u = u / u[2]
    v = vecs[:, i_cplx] / vecs[2, i_cplx]
    alpha = float(vals[i_cplx].real)
    beta = float(vals[i_cplx].imag)
    tmat = radau_np.column_stack((u, v.real, v.imag))
    ti = radau_np.linalg.inv(tmat)
    # Dense output: stage increments Z_i = sum_k Q_k c_i**(k+1).
    vd = radau_np.array([[ci ** (k + 1) for k in range(3)] for ci in c])
    pmat = radau_np.linalg.inv(vd)
    # Error-estimate weights, Hairer & Wanner IV.8 (8.20) divided by gamma_0.
    e = radau_np.array([-13.0 - 7.0 * s6, -13.0 + 7.0 * s6, -1.0]) / 3.0
    return dict(c=c, A=a, gamma=gamma, alpha=alpha, beta=beta, T=tmat, TI=ti, P=pmat, e=e)


radau_coef = radau_coefficients()
radau_C = radau_np.ascontiguousarray(radau_coef["c"])
radau_A = radau_np.ascontiguousarray(radau_coef["A"])
radau_T = radau_np.ascontiguousarray(radau_coef["T"])
radau_TI = radau_np.ascontiguousarray(radau_coef["TI"])
radau_P = radau_np.ascontiguousarray(radau_coef["P"])
radau_E = radau_np.ascontiguousarray(radau_coef["e"])
radau_GAMMA = radau_coef["gamma"]
radau_ALPHA = radau_coef["alpha"]
radau_BETA = radau_coef["beta"]

# Dormand-Prince 5(4) (J. R. Dormand and P. J. Prince, J. Comput. Appl. Math. 6, 1980; Hairer, Norsett &
# Wanner, Solving ODEs I, II.5), the explicit method for non-stiff systems: the tableau, error weights and
# 4th-order dense-output matrix are taken from scipy's implementation rather than typed in again. Row 6 of
# DP_A is the solution weights b: that stage is f at the new point (first same as last).
radau_DP_C = radau_np.ascontiguousarray(radau_np.append(radau_RK45.C, 1.0))
radau_DP_A = radau_np.zeros((7, 6))
radau_DP_A[:6, :5] = radau_RK45.A
radau_DP_A[6, :] = radau_RK45.B
radau_DP_E = radau_np.ascontiguousarray(radau_RK45.E)
radau_DP_P = radau_np.ascontiguousarray(radau_RK45.P)
# step-size controller of Hairer's DOPRI5 (Solving ODEs I, II.4, (4.13) and the PI stabilisation of IV.2)
radau_DP_BETA = 0.04
radau_DP_EXPO = 0.2 - 0.75 * radau_DP_BETA
radau_DP_LOG_FLOOR = radau_math.log(1e-4)    # the controller's memory never drops below an error of 1e-4

radau_EPS = 2.220446049250313e-16
radau_SAFE = 0.9
radau_MAXIT = 7
# quadrature integrands are taken from Newton's last stage evaluation when its final correction was at
# most this fraction of Newton's own stopping tolerance (wrms in error weights); farther, the energy
# audit of a sampled drive lost accuracy (relative residual at rtol 1e-6: 1.3e-8 at 0.1, 4.9e-7 at 1)
radau_QUAD_REUSE = 0.1

# Persistent float memory ``tf`` (owned by the Python driver).
radau_F_T = 0          # current time
radau_F_H = 1          # proposed next step size (<= 0: choose one)
radau_F_HLU = 2        # step size of the current LU factors
radau_F_HACC = 3       # last accepted step (predictive controller)
radau_F_ERRACC = 4     # its error norm
radau_F_TN = 5         # next time-event instant
radau_F_QT = 6         # start of the step of the stored collocation polynomial
radau_F_QH = 7         # its length
radau_F_TANCHOR = 8    # first event time of the current event cluster (chattering)
radau_F_ETA = 9        # Newton contraction memory
radau_F_TFAIL = 10     # time of a failure
radau_F_HFAIL = 11     # step size at a failure
radau_F_HPOST = 12     # step size the error of the last first-step-after-a-time-event asked for (0: none yet)
radau_F_TW = 13        # time of the consistent evaluation that ti[I_WMARK] vouches for
radau_F_LOGERR = 14    # Dormand-Prince: log of F_ERRACC (the controller's memory)
radau_NF = 16

# Persistent integer memory ``ti``.
radau_I_KOUT = 0       # index of the next output row time out_t0 + k*out_dt
radau_I_NROWS = 1      # rows filled in buf (driver resets to 0)
radau_I_NLOG = 2       # log entries filled (driver resets to 0)
radau_I_STARTED = 3    # system_start done
radau_I_JAC = 4        # Jacobian valid
radau_I_JACNOW = 5     # Jacobian evaluated at the current step start
radau_I_LU = 6         # real/complex LU valid (for h = tf[F_HLU])
radau_I_LUA = 7        # LU of the algebraic block valid
radau_I_EXT = 8        # stored collocation polynomial usable for starting values
radau_I_FIRST = 9      # first step (or first after a state event)
radau_I_NINST = 10     # events in the current cluster (chattering)
radau_I_FAILINFO = 11  # row / event index related to a failure (-1 none)
radau_I_REJ = 12       # the current step was rejected at least once
radau_I_POSTEV = 13    # the next step is the first after a time event
radau_I_WMARK = 14     # radau_w_mark when the last consistency solve left w at its point (0: it did not)
radau_NI = 16

# Statistics ``stats`` (int64, persistent).
radau_S_STEPS = 0
radau_S_REJECTED = 1
radau_S_RHS = 2
radau_S_JAC = 3
radau_S_LU = 4
radau_S_NEWTON = 5
radau_S_TIME_EVENTS = 6
radau_S_STATE_EVENTS = 7
radau_S_EVENT_FN = 8
radau_S_QUAD = 9
radau_NS = 10

radau_STATUS_DONE = 0
radau_STATUS_ROWS_FULL = 1
radau_STATUS_LOG_FULL = 2
radau_STATUS_STEP_TOO_SMALL = -1
radau_STATUS_NEWTON = -2
radau_STATUS_NONFINITE = -3
radau_STATUS_CHATTERING = -4
radau_STATUS_MAX_STEPS = -5


@radau_njit(cache=True, inline="always")
def radau_row_time(k, out_t0, out_dt):
    """Time of output row ``k``."""
    if k == 0:
        return out_t0
    return out_t0 + k * out_dt


@radau_njit(cache=True, inline="always")
def radau_jacobian(jacobian_fn, rhs_fn, t, y, p, m, d, w, f0, nominal, n, jac, ftmp, stats):
    """Jacobian of the main rows at (t, y): the system's analytic one when it has it (returns 1), else
    forward differences (returns 0)."""
    stats[radau_S_JAC] += 1
    if jacobian_fn(t, y, p, m, d, w, jac) == 1:
        return 1
    sq = radau_math.sqrt(radau_EPS)
    for j in range(n):
        yj = y[j]
        delta = sq * max(abs(yj), nominal[j])
        if delta == 0.0:
            delta = sq
        y[j] = yj + delta
        delta = y[j] - yj
        rhs_fn(t, y, p, m, d, w, ftmp)
        y[j] = yj
        inv = 1.0 / delta
        for i in range(n):
            jac[i, j] = (ftmp[i] - f0[i]) * inv
    stats[radau_S_RHS] += n
    return 0


@radau_njit(cache=True, inline="always")
def radau_w_mark(stats, ti):
    """A count that moves whenever a callback may have written the work array.

    Every callback that evaluates the system into ``w`` bumps one of these counters
    (rhs and stage evaluations, Jacobians, event functions, event resets, time events,
    output rows), so an unchanged mark proves ``w`` still holds the evaluation it was
    taken after.
    """
    return (stats[radau_S_RHS] + stats[radau_S_JAC] + stats[radau_S_EVENT_FN] + stats[radau_S_STATE_EVENTS]
            + stats[radau_S_TIME_EVENTS] + ti[radau_I_KOUT] + 1)


@radau_njit(cache=True, inline="always")
def radau_w_fresh(fslot, t, stats, ti, tf):
    """True when ``w`` holds the system evaluated at the current (t, y, m, d): the last consistency
    solve's point, with no callback since (the caller's y is that point, see the call sites)."""
    return fslot >= 0 and ti[radau_I_WMARK] == radau_w_mark(stats, ti) and tf[radau_F_TW] == t


@radau_njit(cache=True, inline="always")
def radau_worst_row(err, sc, n):
    """Row with the largest weighted error ``|err / sc|`` (the one named when steps fail), -1 if none."""
    worst = 0.0
    row = -1
    for i in range(n):
        q = abs(err[i] / sc[i])
        if q > worst:
            worst = q
            row = i
    return row


@radau_njit(cache=True, inline="always")
def radau_factor(h, jac, mass, n, lu_r, lu_c, piv):
    """Form and factor (gamma/h) M - J and ((alpha - i beta)/h) M - J; 0 when both are regular."""
    fr = radau_GAMMA / h
    fc = complex(radau_ALPHA / h, -radau_BETA / h)
    for i in range(n):
        for j in range(n):
            lu_r[i, j] = -jac[i, j]
            lu_c[i, j] = -jac[i, j]
        lu_r[i, i] += fr * mass[i]
        lu_c[i, i] += fc * mass[i]
    info_r = radau_dense.lu_factor(lu_r, piv[0], n)
    info_c = radau_dense.lu_factor(lu_c, piv[1], n)
    return info_r + info_c


@radau_njit(cache=True, inline="always")
def radau_newton(stages_fn, t, h, y, p, m, d, w, mass, n, sc, z, wt, f, fq, ts3, ys, br, bc,
                 lu_r, lu_c, piv, eta0, fnewt, maxit, want_quad, y_fail, tf, stats):
    """Simplified Newton iteration on the transformed collocation system.

    ``z[:, :n]`` holds the starting stage increments and, on success, the
    converged ones. Each iteration evaluates the three stages in one call
    (``stages_fn``; with ``want_quad`` also the quadrature integrands, into
    ``fq``, at the same, not yet corrected, stage points). Leaves the stage
    times in ``ts3``. Returns (code, iterations, rate, eta, dw): code 0
    converged, 1 diverged or too slow, 2 non-finite right-hand side (stage
    state copied to ``y_fail``, stage time to ``tf[F_TFAIL]``); ``dw`` is the
    weighted RMS norm of the last correction (the distance of the stages last
    evaluated from the returned ones).
    """
    for s in range(3):
        ts3[s] = t + radau_C[s] * h
    for j in range(n):
        for k in range(3):
            wt[k, j] = radau_TI[k, 0] * z[0, j] + radau_TI[k, 1] * z[1, j] + radau_TI[k, 2] * z[2, j]
    fr = radau_GAMMA / h
    cr = radau_ALPHA / h
    ci = -radau_BETA / h
    eta = eta0
    dw_old = 1.0
    dw = radau_np.inf
    rate = 0.0
    for it in range(maxit):
        stages_fn(ts3, y, z, ys, p, m, d, w, f, fq, want_quad)
        stats[radau_S_RHS] += 3
        if want_quad != 0:
            stats[radau_S_QUAD] += 3
        stats[radau_S_NEWTON] += 1
        for s in range(3):
            if not radau_dense.all_finite(f[s], n):
                for j in range(n):
                    ys[j] = y[j] + z[s, j]
                for j in range(ys.shape[0]):
                    y_fail[j] = ys[j]
                tf[radau_F_TFAIL] = t + radau_C[s] * h
                return 2, it + 1, rate, eta, dw
        acc = 0.0
        for j in range(n):
            g0 = radau_TI[0, 0] * f[0, j] + radau_TI[0, 1] * f[1, j] + radau_TI[0, 2] * f[2, j]
            g1 = radau_TI[1, 0] * f[0, j] + radau_TI[1, 1] * f[1, j] + radau_TI[1, 2] * f[2, j]
            g2 = radau_TI[2, 0] * f[0, j] + radau_TI[2, 1] * f[1, j] + radau_TI[2, 2] * f[2, j]
            mj = mass[j]
            br[j] = g0 - fr * mj * wt[0, j]
            re = g1 - mj * (cr * wt[1, j] - ci * wt[2, j])
            im = g2 - mj * (cr * wt[2, j] + ci * wt[1, j])
            bc[j] = complex(re, im)
        radau_dense.lu_solve(lu_r, piv[0], br, n)
        radau_dense.lu_solve(lu_c, piv[1], bc, n)
        for j in range(n):
            a = br[j] / sc[j]
            b = bc[j].real / sc[j]
            c = bc[j].imag / sc[j]
            acc += a * a + b * b + c * c
        dw = radau_math.sqrt(acc / (3 * n)) if n > 0 else 0.0
        if it > 0:
            rate = dw / dw_old
            if dw <= 1e-2 * fnewt:
                # increment at round-off level: converged whatever the (noisy) rate says
                eta = min(eta, 1.0)
            elif rate >= 0.99:
                return 1, it + 1, rate, eta, dw
            else:
                # predicted size of the last increment if the iteration goes on to maxit
                pred = dw / (1.0 - rate)
                for _ in range(maxit - 1 - it):
                    pred *= rate
                if pred > fnewt:
                    return 1, it + 1, rate, eta, dw
                eta = rate / (1.0 - rate)
        for j in range(n):
            wt[0, j] += br[j]
            wt[1, j] += bc[j].real
            wt[2, j] += bc[j].imag
            for s in range(3):
                z[s, j] = radau_T[s, 0] * wt[0, j] + radau_T[s, 1] * wt[1, j] + radau_T[s, 2] * wt[2, j]
        if dw == 0.0 or eta * dw <= fnewt:
            return 0, it + 1, rate, eta, dw
        dw_old = dw
    return 1, maxit, rate, eta, dw


@radau_njit(cache=True, inline="always")
def radau_error(rhs_fn, t, h, y, ynew, z, f0, mass, n, atol, rtol, lu_r, piv, p, m, d, w,
                refine, err, zm, sc, ys, ftmp, stats):
    """Hairer & Wanner's error estimate (with mass matrix); refined once when asked."""
    inv_h = 1.0 / h
    for i in range(n):
        ze = (radau_E[0] * z[0, i] + radau_E[1] * z[1, i] + radau_E[2] * z[2, i]) * inv_h
        zm[i] = mass[i] * ze
        err[i] = f0[i] + zm[i]
        sc[i] = atol[i] + rtol * max(abs(y[i]), abs(ynew[i]))
    radau_dense.lu_solve(lu_r, piv[0], err, n)
    e = radau_dense.wrms(err, sc, n)
    if e >= 1.0 and refine:
        for i in range(ys.shape[0]):
            ys[i] = y[i]
        for i in range(n):
            ys[i] += err[i]
        rhs_fn(t, ys, p, m, d, w, ftmp)
        stats[radau_S_RHS] += 1
        for i in range(n):
            err[i] = ftmp[i] + zm[i]
        radau_dense.lu_solve(lu_r, piv[0], err, n)
        e = radau_dense.wrms(err, sc, n)
    return e


@radau_njit(cache=True, inline="always")
def radau_algebraic_setup(jac, lu_a, alg, n_alg, n):
    """The two products the algebraic block's solves need, from ``jac``: J_zz^-1 and J_zz^-1 J_zx.

    ``lu_a`` (n x 2n): columns ``[n, n + n_alg)`` take ``J_zz^-1`` and ``[n + n_alg, 2n)``
    ``J_zz^-1 J_zx`` (column ``jd`` for differential row ``alg[n_alg + jd]``); columns
    ``[0, n_alg)`` are scratch. Explicit products because the blocks are small and solved
    against at every explicit stage: a matrix-vector product costs a fraction of a pivoted
    triangular solve. Formed in one Gauss-Jordan elimination with row pivoting of
    ``[J_zz | I | J_zx]`` (Golub & Van Loan, Matrix Computations, 3.1; half the time of an LU
    factorisation followed by n_alg solves and a product, on the drives' 3 x 3 block).
    Returns 0, or 1 + the elimination step whose pivot column is exactly zero (J_zz singular).
    """
    w2 = 2 * n
    for i in range(n_alg):
        ai = alg[i]
        for j in range(n_alg):
            lu_a[i, j] = jac[ai, alg[j]]
            lu_a[i, n + j] = 0.0
        lu_a[i, n + i] = 1.0
        for jd in range(n - n_alg):
            lu_a[i, n + n_alg + jd] = jac[ai, alg[n_alg + jd]]
    for k in range(n_alg):
        p = k
        amax = abs(lu_a[k, k])
        for i in range(k + 1, n_alg):
            v = abs(lu_a[i, k])
            if v > amax:
                amax = v
                p = i
        if amax == 0.0:
            return k + 1
        if p != k:
            for j in range(k, n_alg):
                tmp_v = lu_a[k, j]
                lu_a[k, j] = lu_a[p, j]
                lu_a[p, j] = tmp_v
            for j in range(n, w2):
                tmp_v = lu_a[k, j]
                lu_a[k, j] = lu_a[p, j]
                lu_a[p, j] = tmp_v
        inv = 1.0 / lu_a[k, k]
        for j in range(k + 1, n_alg):
            lu_a[k, j] *= inv
        for j in range(n, w2):
            lu_a[k, j] *= inv
        for i in range(n_alg):
            if i != k:
                fac = lu_a[i, k]
                if fac != 0.0:
                    for j in range(k + 1, n_alg):
                        lu_a[i, j] -= fac * lu_a[k, j]
                    for j in range(n, w2):
                        lu_a[i, j] -= fac * lu_a[k, j]
    return 0


@radau_njit(cache=True, inline="always")
def radau_constraint_correction(lu_a, f, y, atol, rtol, alg, n_alg, n, dz):
    """The Newton correction of the algebraic rows, ``dz = J_zz^-1 f_z`` (``f_z``: ``f`` on the rows
    ``alg[:n_alg]``, with ``lu_a`` from :func:`radau_algebraic_setup`).

    Returns its weighted RMS norm (weights ``atol + rtol |y|``) and the row with the largest
    weighted entry. Shared by :func:`radau_make_consistent` and the module function
    ``system_explicit_stages`` (written out per row layout by emsim/solvers/stage_source.py), which
    must test stages alike.
    """
    acc = 0.0
    worst = 0.0
    iworst = alg[0]
    for i in range(n_alg):
        c = 0.0
        for l in range(n_alg):
            c += lu_a[i, n + l] * f[alg[l]]
        dz[i] = c
        a = alg[i]
        q = c / (atol[a] + rtol * abs(y[a]))
        acc += q * q
        if abs(q) > worst:
            worst = abs(q)
            iworst = a
    return radau_math.sqrt(acc / n_alg), iworst


@radau_njit(cache=True, inline="always")
def dopri_stage_point(i, h, y, ys, kst, err, alg, n_alg, n, lu_a, predict):
    """Stage ``i``'s point of a Dormand-Prince step into ``ys``, which holds stage ``i - 1``'s.

    Differential rows (``alg[n_alg:]``) from the tableau and the stage derivatives ``kst[:i]``;
    with ``predict``, the algebraic rows moved along the stage move (J_zz dz = -J_zx dx, the
    implicit function theorem, with ``lu_a``'s J_zz^-1 J_zx), so that with linear constraints and
    a current Jacobian the point is consistent at once. ``err`` takes the move (scratch). Shared by
    :func:`dopri_attempt`; the module function ``system_explicit_stages`` (stage_source.py) writes the
    same arithmetic out.
    """
    for jd in range(n_alg, n):
        j = alg[jd]
        acc = 0.0
        for l in range(i):
            acc += radau_DP_A[i, l] * kst[l, j]
        x_new = y[j] + h * acc
        err[j] = x_new - ys[j]
        ys[j] = x_new
    if predict:
        for k in range(n_alg):
            acc = 0.0
            for jd in range(n - n_alg):
                acc += lu_a[k, n + n_alg + jd] * err[alg[n_alg + jd]]
            ys[alg[k]] -= acc


@radau_njit(cache=True, inline="always")
def radau_make_consistent(jacobian_fn, rhs_fn, rhs_quad_fn, want_quad, evaluated, t, y, p, m, d, w, n, alg, n_alg,
                          atol, rtol, nominal, jac, lu_a, f0, fq, ftmp, dz, y_fail, tf, ti, stats):
    """Solve the algebraic rows for their states with the differential rows fixed.

    Newton iterations with the algebraic block of the stored Jacobian (the
    Jacobian is evaluated first if it is not valid, and once more if the
    iteration stalls). Leaves ``f0 = f(t, y)`` at the final state and, if
    ``want_quad``, the quadrature integrands there in ``fq`` (one callback
    evaluates both). ``evaluated``: ``f0`` (and ``fq``) already hold f at (t, y), and ``w``
    that evaluation, so the first iteration starts from them. Returns 0, -2 (no convergence)
    or -3 (non-finite right-hand side).
    """
    for attempt in range(2):
        for it in range(10):
            fresh = True    # w holds the evaluation at (t, y) just below
            if evaluated and attempt == 0 and it == 0:
                pass
            elif want_quad:
                rhs_quad_fn(t, y, p, m, d, w, f0, fq)
                stats[radau_S_QUAD] += 1
                stats[radau_S_RHS] += 1
            else:
                rhs_fn(t, y, p, m, d, w, f0)
                stats[radau_S_RHS] += 1
            bad = radau_dense.first_nonfinite(f0, n)
            if bad >= 0:
                for i in range(y.shape[0]):
                    y_fail[i] = y[i]
                tf[radau_F_TFAIL] = t
                ti[radau_I_FAILINFO] = bad
                return radau_STATUS_NONFINITE
            if n_alg == 0:
                ti[radau_I_WMARK] = radau_w_mark(stats, ti)
                tf[radau_F_TW] = t
                return 0
            if ti[radau_I_JAC] == 0:
                # the analytic Jacobian evaluates the rhs at this point too; differences do not
                fresh = radau_jacobian(jacobian_fn, rhs_fn, t, y, p, m, d, w, f0, nominal, n, jac, ftmp, stats) == 1
                ti[radau_I_JAC] = 1
                ti[radau_I_JACNOW] = 1
                ti[radau_I_LU] = 0
                ti[radau_I_LUA] = 0
            if ti[radau_I_LUA] == 0:
                info = radau_algebraic_setup(jac, lu_a, alg, n_alg, n)
                stats[radau_S_LU] += 1
                if info != 0:
                    ti[radau_I_FAILINFO] = alg[info - 1]
                    tf[radau_F_TFAIL] = t
                    for i in range(y.shape[0]):
                        y_fail[i] = y[i]
                    return radau_STATUS_NEWTON
                ti[radau_I_LUA] = 1
            nrm, iworst = radau_constraint_correction(lu_a, f0, y, atol, rtol, alg, n_alg, n, dz)
            ti[radau_I_FAILINFO] = iworst
            if nrm <= 1e-3:
                ti[radau_I_WMARK] = radau_w_mark(stats, ti) if fresh else 0
                tf[radau_F_TW] = t
                return 0
            for i in range(n_alg):
                y[alg[i]] -= dz[i]
        # stalled: evaluate the Jacobian here and try once more
        ti[radau_I_JAC] = 0
    tf[radau_F_TFAIL] = t
    for i in range(y.shape[0]):
        y_fail[i] = y[i]
    return radau_STATUS_NEWTON


# inlined into the loop: a call passing its ~30 arrays (seven words each) cost ~0.3 us per step, a
# fifth of a step on the averaged drive. At most 30 parameters: CPython compiles a longer call as
# f(*args), which numba's inliner refuses; ys, ynew and sc therefore come as rows of ``vec``
@radau_njit(cache=True, inline="always")
def dopri_attempt(jacobian_fn, rhs_fn, rhs_quad_fn, explicit_stages_fn, one_call, t, h, y, p, m, d, w, alg, n_alg,
                  atol, rtol, nominal, jac, lu_a, f0, fq0, kst, kq, vec, small, y_fail, tf, ti, stats):
    """One Dormand-Prince 5(4) step of size ``h`` from ``(t, y)`` into ``ynew``; returns (status, error norm).

    Stage 0 is ``f0`` (and ``fq0``, the quadrature integrands) at the step start. At every
    later stage the differential rows come from the tableau and the algebraic rows are
    solved for by :func:`radau_make_consistent` (starting from the previous stage's values),
    so each stage derivative is taken on the constraint (index 1); the quadrature integrands
    are evaluated at the same consistent stage points and integrated with the same weights
    (except at stage 1, whose weights in the solution and the dense output are zero).
    Stage 6 is the new point: ``kst[6]``, ``kq[6]`` serve as the next step's stage 0.
    The error norm is the weighted RMS of the embedded 4th-order difference over the
    differential rows (``alg[n_alg:]``). The new point goes to ``vec[1]``, the error weights
    to ``vec[5]`` (``vec[0]`` is stage scratch); ``small`` rows 1, 2, 4 are scratch. ``status``
    is 0 or the consistency solve's failure code.

    ``one_call``: when the prediction can be trusted (no algebraic rows, or a current Jacobian),
    the remaining stages go to the module's ``explicit_stages`` callback, the same arithmetic in
    one call instead of one per stage. The first stage whose constraint it could not confirm this
    function finishes itself (the solve, and at a missed prediction a fresh Jacobian for the next
    stage); once the Jacobian is current again the rest goes back to the callback.
    """
    n = f0.shape[0]
    n_tot = y.shape[0]
    n_quad = n_tot - n
    ys = vec[0]
    ynew = vec[1]
    sc = vec[5]
    ftmp = small[1]
    err = small[2]
    dz = small[4]
    for j in range(n_tot):
        ys[j] = y[j]
    for j in range(n):
        kst[0, j] = f0[j]
    for q in range(n_quad):
        kq[0, q] = fq0[q]
        kq[1, q] = 0.0    # stage 1 has weight 0 in the solution and the dense output: not evaluated
    want_quad = 1 if n_quad > 0 else 0
    i = 1
    at_point = False    # explicit_stages left stage i's point in ys, evaluated, off the constraint
    while i < 7:
        if one_call and n > 0 and not at_point and (n_alg == 0 or (ti[radau_I_JAC] == 1 and ti[radau_I_LUA] == 1)):
            # stages i..6 in one call; at the first it cannot confirm it hands the stage back
            i_slow = explicit_stages_fn(t, h, rtol, y, p, m, d, w, kst, kq, ys, err, alg, lu_a, atol, i,
                                        want_quad, dz)
            evals = i_slow - i + 1 if i_slow < 7 else 7 - i
            stats[radau_S_RHS] += evals
            if n_quad > 0:
                stats[radau_S_QUAD] += evals - 1 if i == 1 else evals    # none at stage 1
            if i_slow == 7:
                # w holds the last stage, the new point (as after radau_make_consistent)
                ti[radau_I_WMARK] = radau_w_mark(stats, ti)
                tf[radau_F_TW] = t + radau_DP_C[6] * h
                break
            i = i_slow
            at_point = True
        if not at_point:
            dopri_stage_point(i, h, y, ys, kst, err, alg, n_alg, n, lu_a,
                              ti[radau_I_JAC] == 1 and ti[radau_I_LUA] == 1)
        t_i = t + radau_DP_C[i] * h
        n_jac = stats[radau_S_JAC]
        n_rhs = stats[radau_S_RHS]
        resume = at_point
        at_point = False
        st = radau_make_consistent(jacobian_fn, rhs_fn, rhs_quad_fn, n_quad > 0 and i != 1, resume, t_i, ys, p, m, d,
                                   w, n, alg,
                                   n_alg, atol, rtol, nominal, jac, lu_a, kst[i], kq[i], ftmp, dz, y_fail, tf,
                                   ti, stats)
        if st != 0:
            return st, radau_np.inf
        jac_now = stats[radau_S_JAC] != n_jac
        if not jac_now and ti[radau_I_JACNOW] == 0 and (resume or stats[radau_S_RHS] - n_rhs > 1):
            # the prediction missed: the algebraic block changed (a new duty, a new mode) or is
            # nonlinear. A fresh Jacobian for the next stage, at most one per step
            ti[radau_I_JAC] = 0
        if n_quad > 0 and i != 1:
            if not radau_dense.all_finite(kq[i], n_quad):
                for j in range(n_tot):
                    y_fail[j] = ys[j]
                tf[radau_F_TFAIL] = t_i
                ti[radau_I_FAILINFO] = -1
                return radau_STATUS_NONFINITE, radau_np.inf
        i += 1
    acc = 0.0
    nd = n - n_alg
    for j in range(n):
        ynew[j] = ys[j]
        sc[j] = atol[j] + rtol * max(abs(y[j]), abs(ys[j]))
        err[j] = 0.0
    for jd in range(n_alg, n):
        j = alg[jd]
        e = 0.0
        for l in range(7):
            e += radau_DP_E[l] * kst[l, j]
        err[j] = h * e
        q = err[j] / sc[j]
        acc += q * q
    for q in range(n_quad):
        e = 0.0
        for l in range(6):
            e += radau_DP_A[6, l] * kq[l, q]
        ynew[n + q] = y[n + q] + h * e
    return 0, (radau_math.sqrt(acc / nd) if nd > 0 else 0.0)


@radau_njit(cache=True, inline="always")
def dopri_dense(h, yold, ynew, mass, n, kst, kq, qd):
    """The quartic dense output of a Dormand-Prince step in the ``qd`` form of :func:`radau_interp`.

    The loop forms it only for a step that reads it (an output row inside the step, or event
    functions to locate): any new reader of ``qd`` after an explicit step must be added to
    that condition.

    Differential and quadrature rows: the published 4th-order continuous extension.
    Algebraic rows carry no stage derivatives: they are interpolated linearly between
    the two consistent end points (inside a step an output row or event function
    sees them to O(h^2); at step ends they are exact).
    """
    n_tot = ynew.shape[0]
    for i in range(n):
        if mass[i] != 0.0:
            for k in range(4):
                acc = 0.0
                for l in range(7):
                    acc += radau_DP_P[l, k] * kst[l, i]
                qd[k, i] = h * acc
        else:
            qd[0, i] = ynew[i] - yold[i]
            qd[1, i] = 0.0
            qd[2, i] = 0.0
            qd[3, i] = 0.0
    for q in range(n_tot - n):
        for k in range(4):
            acc = 0.0
            for l in range(7):
                acc += radau_DP_P[l, k] * kq[l, q]
            qd[k, n + q] = h * acc


@radau_njit(cache=True)
def radau_initial_step(rhs_fn, t, y, p, m, d, w, f0, mass, n, atol, rtol, ys, ftmp, stats):
    """Initial step from the size of y, y' and an estimate of y'' on the differential rows."""
    d0 = 0.0
    d1 = 0.0
    nd = 0
    for i in range(n):
        if mass[i] != 0.0:
            s = atol[i] + rtol * abs(y[i])
            d0 += (y[i] / s) ** 2
            d1 += (f0[i] / s) ** 2
            nd += 1
    if nd == 0:
        return 1e-6
    d0 = radau_math.sqrt(d0 / nd)
    d1 = radau_math.sqrt(d1 / nd)
    if d0 < 1e-5 or d1 < 1e-5:
        h0 = 1e-6
    else:
        h0 = 0.01 * d0 / d1
    for i in range(ys.shape[0]):
        ys[i] = y[i]
    for i in range(n):
        if mass[i] != 0.0:
            ys[i] += h0 * f0[i]
    rhs_fn(t + h0, ys, p, m, d, w, ftmp)
    stats[radau_S_RHS] += 1
    d2 = 0.0
    for i in range(n):
        if mass[i] != 0.0:
            s = atol[i] + rtol * abs(y[i])
            d2 += ((ftmp[i] - f0[i]) / s) ** 2
    d2 = radau_math.sqrt(d2 / nd) / h0
    if not radau_math.isfinite(d2):
        return h0
    big = max(d1, d2)
    if big <= 1e-15:
        h1 = max(1e-6, h0 * 1e-3)
    else:
        h1 = (0.01 / big) ** 0.25
    return min(100.0 * h0, h1)


@radau_njit(cache=True, inline="always")
def radau_interp(tq, t_s, h_s, y_s, qd, yint):
    """Dense output of the last step at time ``tq`` into ``yint``.

    ``y_s + sum_k qd[k] x**(k+1)`` with ``x = (tq - t_s) / h_s``: Radau's collocation
    polynomial (cubic, ``qd[3] = 0``) or the explicit method's quartic.
    """
    x = (tq - t_s) / h_s
    x2 = x * x
    x3 = x2 * x
    x4 = x3 * x
    for i in range(yint.shape[0]):
        yint[i] = y_s[i] + qd[0, i] * x + qd[1, i] * x2 + qd[2, i] * x3 + qd[3, i] * x4


@radau_njit(cache=True, inline="always")
def radau_record_row(record_fn, tk, y, p, m, d, w, buf, nr, cols, rowbuf):
    """Output row ``nr`` of ``buf``: every recorded value, or with ``cols`` those columns of it."""
    if cols.shape[0] == 0:
        record_fn(tk, y, p, m, d, w, buf[nr])
    else:
        record_fn(tk, y, p, m, d, w, rowbuf)
        for c in range(cols.shape[0]):
            buf[nr, c] = rowbuf[cols[c]]


@radau_njit(cache=True, inline="always")
def radau_emit_at(record_fn, t, y, p, m, d, w, out_t0, out_dt, t_lim, buf, buf_t, cols, rowbuf, ti, fslot, fresh):
    """Rows with row time <= t_lim recorded from the current state; stops when buf is full.

    ``fresh``: w holds the system at this state, so the rows reuse it (flag ``w[fslot]``).
    """
    cap = buf.shape[0]
    if fresh:
        w[fslot] = 1.0
    k = ti[radau_I_KOUT]
    nr = ti[radau_I_NROWS]
    while nr < cap:
        tk = radau_row_time(k, out_t0, out_dt)
        if tk > t_lim:
            break
        radau_record_row(record_fn, tk, y, p, m, d, w, buf, nr, cols, rowbuf)
        buf_t[nr] = tk
        nr += 1
        k += 1
    if fresh:
        w[fslot] = 0.0
    ti[radau_I_KOUT] = k
    ti[radau_I_NROWS] = nr


@radau_njit(cache=True, inline="always")
def radau_emit_interp(record_fn, t_s, h_s, y_s, qd, p, m, d, w, out_t0, out_dt, t_lim, buf, buf_t, cols, rowbuf, ti,
                      yint):
    """Rows with row time <= t_lim interpolated from the last step's polynomial."""
    cap = buf.shape[0]
    k = ti[radau_I_KOUT]
    nr = ti[radau_I_NROWS]
    while nr < cap:
        tk = radau_row_time(k, out_t0, out_dt)
        if tk > t_lim:
            break
        radau_interp(tk, t_s, h_s, y_s, qd, yint)
        radau_record_row(record_fn, tk, yint, p, m, d, w, buf, nr, cols, rowbuf)
        buf_t[nr] = tk
        nr += 1
        k += 1
    ti[radau_I_KOUT] = k
    ti[radau_I_NROWS] = nr


@radau_njit(cache=True, inline="always")
def radau_event_value(events_fn, k, tq, t_s, h_s, y_s, qd, p, m, d, w, yint, gtmp, stats):
    radau_interp(tq, t_s, h_s, y_s, qd, yint)
    events_fn(tq, yint, p, m, d, w, gtmp)
    stats[radau_S_EVENT_FN] += 1
    return gtmp[k]


@radau_njit(cache=True, inline="always")
def radau_crossing(go, gn, direction):
    """True when (go, gn) is a sign change in the watched direction (see the module docstring)."""
    if go < 0.0 and gn >= 0.0 and direction >= 0:
        return True
    if go > 0.0 and gn <= 0.0 and direction <= 0:
        return True
    return False


@radau_njit(cache=True, inline="always")
def radau_locate(events_fn, t_s, h_s, t_new, y_s, qd, p, m, d, w, g_old, g_st, g_new, event_dir, tol,
                 stage_checks, yint, gtmp, ev_hit, ev_root, stats):
    """Earliest state event(s) in (t_s, t_new] on the dense output.

    The event functions are known at the step start (``g_old``) and the step
    end (``g_new``), and with ``stage_checks`` also at the first two stage
    points ``t_s + c_i h`` (``g_st``); for each function the first of these
    sub-intervals with a sign change of the watched direction is searched, so
    with stage checks a function that crosses and re-crosses zero inside a
    step is still caught when a stage point falls between the crossings. The root is found by the Illinois
    variant of regula falsi on the interpolant until the bracket is shorter
    than ``tol``; the right end is taken. Events whose roots lie within ``tol``
    of the earliest form one group (``ev_hit``), applied at the latest root of
    the group. Returns (t_event, group size).
    """
    n_ev = event_dir.shape[0]
    t_first = radau_np.inf
    n_cross = 0
    for k in range(n_ev):
        ev_hit[k] = False
        ev_root[k] = radau_np.inf
        found = False
        a = t_s
        ga = g_old[k]
        b = t_new
        gb = g_new[k]
        for sub in range(3):
            if sub < 2:
                if not stage_checks:
                    continue
                tb = t_s + radau_C[sub] * h_s
                gbs = g_st[sub, k]
            else:
                tb = t_new
                gbs = g_new[k]
            if radau_crossing(ga, gbs, event_dir[k]):
                b = tb
                gb = gbs
                found = True
                break
            a = tb
            ga = gbs
        if not found:
            continue
        n_cross += 1
        s0 = 1.0 if ga > 0.0 else -1.0
        side = 0
        for it in range(200):
            width = b - a
            if width <= tol or gb == 0.0:
                break
            if it < 100:
                c = b - gb * width / (gb - ga)
                guard = 0.25 * min(tol, width)
                if not (c > a + guard):
                    c = a + guard
                if not (c < b - guard):
                    c = b - guard
            else:
                c = 0.5 * (a + b)
            gc = radau_event_value(events_fn, k, c, t_s, h_s, y_s, qd, p, m, d, w, yint, gtmp, stats)
            if gc * s0 <= 0.0:
                b = c
                gb = gc
                if side == 1:
                    ga *= 0.5
                side = 1
            else:
                a = c
                ga = gc
                if side == -1:
                    gb *= 0.5
                side = -1
        ev_root[k] = b
        if b < t_first:
            t_first = b
    if n_cross == 0:
        return t_new, 0
    t_ev = t_first
    count = 0
    for k in range(n_ev):
        if ev_root[k] <= t_first + tol:
            ev_hit[k] = True
            count += 1
            if ev_root[k] > t_ev:
                t_ev = ev_root[k]
    return t_ev, count


def radau_scratch(n_main, n_tot, n_events, n_modes, n_record=1):
    """The kernel's scratch arrays (a tuple, passed as the last argument of ``radau_integrate``).

    Allocated once by the driver, so a call that continues an integration
    allocates nothing. Their contents do not carry over between calls.
    """
    n1 = max(n_main, 1)
    e1 = max(n_events, 1)
    vec = radau_np.zeros((6, n_tot))        # ys, ynew, yold, yint, ysave, sc
    small = radau_np.zeros((5, n1))         # br, ftmp, err, zm, dz
    return (radau_np.zeros((3, n_tot)),     # z: stage increments
            radau_np.zeros((3, n1)),        # wt: transformed increments
            radau_np.zeros((3, n1)),        # f: stage right-hand sides
            radau_np.zeros((3, max(n_tot - n_main, 1))),  # fq: stage quadrature integrands
            vec, small,
            radau_np.zeros(n1, dtype=radau_np.complex128),  # bc
            radau_np.zeros((5, e1)),        # g_new, gtmp, ev_root, g_st (2 rows)
            radau_np.zeros(e1, dtype=radau_np.bool_),       # ev_hit
            radau_np.zeros(max(n_modes, 1), dtype=radau_np.int64),  # m_prev
            radau_np.zeros(n1, dtype=radau_np.int64),       # alg: algebraic row indices, then differential ones
            radau_np.zeros(3),                              # ts3: stage times
            radau_np.zeros((7, n1)),                        # kst: explicit stage derivatives
            radau_np.zeros((7, max(n_tot - n_main, 1))),    # kq: explicit stage quadrature integrands
            radau_np.zeros(max(n_record, 1)))               # rowbuf: a whole output row, when columns are chosen


@radau_intrinsic
def radau_borrow(typingctx, arr):
    """A view of ``arr`` that does not own (reference-count) its memory.

    Every array the step loop touches is such a view: numba otherwise
    increments and decrements the reference count of each array argument at
    every call of a helper or a system callback (atomic operations that cost
    more than the arithmetic of a small system). Only for arrays that outlive
    the call using the view: the driver's arrays, which it keeps until the
    kernel returns. A borrowed view must never be returned or stored.
    """
    if not isinstance(arr, radau_types.Array):
        return None

    def codegen(context, builder, sig, args):
        val = args[0]
        val = builder.insert_value(val, radau_llvm.Constant(val.type.elements[0], None), 0)  # meminfo
        val = builder.insert_value(val, radau_llvm.Constant(val.type.elements[1], None), 1)  # parent
        return val

    return arr(arr), codegen


@radau_njit(cache=True, error_model="numpy")
def radau_integrate(rhs_fn, events_fn, on_event_fn, next_time_fn, at_time_fn, start_fn, record_fn, jacobian_fn, stages_fn,
                    rhs_quad_fn, explicit_stages_fn, t_end, y, p, m, d, w, mass, atol, nominal, event_dir, n_main,
                    opt, iopt, buf, buf_t, cols, log_t, log_comp, log_kind, log_index, comp_scratch,
                    tf, ti, jac, lu_r, lu_c, lu_a, piv, f0, g_old, qd, fq0, y_fail, stats, scratch):
    """Integrate from ``tf[F_T]`` towards ``t_end``; return a status code.

    See ``emsim/solvers/compiled.py`` for the meaning of every argument. The
    state (``y``, ``m``, ``d``, ``tf``, ``ti``, Jacobian, LU factors, ``f0``,
    ``g_old``, ``qd``, ``stats``) persists in the caller's arrays, so calling
    again continues where this call stopped. ``scratch`` is
    :func:`radau_scratch`'s tuple. Every array is passed on as a borrowed
    view (:func:`radau_borrow`): the caller keeps the arrays alive.
    """
    zs, wts, fs, fqs, vec, small, bcs, evs, ev_hits, m_prevs, algs, ts3s, ksts, kqs, rowbufs = scratch
    b = radau_borrow
    return radau_loop(rhs_fn, events_fn, on_event_fn, next_time_fn, at_time_fn, start_fn, record_fn, jacobian_fn,
                      stages_fn, rhs_quad_fn, explicit_stages_fn, t_end, b(y), b(p), b(m), b(d), b(w), b(mass), b(atol), b(nominal), b(event_dir), n_main,
                      b(opt), b(iopt), b(buf), b(buf_t), b(cols), b(log_t), b(log_comp), b(log_kind), b(log_index),
                      b(comp_scratch), b(tf), b(ti), b(jac), b(lu_r), b(lu_c), b(lu_a), b(piv), b(f0), b(g_old),
                      b(qd), b(fq0), b(y_fail), b(stats),
                      b(zs), b(wts), b(fs), b(fqs), b(vec[0]), b(vec[1]), b(vec[2]), b(vec[3]), b(vec[4]),
                      b(vec[5]), b(small[0]), b(bcs), b(small[1]), b(small[2]), b(small[3]), b(small[4]),
                      b(evs[0]), b(evs[3:5]), b(evs[1]), b(ev_hits), b(evs[2]), b(m_prevs), b(algs), b(ts3s), b(ksts), b(kqs),
                      b(vec), b(small), b(rowbufs))


# without the runtime: no reference counting at all in the loop (every array is the driver's; nothing allocates)
@radau_njit(cache=True, error_model="numpy", _nrt=False)
def radau_loop(rhs_fn, events_fn, on_event_fn, next_time_fn, at_time_fn, start_fn, record_fn, jacobian_fn, stages_fn,
               rhs_quad_fn, explicit_stages_fn, t_end, y, p, m, d, w, mass, atol, nominal, event_dir, n_main,
               opt, iopt, buf, buf_t, cols, log_t, log_comp, log_kind, log_index, comp_scratch,
               tf, ti, jac, lu_r, lu_c, lu_a, piv, f0, g_old, qd, fq0, y_fail, stats,
               z, wt, f, fq, ys, ynew, yold, yint, ysave, sc, br, bc, ftmp, err, zm, dz,
               g_new, g_st, gtmp, ev_hit, ev_root, m_prev, alg, ts3, kst, kq, vec, small, rowbuf):
    """The step loop of :func:`radau_integrate` (all arrays borrowed views, scratch included)."""
    n = n_main
    n_tot = y.shape[0]
    n_quad = n_tot - n
    want_quad = 1 if n_quad > 0 else 0
    n_ev = event_dir.shape[0]
    cap_log = log_t.shape[0]
    n_cs = comp_scratch.shape[0]
    rtol = opt[0]
    event_tol = opt[1]
    max_step = opt[2]
    out_t0 = opt[3]
    out_dt = opt[4]
    h_fixed = opt[5]
    fixed = h_fixed > 0.0
    max_at_instant = iopt[0]
    max_steps = iopt[1]
    stage_checks = iopt[3] != 0
    explicit = iopt[4] == 1    # Dormand-Prince 5(4) instead of Radau IIA
    fslot = iopt[5]            # index of the work array's currency flag, -1 none (abi.py)
    one_call = iopt[6] != 0    # explicit stages through the explicit_stages callback (dopri_attempt)
    fnewt = opt[7] if opt[7] > 0.0 else max(10.0 * radau_EPS / rtol, min(0.03, radau_math.sqrt(rtol)))
    maxit = 30 if fixed else radau_MAXIT

    n_alg = 0
    for i in range(n):
        if mass[i] == 0.0:
            n_alg += 1
    k = 0
    for i in range(n):
        if mass[i] == 0.0:
            alg[k] = i
            k += 1
    for i in range(n):    # then the differential rows
        if mass[i] != 0.0:
            alg[k] = i
            k += 1

    t = tf[radau_F_T]
    ti[radau_I_FAILINFO] = -1

    if ti[radau_I_STARTED] == 0:
        if iopt[2] != 0:
            start_fn(t, y, p, m, d, w)
        ti[radau_I_JAC] = 0
        ti[radau_I_JACNOW] = 0
        ti[radau_I_LU] = 0
        ti[radau_I_LUA] = 0
        ti[radau_I_EXT] = 0
        ti[radau_I_FIRST] = 1
        ti[radau_I_NINST] = 0
        tf[radau_F_TANCHOR] = -radau_np.inf
        tf[radau_F_ETA] = 1.0
        tf[radau_F_HACC] = 0.0
        st = radau_make_consistent(jacobian_fn, rhs_fn, rhs_quad_fn, explicit and n_quad > 0, False, t, y, p, m, d, w, n,
                                   alg, n_alg, atol, rtol, nominal, jac, lu_a, f0, fq0, ftmp, dz, y_fail, tf,
                                   ti, stats)
        if st != 0:
            return st
        if n_ev > 0:
            events_fn(t, y, p, m, d, w, g_old)
            stats[radau_S_EVENT_FN] += 1
        tf[radau_F_TN] = next_time_fn(t, p, m, d)
        if fixed:
            tf[radau_F_H] = h_fixed
        elif tf[radau_F_H] <= 0.0:
            tf[radau_F_H] = radau_initial_step(rhs_fn, t, y, p, m, d, w, f0, mass, n, atol, rtol, ys, ftmp, stats)
        ti[radau_I_STARTED] = 1

    while True:
        snap = 64.0 * radau_EPS * max(1.0, abs(t))
        # ---- output rows due at the current instant (state after any events) ----
        radau_emit_at(record_fn, t, y, p, m, d, w, out_t0, out_dt, t + snap, buf, buf_t, cols, rowbuf, ti, fslot,
                      radau_w_fresh(fslot, t, stats, ti, tf))
        if radau_row_time(ti[radau_I_KOUT], out_t0, out_dt) <= t + snap:
            tf[radau_F_T] = t
            return radau_STATUS_ROWS_FULL
        if t >= t_end:
            tf[radau_F_T] = t
            return radau_STATUS_DONE
        if cap_log - ti[radau_I_NLOG] < n_ev + n_cs:
            tf[radau_F_T] = t
            return radau_STATUS_LOG_FULL
        if max_steps > 0 and stats[radau_S_STEPS] >= max_steps:
            tf[radau_F_T] = t
            return radau_STATUS_MAX_STEPS

        # ---- step size for this step ----
        h = h_fixed if fixed else tf[radau_F_H]
        if h > max_step:
            h = max_step
        if ti[radau_I_POSTEV] == 1 and not fixed and 0.0 < tf[radau_F_HPOST] < h:
            # a time event may have changed inputs (a new duty, a new set point): start with the step
            # size the previous such restart asked for, instead of the smooth-flow proposal that the
            # excited transient would reject (sampled systems restart alike every sample)
            h = tf[radau_F_HPOST]
        target = min(tf[radau_F_TN], t_end)
        rem = target - t
        lands = False
        t_land = target
        if rem <= h * (1.0 + 1e-6):
            h = rem
            lands = True
        else:
            # equal steps up to the next time event: no sliver step, and while the proposal holds
            # the same step size recurs in every sampling interval, so the LU factors are reused
            n_steps = radau_math.ceil(rem / h * (1.0 - 1e-6))
            h = rem / n_steps
        # output rows of this step must fit in the buffer
        nr = ti[radau_I_NROWS]
        k_nofit = ti[radau_I_KOUT] + (buf.shape[0] - nr)
        if radau_row_time(k_nofit, out_t0, out_dt) <= t + h + snap:
            if nr > 0:
                tf[radau_F_T] = t
                return radau_STATUS_ROWS_FULL
            t_land = radau_row_time(k_nofit - 1, out_t0, out_dt)
            h = t_land - t
            lands = True

        # ---- attempts until a step is accepted ----
        for i in range(n_tot):
            yold[i] = y[i]
        for i in range(n):
            sc[i] = atol[i] + rtol * abs(y[i])
        n_fail = 0
        cause = 0
        nit = 0
        rate = 0.0
        errn = 0.0
        dw_last = 0.0
        ti[radau_I_REJ] = 0
        while True:
            hmin = 16.0 * radau_EPS * abs(t)
            if h <= hmin or n_fail > 60:
                tf[radau_F_T] = t
                tf[radau_F_HFAIL] = h
                if cause == 3:
                    return radau_STATUS_NONFINITE  # F_TFAIL and y_fail hold the failing stage
                tf[radau_F_TFAIL] = t
                if ti[radau_I_FAILINFO] < 0:
                    # no error test decided it: name the row that changes fastest relative to its weight
                    worst = -1.0
                    for i in range(n):
                        q = abs(f0[i]) / (atol[i] + rtol * abs(y[i]))
                        if q > worst:
                            worst = q
                            ti[radau_I_FAILINFO] = i
                if cause == 2:
                    return radau_STATUS_NEWTON
                return radau_STATUS_STEP_TOO_SMALL
            if explicit:
                code, errn = dopri_attempt(jacobian_fn, rhs_fn, rhs_quad_fn, explicit_stages_fn, one_call, t, h, y,
                                           p, m, d, w, alg, n_alg, atol, rtol, nominal, jac, lu_a, f0, fq0,
                                           kst, kq, vec, small, y_fail, tf, ti, stats)
                if code != 0:
                    # the algebraic rows could not be solved at a stage (or a value was not finite)
                    n_fail += 1
                    stats[radau_S_REJECTED] += 1
                    ti[radau_I_REJ] = 1
                    cause = 3 if code == radau_STATUS_NONFINITE else 2
                    h *= 0.5
                    lands = False
                    continue
                if fixed:
                    errn = 0.0
                    break
                if errn < 1.0:
                    break
                n_fail += 1
                stats[radau_S_REJECTED] += 1
                ti[radau_I_REJ] = 1
                if not radau_math.isfinite(errn):
                    cause = 3
                    h *= 0.5
                else:
                    cause = 1
                    ti[radau_I_FAILINFO] = radau_worst_row(err, sc, n)
                    h = h / min(5.0, errn ** radau_DP_EXPO / radau_SAFE)
                lands = False
                continue
            if ti[radau_I_JAC] == 0:
                radau_jacobian(jacobian_fn, rhs_fn, t, y, p, m, d, w, f0, nominal, n, jac, ftmp, stats)
                ti[radau_I_JAC] = 1
                ti[radau_I_JACNOW] = 1
                ti[radau_I_LU] = 0
                ti[radau_I_LUA] = 0
            if ti[radau_I_LU] == 0 or abs(h - tf[radau_F_HLU]) > 1e-6 * tf[radau_F_HLU]:
                info = radau_factor(h, jac, mass, n, lu_r, lu_c, piv)
                stats[radau_S_LU] += 1
                tf[radau_F_HLU] = h
                ti[radau_I_LU] = 1
                if info != 0:
                    ti[radau_I_LU] = 0
                    n_fail += 1
                    cause = 2
                    if ti[radau_I_JACNOW] == 0:
                        ti[radau_I_JAC] = 0
                    else:
                        h *= 0.5
                        lands = False
                    continue
            # starting values
            if ti[radau_I_EXT] == 1:
                hq = tf[radau_F_QH]
                x0 = (t - tf[radau_F_QT]) / hq
                for s in range(3):
                    x = x0 + radau_C[s] * h / hq
                    for j in range(n):
                        z[s, j] = (qd[0, j] * (x - x0) + qd[1, j] * (x * x - x0 * x0)
                                   + qd[2, j] * (x * x * x - x0 * x0 * x0))
            else:
                for s in range(3):
                    for j in range(n):
                        z[s, j] = 0.0
            for i in range(n, n_tot):
                ys[i] = y[i]
            eta0 = max(tf[radau_F_ETA], radau_EPS) ** 0.8
            code, nit, rate, eta, dw_last = radau_newton(stages_fn, t, h, y, p, m, d, w, mass, n, sc, z, wt, f, fq,
                                                         ts3, ys, br, bc, lu_r, lu_c, piv, eta0, fnewt, maxit,
                                                         want_quad, y_fail, tf, stats)
            if code != 0:
                n_fail += 1
                stats[radau_S_REJECTED] += 1
                ti[radau_I_REJ] = 1
                if code == 2:
                    cause = 3
                    h *= 0.5
                    lands = False
                elif fixed:
                    tf[radau_F_T] = t
                    tf[radau_F_TFAIL] = t
                    tf[radau_F_HFAIL] = h
                    return radau_STATUS_NEWTON
                elif ti[radau_I_JACNOW] == 0:
                    cause = 2
                    ti[radau_I_JAC] = 0
                else:
                    cause = 2
                    h *= 0.5
                    lands = False
                continue
            tf[radau_F_ETA] = eta
            for i in range(n):
                ynew[i] = y[i] + z[2, i]
            for i in range(n, n_tot):
                ynew[i] = y[i]
            if fixed:
                errn = 0.0
                break
            refine = ti[radau_I_FIRST] == 1 or ti[radau_I_REJ] == 1
            errn = radau_error(rhs_fn, t, h, y, ynew, z, f0, mass, n, atol, rtol, lu_r, piv, p, m, d, w,
                               refine, err, zm, sc, ys, ftmp, stats)
            # (radau_error overwrote sc with the error weights; restored below on rejection)
            if not radau_math.isfinite(errn):
                n_fail += 1
                stats[radau_S_REJECTED] += 1
                ti[radau_I_REJ] = 1
                cause = 3
                for i in range(n):
                    sc[i] = atol[i] + rtol * abs(y[i])
                h *= 0.5
                lands = False
                continue
            if errn < 1.0:
                break
            # rejected by the error test
            n_fail += 1
            cause = 1
            stats[radau_S_REJECTED] += 1
            ti[radau_I_FAILINFO] = radau_worst_row(err, sc, n)
            for i in range(n):
                sc[i] = atol[i] + rtol * abs(y[i])
            fac = min(radau_SAFE, radau_SAFE * (1 + 2 * radau_MAXIT) / (nit + 2 * radau_MAXIT))
            quot = max(0.125, min(5.0, radau_math.sqrt(radau_math.sqrt(errn)) / fac))
            if ti[radau_I_FIRST] == 1:
                h *= 0.1
            else:
                h = h / quot
            ti[radau_I_REJ] = 1
            lands = False

        # ---- accepted ----
        t_s = t
        h_s = h
        t_new = t_land if lands else t + h
        f_converged = False
        if explicit:
            # the dense output only where it is read: an output row inside the step, or event functions
            # to locate (a sampled drive with rows at its samples never interpolates)
            if n_ev > 0 or radau_row_time(ti[radau_I_KOUT], out_t0, out_dt) <= t_new - 64.0 * radau_EPS * max(1.0, abs(t_new)):
                dopri_dense(h, yold, ynew, mass, n, kst, kq, qd)
            tf[radau_F_QT] = t_s
            tf[radau_F_QH] = h_s
            stats[radau_S_STEPS] += 1
            if not fixed:
                # errn**EXPO / facold**BETA as one exp of logs, the last step's log kept (glibc's pow
                # was 3 % of a drive run; log(0) = -inf gives the same 0 as 0**EXPO)
                log_err = radau_math.log(errn)
                log_old = tf[radau_F_LOGERR] if tf[radau_F_ERRACC] > 0.0 else radau_DP_LOG_FLOOR
                fac = max(0.1, min(5.0, radau_math.exp(radau_DP_EXPO * log_err - radau_DP_BETA * log_old) / radau_SAFE))
                h_new = h / fac
                if ti[radau_I_REJ] == 1 and h_new > h:
                    h_new = h
                tf[radau_F_ERRACC] = max(errn, 1e-4)
                tf[radau_F_LOGERR] = max(log_err, radau_DP_LOG_FLOOR)
                if ti[radau_I_POSTEV] == 1:
                    tf[radau_F_HPOST] = h_new
                tf[radau_F_H] = h_new
        else:
            if n_quad > 0:
                if dw_last > radau_QUAD_REUSE * fnewt:
                    # the integrands at the converged stages, in one callback (f is free once Newton is done;
                    # ts3 holds this step's stage times). Newton's last evaluation is too far from them: when
                    # Newton stops after one iteration its stages are the starting guess
                    stages_fn(ts3, y, z, ys, p, m, d, w, f, fq, 1)
                    stats[radau_S_RHS] += 3
                    stats[radau_S_QUAD] += 3
                    f_converged = True
                # else: Newton's last evaluation, a correction of at most QUAD_REUSE * fnewt error weights away
                for s in range(3):
                    if not radau_dense.all_finite(fq[s], n_quad):
                        for j in range(n):
                            y_fail[j] = y[j] + z[s, j]
                        for j in range(n, n_tot):
                            y_fail[j] = y[j]
                        tf[radau_F_T] = t
                        tf[radau_F_TFAIL] = t + radau_C[s] * h
                        tf[radau_F_HFAIL] = h
                        ti[radau_I_FAILINFO] = -1
                        return radau_STATUS_NONFINITE
                for q in range(n_quad):
                    for s in range(3):
                        z[s, n + q] = h * (radau_A[s, 0] * fq[0, q] + radau_A[s, 1] * fq[1, q]
                                           + radau_A[s, 2] * fq[2, q])
                    ynew[n + q] = y[n + q] + z[2, n + q]
            for i in range(n_tot):
                for kk in range(3):
                    qd[kk, i] = radau_P[kk, 0] * z[0, i] + radau_P[kk, 1] * z[1, i] + radau_P[kk, 2] * z[2, i]
            tf[radau_F_QT] = t_s
            tf[radau_F_QH] = h_s
            ti[radau_I_EXT] = 1
            stats[radau_S_STEPS] += 1

            # step-size proposal
            if nit > 2 and rate > 1e-3:
                ti[radau_I_JAC] = 0
            if not fixed:
                fac = min(radau_SAFE, radau_SAFE * (1 + 2 * radau_MAXIT) / (nit + 2 * radau_MAXIT))
                quot = max(0.125, min(5.0, radau_math.sqrt(radau_math.sqrt(errn)) / fac))
                if ti[radau_I_POSTEV] == 1:
                    tf[radau_F_HPOST] = h / quot
                if ti[radau_I_FIRST] == 0 and tf[radau_F_HACC] > 0.0:
                    facgus = (tf[radau_F_HACC] / h) * radau_math.sqrt(radau_math.sqrt(errn * errn / tf[radau_F_ERRACC])) / radau_SAFE
                    facgus = max(0.125, min(5.0, facgus))
                    quot = max(quot, facgus)
                tf[radau_F_HACC] = h
                tf[radau_F_ERRACC] = max(1e-2, errn)
                h_new = h / quot
                if ti[radau_I_REJ] == 1 and h_new > h:
                    h_new = h
                if ti[radau_I_JAC] == 1 and h_new >= h and h_new <= 1.2 * h:
                    h_new = h
                tf[radau_F_H] = h_new
        ti[radau_I_JACNOW] = 0
        ti[radau_I_FIRST] = 0
        ti[radau_I_REJ] = 0
        ti[radau_I_POSTEV] = 0

        # ---- state events on the step ----
        t_ev = t_new
        n_hit = 0
        if n_ev > 0:
            events_fn(t_new, ynew, p, m, d, w, g_new)
            stats[radau_S_EVENT_FN] += 1
            if stage_checks:
                for s in range(2):
                    radau_interp(t_s + radau_C[s] * h_s, t_s, h_s, yold, qd, yint)
                    events_fn(t_s + radau_C[s] * h_s, yint, p, m, d, w, g_st[s])
                stats[radau_S_EVENT_FN] += 2
            tol = event_tol * max(1.0, abs(t_new))
            t_ev, n_hit = radau_locate(events_fn, t_s, h_s, t_new, yold, qd, p, m, d, w, g_old, g_st, g_new, event_dir,
                                       tol, stage_checks, yint, gtmp, ev_hit, ev_root, stats)
        snap = 64.0 * radau_EPS * max(1.0, abs(t_ev))
        radau_emit_interp(record_fn, t_s, h_s, yold, qd, p, m, d, w, out_t0, out_dt, t_ev - snap, buf, buf_t, cols,
                          rowbuf, ti, yint)
        if n_hit > 0 and t_ev < t_new:
            radau_interp(t_ev, t_s, h_s, yold, qd, y)
        else:
            for i in range(n_tot):
                y[i] = ynew[i]
        t = t_ev
        time_due = t >= tf[radau_F_TN] - snap
        if time_due:
            t = tf[radau_F_TN]
        if n_hit == 0 and not time_due:
            if explicit and not lands:
                # first same as last: the last stage was this point, made consistent
                for i in range(n):
                    f0[i] = kst[6, i]
                for q in range(n_quad):
                    fq0[q] = kq[6, q]
            elif f_converged and not lands and ts3[2] == t:
                # the quadrature call evaluated the last stage, (t_s + h, y_s + z_3) = (t, y): f0 is known
                for i in range(n):
                    f0[i] = f[2, i]
            elif explicit and n_quad > 0:
                rhs_quad_fn(t, y, p, m, d, w, f0, fq0)
                stats[radau_S_RHS] += 1
                stats[radau_S_QUAD] += 1
            else:
                rhs_fn(t, y, p, m, d, w, f0)
                stats[radau_S_RHS] += 1
            bad = radau_dense.first_nonfinite(f0, n)
            if bad >= 0:
                for i in range(n_tot):
                    y_fail[i] = y[i]
                tf[radau_F_T] = t
                tf[radau_F_TFAIL] = t
                ti[radau_I_FAILINFO] = bad
                return radau_STATUS_NONFINITE
            for kk in range(n_ev):
                g_old[kk] = g_new[kk]
            continue

        # ---- events at this instant: state events (index order), then time events ----
        window = 1e3 * event_tol * max(1.0, abs(t))
        if t - tf[radau_F_TANCHOR] <= window:
            ti[radau_I_NINST] += 1
        else:
            tf[radau_F_TANCHOR] = t
            ti[radau_I_NINST] = 1
        if ti[radau_I_NINST] > max_at_instant:
            tf[radau_F_T] = t
            tf[radau_F_TFAIL] = t
            ti[radau_I_FAILINFO] = -1
            for kk in range(n_ev):
                if ev_hit[kk]:
                    ti[radau_I_FAILINFO] = kk
                    break
            return radau_STATUS_CHATTERING
        nlog = ti[radau_I_NLOG]
        for kk in range(n_ev):
            if ev_hit[kk]:
                comp = on_event_fn(kk, t, y, p, m, d, w)
                log_t[nlog] = t
                log_comp[nlog] = comp
                log_kind[nlog] = 2
                log_index[nlog] = kk
                nlog += 1
                stats[radau_S_STATE_EVENTS] += 1
        if n_hit > 0:
            ti[radau_I_JAC] = 0
            ti[radau_I_EXT] = 0
            ti[radau_I_FIRST] = 1
        if time_due:
            for i in range(m.shape[0]):
                m_prev[i] = m[i]
            for i in range(n_tot):
                ysave[i] = y[i]
            fresh = radau_w_fresh(fslot, t, stats, ti, tf)    # typically: the step's last stage landed here
            if fresh:
                w[fslot] = 1.0
            cnt = at_time_fn(t, y, p, m, d, w, comp_scratch)
            if fresh:
                w[fslot] = 0.0
            for i in range(cnt):
                log_t[nlog] = t
                log_comp[nlog] = comp_scratch[i]
                log_kind[nlog] = 1
                log_index[nlog] = -1
                nlog += 1
            stats[radau_S_TIME_EVENTS] += cnt
            ti[radau_I_POSTEV] = 1
            for i in range(m.shape[0]):
                if m[i] != m_prev[i]:
                    ti[radau_I_JAC] = 0
                    break
            for i in range(n_tot):
                if y[i] != ysave[i]:
                    ti[radau_I_EXT] = 0
                    break
        ti[radau_I_NLOG] = nlog
        st = radau_make_consistent(jacobian_fn, rhs_fn, rhs_quad_fn, explicit and n_quad > 0, False, t, y, p, m, d, w, n,
                                   alg, n_alg, atol, rtol, nominal, jac, lu_a, f0, fq0, ftmp, dz, y_fail, tf,
                                   ti, stats)
        if st != 0:
            tf[radau_F_T] = t
            return st
        if n_ev > 0:
            events_fn(t, y, p, m, d, w, g_old)
            stats[radau_S_EVENT_FN] += 1
        tf[radau_F_TN] = next_time_fn(t, p, m, d)
