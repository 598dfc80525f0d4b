"""DC motor step response against closed forms and scipy.signal.

Outside references:
- Armature-controlled DC motor transfer functions (Ogata, *Modern Control Engineering*;
  Nise, *Control Systems Engineering*, ch. 2 -- from memory):
      w(s)/V(s) = k / ((J s + b)(L s + R) + k^2)
      I(s)/V(s) = (J s + b) / ((J s + b)(L s + R) + k^2)
- Step response of a second-order system with distinct real poles p1, p2 (partial
  fractions, any control text, from memory):
      w(t) = w_ss * (1 + (p2 e^{p1 t} - p1 e^{p2 t}) / (p1 - p2))
- scipy.signal.step (an independent LTI step-response implementation).
- Steady state k V/(R b + k^2), stall current V/R, stall torque k V/R, no-load
  speed V/k for b = 0 (common practice), locked-rotor current V/R (1 - e^{-t R/L})
  (closed form of an R-L circuit, common practice).
"""
from __future__ import annotations

import numpy as np
import pytest
import scipy.signal

from helpers import MOTOR, V_SUPPLY, build_dc_motor, run, tol

R, L, K = MOTOR["resistance"], MOTOR["inductance"], MOTOR["torque_constant"]
J, B = 0.01, 1e-3
V = V_SUPPLY

_runs: dict = {}


def cached(key, solver, build, t_end, out_dt):
    k = (key, id(solver))
    if k not in _runs:
        _runs[k] = run(build(), t_end, solver, out_dt)
    return _runs[k]


@pytest.fixture(scope="module")
def step(solver):
    # 20 s: the slow pole (~ -1.16 1/s) has decayed to e^-23 ~ 1e-10 by the end (steady state).
    return cached("step", solver, lambda: build_dc_motor(inertia=J, viscous=B), 20.0, 0.01)


def denominator(j, b):
    # (J s + b)(L s + R) + k^2, highest power first
    return [j * L, j * R + b * L, b * R + K * K]


def closed_form_speed(t, j, b):
    """Ogata/Nise transfer function, inverted by partial fractions (from memory)."""
    p1, p2 = np.roots(denominator(j, b)).astype(complex)
    w_ss = K * V / (b * R + K * K)
    return (w_ss * (1 + (p2 * np.exp(p1 * t) - p1 * np.exp(p2 * t)) / (p1 - p2))).real


def test_speed_follows_closed_form_and_scipy_signal(step, solver):
    t, w = step.time, step["rotor.speed"]
    ref = closed_form_speed(t, J, B)
    _, ref_scipy = scipy.signal.step(([K * V], denominator(J, B)), T=t)
    scale = K * V / (B * R + K * K)
    err = np.max(np.abs(w - ref)) / scale
    err_scipy = np.max(np.abs(w - ref_scipy)) / scale
    print(f"speed vs closed form: max rel err {err:.2e}; vs scipy.signal.step {err_scipy:.2e}")
    # global error of the run <~ 1e3 * rtol (helpers.tol); scipy.signal.step is exact to ~1e-12
    assert err < tol(solver)
    assert err_scipy < tol(solver)


def test_current_follows_scipy_signal(step, solver):
    t, i = step.time, step["motor.current"]
    _, ref = scipy.signal.step(([J * V, B * V], denominator(J, B)), T=t)  # I(s)/V(s) * V (Ogata/Nise)
    peak = np.max(np.abs(ref))
    err = np.max(np.abs(i - ref)) / peak
    print(f"current vs scipy.signal.step: max rel err {err:.2e} (peak {peak:.3f} A)")
    assert err < tol(solver)  # same bound as the speed: 1e3 * rtol global error


def test_steady_state_speed_and_current(step, solver):
    w_ss = K * V / (R * B + K * K)  # common practice
    i_ss = B * V / (R * B + K * K)  # torque balance k i = b w (common practice)
    ew = abs(step["rotor.speed"][-1] - w_ss) / w_ss
    ei = abs(step["motor.current"][-1] - i_ss) / i_ss
    print(f"steady speed {step['rotor.speed'][-1]:.9f} vs {w_ss:.9f} (rel {ew:.2e}); "
          f"current rel err {ei:.2e}")
    assert ew < tol(solver)   # transient left at 20 s is ~1e-10, far below the solver bound
    assert ei < tol(solver)


@pytest.fixture(scope="module")
def locked(solver):
    # Rotor held by a huge inertia (1e6 kg m^2): over 1 s the speed stays below k (V/R) t / J = 1.2e-6 rad/s,
    # so the back-EMF stays below 1.2e-7 V: 1e-8 of the applied voltage, negligible against the tolerance.
    return cached("locked", solver, lambda: build_dc_motor(inertia=1e6, viscous=0.0), 1.0, 1e-3)


def test_locked_rotor_current_rises_with_l_over_r(locked, solver):
    t, i = locked.time, locked["motor.current"]
    ref = V / R * (1 - np.exp(-t * R / L))  # R-L step, tau = L/R (common practice)
    err = np.max(np.abs(i - ref)) / (V / R)
    print(f"locked-rotor current vs V/R(1-exp(-tR/L)): max rel err {err:.2e}")
    assert err < tol(solver)
    assert np.max(np.abs(locked["rotor.speed"])) < 1.3e-6  # the rotor is held (bound in the fixture)


def test_stall_current_and_torque(locked, solver):
    # after 20 L/R the exponential is e^-20 ~ 2e-9
    i_stall, t_stall = V / R, K * V / R  # common practice
    ei = abs(locked["motor.current"][-1] - i_stall) / i_stall
    et = abs(locked["motor.torque"][-1] - t_stall) / t_stall
    print(f"stall current {locked['motor.current'][-1]:.9f} A vs {i_stall} (rel {ei:.2e}); "
          f"stall torque rel err {et:.2e}")
    assert ei < tol(solver)
    assert et < tol(solver)


def test_no_load_speed_without_friction(solver):
    r = cached("noload", solver, lambda: build_dc_motor(inertia=J, viscous=0.0), 20.0, 0.05)
    w_nl = V / K  # b = 0: back-EMF balances the supply (common practice)
    ew = abs(r["rotor.speed"][-1] - w_nl) / w_nl
    print(f"no-load speed {r['rotor.speed'][-1]:.9f} vs V/k = {w_nl} (rel {ew:.2e}); "
          f"final current {r['motor.current'][-1]:.2e} A")
    assert ew < tol(solver)
    assert abs(r["motor.current"][-1]) < tol(solver) * V / R  # no torque needed at no load
    # and the whole transient against the b = 0 closed form
    err = np.max(np.abs(r["rotor.speed"] - closed_form_speed(r.time, J, 0.0))) / w_nl
    print(f"no-load transient vs closed form: max rel err {err:.2e}")
    assert err < tol(solver)
