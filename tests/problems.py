"""Plain test problems for the solver tests, written in the numba subset.

The generated standalone modules import this file by name (``problems``; see
``emsim/solvers/standalone.py``). Compiling the integrator into a generated
module takes a while, so all test problems share ONE set of functions: the
problem is selected by ``p[0]`` (the ``BANK_*`` numbers below) and its
parameters follow in ``p[1:]``. Every test then reuses one compiled module.
"""
import math

import numpy as np

ROBERTSON = 0        # Hairer & Wanner, Solving ODEs II, IV.1 (1.4): k1=0.04, k2=3e7, k3=1e4
ROBERTSON_DAE = 1    # same, third equation replaced by y1 + y2 + y3 = 1 (algebraic row)
VAN_DER_POL = 2      # Hairer & Wanner II, IV.1 (1.5'): y1' = y2, eps*y2' = (1 - y1^2) y2 - y1
HIRES = 3            # Hairer & Wanner II, IV.10 test set, "HIRES" (Schaefer 1975), 8 states
SMOOTH = 4           # y1' = y1 cos t, y2' = -2 t y2^2 (+ quadrature q' = y2): exact solution known
GAP = 5              # inertia under constant torque closing a gap, stops on contact
BOUNCE = 6           # point mass under gravity bouncing with restitution e
RETRIGGER = 7        # reset map that puts the state just before the switching surface again
STEP_INPUT = 8       # y' = u, u jumps from +1 to -1 at a time event t1
SAMPLED = 9          # y' = -a y + u, u = -K y sampled every Ts (zero-order hold)
BLOWUP = 10          # y' = y^2, y(0) = 1: blows up at t = 1
SQRT_NEG = 11        # y1' = 1, y2' = sqrt(1 - y1): no real solution after t = 1
DRIVE = 12           # small DC drive, 5 differential + 3 algebraic rows, PI speed control sampled every Ts

# DRIVE parameters p[1:]: (L, R, k, Jm, ks, c, Jl, b, T_load, tau, Vdc, R_src, Kp, Ki, w_ref, Ts)
DRIVE_P = (2e-3, 0.5, 0.1, 2e-4, 50.0, 0.05, 1e-3, 1e-3, 0.05, 2e-3, 48.0, 0.05, 0.5, 20.0, 100.0, 1e-3)


def bank_rhs(t, y, p, m, d, dy):
    sel = int(p[0])
    if sel == ROBERTSON or sel == ROBERTSON_DAE:
        r1 = 0.04 * y[0]
        r2 = 1e4 * y[1] * y[2]
        r3 = 3e7 * y[1] * y[1]
        dy[0] = -r1 + r2
        dy[1] = r1 - r2 - r3
        if sel == ROBERTSON:
            dy[2] = r3
        else:
            dy[2] = y[0] + y[1] + y[2] - 1.0
    elif sel == VAN_DER_POL:
        eps = p[1]
        dy[0] = y[1]
        dy[1] = ((1.0 - y[0] * y[0]) * y[1] - y[0]) / eps
    elif sel == HIRES:
        dy[0] = -1.71 * y[0] + 0.43 * y[1] + 8.32 * y[2] + 0.0007
        dy[1] = 1.71 * y[0] - 8.75 * y[1]
        dy[2] = -10.03 * y[2] + 0.43 * y[3] + 0.035 * y[4]
        dy[3] = 8.32 * y[1] + 1.71 * y[2] - 1.12 * y[3]
        dy[4] = -1.745 * y[4] + 0.43 * y[5] + 0.43 * y[6]
        dy[5] = -280.0 * y[5] * y[7] + 0.69 * y[3] + 1.71 * y[4] - 0.43 * y[5] + 0.69 * y[6]
        dy[6] = 280.0 * y[5] * y[7] - 1.81 * y[6]
        dy[7] = -dy[6]
    elif sel == SMOOTH:
        dy[0] = y[0] * math.cos(t)
        dy[1] = -2.0 * t * y[1] * y[1]
    elif sel == GAP:
        # y = (angle, speed); p = (sel, torque, inertia, gap); m[0] = 1 after contact
        if m[0] == 0:
            dy[0] = y[1]
            dy[1] = p[1] / p[2]
        else:
            dy[0] = 0.0
            dy[1] = 0.0
    elif sel == BOUNCE:
        # y = (height, velocity); p = (sel, g, e)
        dy[0] = y[1]
        dy[1] = -p[1]
    elif sel == RETRIGGER:
        dy[0] = 1.0
    elif sel == STEP_INPUT:
        dy[0] = d[0]
    elif sel == SAMPLED:
        # p = (sel, a, K, Ts)
        dy[0] = -p[1] * y[0] + d[0]
    elif sel == BLOWUP:
        dy[0] = y[0] * y[0]
    elif sel == SQRT_NEG:
        dy[0] = 1.0
        dy[1] = math.sqrt(1.0 - y[0])
    elif sel == DRIVE:
        # y = (i, w_m, twist, w_l, w_filtered | v_t, T_e, T_s); d = (duty, integral)
        i, wm, th, wl, x, vt, te, tsh = y[0], y[1], y[2], y[3], y[4], y[5], y[6], y[7]
        dy[0] = (vt - p[2] * i - p[3] * wm) / p[1]
        dy[1] = (te - tsh) / p[4]
        dy[2] = wm - wl
        dy[3] = (tsh - p[8] * wl - p[9]) / p[7]
        dy[4] = (wm - x) / p[10]
        dy[5] = vt - (d[0] * p[11] - p[12] * i)
        dy[6] = te - p[3] * i
        dy[7] = tsh - (p[5] * th + p[6] * (wm - wl))


