"""Single source of truth for the benchmark drive model.

Every constant the benchmarks use lives here, so the hand-written baselines
(benchmarks/baselines.py) and the emsim side (benchmarks/emsim_side.py) build
exactly the same system.  All values are SI.

System (motor drive with a sampled speed loop)::

    48 V battery (0.05 ohm) -> averaged H-bridge (duty d) -> DC motor
    -> rigid ideal gear (N = 10) -> compliant shaft -> load inertia

State vector ``y`` (order used by every baseline)::

    y[0] = i      armature current                      [A]
    y[1] = w_m    motor-side rigid group speed          [rad/s]
    y[2] = w_L    load speed                            [rad/s]
    y[3] = theta  shaft twist (gear output minus load)  [rad]
    y[4] = q      charge drawn from the battery         [C]

Equations (V_bus eliminated by hand: V_bus = V_OC - R_BATT * d * i)::

    L  * i'     = d * (V_OC - R_BATT*d*i) - R_A*i - K_M*w_m
    J_M* w_m'   = K_M*i - T_s/N
    J_L* w_L'   = T_s - B_L*w_L - T_extra(w_L)
    theta'      = w_m/N - w_L
    q'          = d*i                                  (bus current)
    T_s         = K_SHAFT*theta + C_SHAFT*(w_m/N - w_L)
    T_extra(w)  = C_QUAD*w*|w| + T_COUL*tanh(w/W_COUL)   (nonlinear variant,
                                                          zero otherwise)

Controller: discrete PI on the load speed, sampled every TS = 1 ms with a
zero-order hold.  At t_k = k*TS (k = 0, 1, ...), using the integrator value
``integ`` carried from the previous samples (0 at k = 0)::

    e      = w_ref(t_k) - w_L(t_k)
    u      = KP*e + integ
    d      = clip(u, -1, 1)                 # applied on [t_k, t_{k+1})
    if not ((u > 1 and e > 0) or (u < -1 and e < 0)):
        integ = integ + KI*e*TS             # clamping anti-windup

i.e. the duty uses the integrator value *before* this sample's update
(forward-Euler integrator), and the integrator is frozen while the output is
saturated in the direction of the error.

Gains: KP = 0.05 duty per rad/s, KI = 1.0 duty per rad (i.e. per rad/s
per second), both acting on the load-speed error.  Design: the plant from
duty to load speed has DC gain V_OC/(N*K_M) = 48 rad/s per unit duty and a
mechanical lag R_A*(J_M + J_L/N^2)/K_M^2 ~ 28 ms, so KP = 0.05 gives a loop
crossover near 85 rad/s, well below the shaft resonance (~470 rad/s
open-loop, base) and the 1 kHz sample rate; KI/KP = 20 rad/s puts the PI
zero below crossover.  Linearised discrete closed loop (base variant):
real pole -16 1/s, control pair zeta ~ 0.55, shaft pair zeta ~ 0.33 (the
shaft's own damping); no overshoot, no saturation, ramp-following lag
30/(48*KI) ~ 0.63 rad/s.  Stiff variant: same gains, dominant poles real,
shaft pair zeta ~ 0.10 (again the coupling's own damping).  KP = 0.5 /
KI = 5 is unstable here (discrete closed-loop |z| = 1.12: crossover beyond
the shaft resonance).

Speed reference: repeating trapezoid, period 5 s: ramp 0 -> 30 rad/s over
1 s, hold 30 rad/s for 2 s, ramp down over 1 s, dwell at 0 for 1 s.
Simulated time: T_END = 10 s (two periods); 10000 controller samples.

Variants (keys are the benchmark names):

    "averaged-drive"            base parameters, linear load
    "averaged-drive-nonlinear"  base parameters + T_extra
    "stiff-drive"               L = 50 uH, shaft 5e4 N*m/rad, 1.0 N*m*s/rad,
                                linear load, same controller

Output grid for accuracy comparisons: load speed at the sample instants
t_k = k*TS, k = 0..N_SAMPLES (inclusive, 10001 points), taken *before* the
controller update at t_k (w_L is continuous, so before/after is the same).
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
import numba

# --- electrical ------------------------------------------------------------
V_OC = 48.0          # battery open-circuit voltage [V] (constant)
R_BATT = 0.05        # battery internal resistance [ohm]
R_A = 0.5            # armature resistance [ohm]
L_A = 1.0e-3         # armature inductance [H] (base)
L_A_STIFF = 50.0e-6  # armature inductance [H] (stiff variant)
K_M = 0.1            # torque / back-EMF constant [N*m/A = V*s/rad]

# --- mechanical --------------------------------------------------------------
J_M = 5.0e-5         # rotor inertia (motor-side rigid group; gear adds 0) [kg*m^2]
GEAR_N = 10.0        # gear ratio, motor speed = GEAR_N * gear output speed
K_SHAFT = 500.0      # shaft stiffness [N*m/rad] (base)
C_SHAFT = 0.05       # shaft damping [N*m*s/rad] (base)
K_SHAFT_STIFF = 5.0e4  # shaft stiffness [N*m/rad] (stiff variant)
C_SHAFT_STIFF = 1.0    # shaft damping [N*m*s/rad] (stiff variant)
J_L = 0.05           # load inertia [kg*m^2]
B_L = 1.0e-3         # load viscous friction [N*m*s/rad]

# --- nonlinear load (variant "averaged-drive-nonlinear") --------------------
C_QUAD = 2.0e-3      # fan-like quadratic drag [N*m*s^2/rad^2]
T_COUL = 0.05        # smoothed Coulomb friction level [N*m]
W_COUL = 0.01        # tanh smoothing speed [rad/s]

# --- controller ---------------------------------------------------------------
TS = 1.0e-3          # controller sample period [s]
KP = 0.05            # proportional gain [duty per rad/s]
KI = 1.0             # integral gain [duty per rad]  (duty per rad/s per s)
D_MIN = -1.0
D_MAX = 1.0

# --- reference profile ------------------------------------------------------
W_REF_MAX = 30.0     # [rad/s]
T_RAMP_UP = 1.0      # [s]
T_HOLD = 2.0         # [s]
T_RAMP_DOWN = 1.0    # [s]
T_DWELL = 1.0        # [s]
T_PERIOD = T_RAMP_UP + T_HOLD + T_RAMP_DOWN + T_DWELL  # 5 s

# --- run ----------------------------------------------------------------------
T_END = 10.0
N_SAMPLES = 10000    # = round(T_END / TS)
N_STATES = 5
IDX_I, IDX_WM, IDX_WL, IDX_TH, IDX_Q = range(N_STATES)
Y0 = (0.0, 0.0, 0.0, 0.0, 0.0)


class Params(NamedTuple):
    """Plant parameters of one variant (all floats, numba-friendly)."""
    L: float
    R: float
    k: float
    Jm: float
    N: float
    Ks: float
    Cs: float
    JL: float
    bL: float
    Voc: float
    Rb: float
    c_quad: float
    t_coul: float
    w_coul: float


BASE = Params(L=L_A, R=R_A, k=K_M, Jm=J_M, N=GEAR_N, Ks=K_SHAFT, Cs=C_SHAFT,
              JL=J_L, bL=B_L, Voc=V_OC, Rb=R_BATT,
              c_quad=0.0, t_coul=0.0, w_coul=W_COUL)

VARIANTS: dict[str, Params] = {
    "averaged-drive": BASE,
    "averaged-drive-nonlinear": BASE._replace(c_quad=C_QUAD, t_coul=T_COUL),
    "stiff-drive": BASE._replace(L=L_A_STIFF, Ks=K_SHAFT_STIFF, Cs=C_SHAFT_STIFF),
}
BENCHMARKS = tuple(VARIANTS)


def params(variant) -> Params:
    return VARIANTS[variant] if isinstance(variant, str) else variant


def sample_times() -> np.ndarray:
    """Common output grid: t_k = k*TS, k = 0..N_SAMPLES."""
    return np.arange(N_SAMPLES + 1) * TS


# --- reference ------------------------------------------------------------------
def w_ref(t: float) -> float:
    """Speed reference [rad/s] at time t (repeating trapezoid)."""
    tau = t - T_PERIOD * math.floor(t / T_PERIOD)
    if tau < T_RAMP_UP:
        return W_REF_MAX * tau / T_RAMP_UP
    tau -= T_RAMP_UP
    if tau < T_HOLD:
        return W_REF_MAX
    tau -= T_HOLD
    if tau < T_RAMP_DOWN:
        return W_REF_MAX * (1.0 - tau / T_RAMP_DOWN)
    return 0.0


w_ref_nb = numba.njit(cache=True)(w_ref)


# --- PI update --------------------------------------------------------------------
def pi_update(e: float, integ: float) -> tuple[float, float]:
    """One controller sample: returns (duty, new integrator value)."""
    u = KP * e + integ
    d = D_MAX if u > D_MAX else (D_MIN if u < D_MIN else u)
    if not ((u > D_MAX and e > 0.0) or (u < D_MIN and e < 0.0)):
        integ = integ + KI * e * TS
    return d, integ


pi_update_nb = numba.njit(cache=True)(pi_update)


# --- right-hand side ------------------------------------------------------------
def rhs(t, y, d, variant):
    """dy/dt for duty ``d`` held constant; ``variant`` is a name or Params."""
    p = params(variant)
    i, wm, wl, th = y[0], y[1], y[2], y[3]
    rel = wm / p.N - wl
    ts = p.Ks * th + p.Cs * rel
    t_extra = p.c_quad * wl * abs(wl) + p.t_coul * math.tanh(wl / p.w_coul)
    v_bus = p.Voc - p.Rb * d * i
    return np.array([
        (d * v_bus - p.R * i - p.k * wm) / p.L,
        (p.k * i - ts / p.N) / p.Jm,
        (ts - p.bL * wl - t_extra) / p.JL,
        rel,
        d * i,
    ])


@numba.njit(cache=True)
def rhs_nb(y, d, p, out):
    """Allocation-free numba version of :func:`rhs`; ``p`` is a Params tuple."""
    (L, R, k, Jm, N, Ks, Cs, JL, bL, Voc, Rb, c_quad, t_coul, w_coul) = p
    i = y[0]
    wm = y[1]
    wl = y[2]
    th = y[3]
    rel = wm / N - wl
    ts = Ks * th + Cs * rel
    t_extra = c_quad * wl * abs(wl) + t_coul * math.tanh(wl / w_coul)
    v_bus = Voc - Rb * d * i
    out[0] = (d * v_bus - R * i - k * wm) / L
    out[1] = (k * i - ts / N) / Jm
    out[2] = (ts - bL * wl - t_extra) / JL
    out[3] = rel
    out[4] = d * i
