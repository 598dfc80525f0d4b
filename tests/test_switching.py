"""A scheduled DC source switching an R-L load (a DC motor with its rotor held).

Outside references:
- R-L circuit driven by a piecewise-constant voltage (closed form, common practice): on each
  interval [t_k, t_k+1) with voltage V_k,
      i(t) = V_k / R + (i(t_k) - V_k / R) e^{-(t - t_k)/tau},   tau = L / R,
  so i is continuous and di/dt = (V_k - R i) / L jumps by (V_k - V_k-1) / L at t_k.
- One-sided three-point difference formulas f'(x) = (+-)(3f0 - 4f1 + f2) / (2h) + O(h^2)
  (any numerical analysis text, from memory).

The rotor is held by a huge inertia (1e6 kg m^2): over 0.3 s its speed stays below
k (V/R) t / J = 4e-7 rad/s, a back-EMF below 4e-8 V (3e-9 of the supply): negligible.
"""
from __future__ import annotations

import numpy as np
import pytest

from helpers import MOTOR, build_dc_motor, run, tol

R, L = MOTOR["resistance"], MOTOR["inductance"]
TAU = L / R
SCHEDULE = [(0.0, 12.0), (0.1, 0.0), (0.2, 6.0)]   # on, off (0 V: freewheel), half level
T_END, DT = 0.3, 1e-3

_runs: dict = {}


@pytest.fixture(scope="module")
def result(solver):
    key = id(solver)
    if key not in _runs:
        _runs[key] = run(build_dc_motor(inertia=1e6, viscous=0.0, switching=SCHEDULE), T_END, solver, DT)
    return _runs[key]


def closed_form(t):
    """Piecewise R-L response (common practice)."""
    t = np.asarray(t, dtype=float)
    i = np.zeros_like(t)
    i_k = 0.0
    bounds = [s[0] for s in SCHEDULE] + [np.inf]
    for k, (t_k, v_k) in enumerate(SCHEDULE):
        sel = (t >= t_k) & (t < bounds[k + 1])
        i[sel] = v_k / R + (i_k - v_k / R) * np.exp(-(t[sel] - t_k) / TAU)
        i_k = v_k / R + (i_k - v_k / R) * np.exp(-(bounds[k + 1] - t_k) / TAU)
    return i


def test_current_follows_the_piecewise_closed_form(result, solver):
    i = result["motor.current"]
    err = np.max(np.abs(i - closed_form(result.time))) / (12.0 / R)
    print(f"switching: current max rel err vs closed form {err:.2e}")
    assert err < tol(solver)  # global error bound 1e3 * rtol (helpers.tol)
    assert np.max(np.abs(result["rotor.speed"])) < 4e-7  # rotor held (bound in the module docstring)


def test_time_events_at_exactly_the_scheduled_instants(result, solver):
    ev = result.events
    log = [(float(t), c, k) for t, c, k in zip(ev["time"], ev["component"], ev["kind"])]
    print(f"switching: event log {log}")
    switch_times = [t for t, _ in SCHEDULE[1:]]
    timed = [t for t, c, k in log if k == "time" and c == "src"]
    assert timed == switch_times          # exactly the scheduled floats, in order
    assert all(k == "time" for _, _, k in log)  # no state events in this system
    # a row at an event instant shows the state after the event (solver contract 5)
    for t_k, v_k in SCHEDULE[1:]:
        row = int(round(t_k / DT))
        assert result.time[row] == pytest.approx(t_k, abs=1e-12)
        assert result["src.level"][row] == v_k
        assert result["bus.voltage"][row] == pytest.approx(v_k, abs=1e-9)


def test_current_has_a_kink_of_dv_over_l_at_each_switch(result, solver):
    t, i = result.time, result["motor.current"]
    i_exact = closed_form(t)
    levels = [v for _, v in SCHEDULE]
    # Bound on a one-sided difference: sample errors (<= tol * V/R each) amplified by
    # (3 + 4 + 1) / (2 h), plus truncation h^2 |i'''| / 3 with |i'''| <= (V/R) / tau^3.
    h = DT
    bound = 4 * tol(solver) * 12.0 / R / h + h * h / 3 * (12.0 / R) / TAU ** 3
    for k in (1, 2):
        t_k = SCHEDULE[k][0]
        n = int(round(t_k / h))
        left = (3 * i[n] - 4 * i[n - 1] + i[n - 2]) / (2 * h)
        right = (-3 * i[n] + 4 * i[n + 1] - i[n + 2]) / (2 * h)
        i_k = i_exact[n]
        left_ref = (levels[k - 1] - R * i_k) / L   # R-L equation on each side (closed form)
        right_ref = (levels[k] - R * i_k) / L
        jump_ref = (levels[k] - levels[k - 1]) / L
        print(f"switch at {t_k} s: slope left {left:.4f} (ref {left_ref:.4f}), right {right:.4f} "
              f"(ref {right_ref:.4f}); jump {right - left:.4f} vs dV/L = {jump_ref:.4f} A/s "
              f"(err {abs(right - left - jump_ref):.2e}, bound {2 * bound:.2e})")
        assert abs(left - left_ref) < bound
        assert abs(right - right_ref) < bound
        assert abs((right - left) - jump_ref) < 2 * bound