def bank_quad(t, y, p, m, d, dq):
    # SMOOTH: q' = y2 = 1/(1 + t^2), so q = atan(t)
    dq[0] = y[1]


def bank_events(t, y, p, m, d, g):
    sel = int(p[0])
    if sel == GAP:
        g[0] = y[0] - p[3]
    elif sel == BOUNCE:
        g[0] = y[0]
    elif sel == RETRIGGER:
        g[0] = y[0] - 1.0


def bank_on_event(k, t, y, p, m, d):
    sel = int(p[0])
    if sel == GAP:
        m[0] = 1
        y[1] = 0.0
    elif sel == BOUNCE:
        y[1] = -p[2] * y[1]
    elif sel == RETRIGGER:
        y[0] = 1.0 - 1e-13


def bank_next_time(t, p, m, d):
    sel = int(p[0])
    if sel == STEP_INPUT:
        # p = (sel, t1)
        if t < p[1]:
            return p[1]
        return np.inf
    if sel == SAMPLED or sel == DRIVE:
        ts = p[3] if sel == SAMPLED else p[16]
        k = math.floor(t / ts) + 1.0
        if k * ts <= t:
            k += 1.0
        return k * ts
    return np.inf


def bank_at_time(t, y, p, m, d):
    sel = int(p[0])
    if sel == STEP_INPUT:
        d[0] = -1.0
    elif sel == SAMPLED:
        d[0] = -p[2] * y[0]
    elif sel == DRIVE:
        # PI on the filtered speed, output clamped to [-1, 1], integration stops while clamped
        e = p[15] - y[4]
        u = p[13] * e + p[14] * (d[1] + p[16] * e)
        if u > 1.0:
            d[0] = 1.0
        elif u < -1.0:
            d[0] = -1.0
        else:
            d[0] = u
            d[1] += p[16] * e

def make(sel, y0, params=(), *, directions=(), n_quad=0, **kw):
    """A standalone problem of the bank: every problem shares the same compiled module."""
    from emsim.solvers.standalone import compile_standalone

    return compile_standalone(
        bank_rhs, y0, events=bank_events, directions=directions, on_event=bank_on_event,
        time_events=(bank_next_time, bank_at_time), n_quad=n_quad, quad=bank_quad,
        p=(float(sel), *params), name="solver_test_bank", **kw)


def smooth_exact(t):
    """Closed form of the SMOOTH problem: y1' = y1 cos t -> exp(sin t); y2' = -2 t y2^2 -> 1/(1 + t^2);
    q' = y2 -> atan t."""
    return np.array([np.exp(np.sin(t)), 1.0 / (1.0 + t * t), np.arctan(t)])


def drive_segment_reference(n):
    """Reference for the DRIVE problem over ``n`` samples: the 5 differential states at every sample.

    scipy solve_ivp(Radau) on each sampling interval with the algebraic rows eliminated by hand
    and the same PI controller (clamping, held duty cycle) applied between intervals.
    """
    from scipy.integrate import solve_ivp

    L, R, k, Jm, ks, c, Jl, b, TL, tau, Vdc, Rs, Kp, Ki, wref, Ts = DRIVE_P

    def f(t, x, duty):
        i, wm, th, wl, wf = x
        vt = duty * Vdc - Rs * i
        tsh = ks * th + c * (wm - wl)
        return [(vt - R * i - k * wm) / L, (k * i - tsh) / Jm, wm - wl, (tsh - b * wl - TL) / Jl, (wm - wf) / tau]

    x = np.zeros(5)
    duty, integ = 0.0, 0.0
    ref = [x.copy()]
    for j in range(n):
        seg = solve_ivp(f, (j * Ts, (j + 1) * Ts), x, method="Radau", rtol=1e-11, atol=1e-12, args=(duty,))
        x = seg.y[:, -1].copy()
        ref.append(x.copy())
        e = wref - x[4]
        u = Kp * e + Ki * (integ + Ts * e)
        if u > 1.0:
            duty = 1.0
        elif u < -1.0:
            duty = -1.0
        else:
            duty = u
            integ += Ts * e
    return np.array(ref)


# CHAIN: 12 decoupled decays x_k' = -(k + 1) x_k + (z_k - x_k - x_{k+1}) interleaved with 10 algebraic
# rows 0 = z_k - x_k - x_{k+1} (k < 10): on the constraint the coupling term is zero, so
# x_k(t) = x_k(0) exp(-(k + 1) t). Rows: x_k at 2k and z_k at 2k + 1 for k < 10, then x_10, x_11.
CHAIN_DIFF = 12
CHAIN_ALG = 10


def chain_rows():
    """(row of x_k for k < 12, row of z_k for k < 10, mass diagonal)."""
    xr = [2 * k for k in range(CHAIN_ALG)] + [2 * CHAIN_ALG + j for j in range(CHAIN_DIFF - CHAIN_ALG)]
    zr = [2 * k + 1 for k in range(CHAIN_ALG)]
    mass = np.ones(CHAIN_DIFF + CHAIN_ALG)
    mass[zr] = 0.0
    return xr, zr, mass


def chain_rhs(t, y, dy):
    n_alg = 10
    for k in range(12):
        xk = y[2 * k] if k < n_alg else y[2 * n_alg + k - n_alg]
        coupling = 0.0
        if k < n_alg:
            xn = y[2 * (k + 1)] if k + 1 < n_alg else y[2 * n_alg + k + 1 - n_alg]
            coupling = y[2 * k + 1] - xk - xn
            dy[2 * k + 1] = coupling
            dy[2 * k] = -(k + 1.0) * xk + coupling
        else:
            dy[2 * n_alg + k - n_alg] = -(k + 1.0) * xk
