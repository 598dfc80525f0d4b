"""Stick-slip Coulomb friction on a free inertia: stopping time, holding, breakaway.

Outside references:
- A rotor J at w0 braked by a constant friction torque T_c decelerates uniformly,
  w(t) = w0 - T_c t / J, and stops at t = J w0 / T_c (Newton's second law for rotation,
  closed form); it then stays stuck while the applied torque is below the breakaway
  torque (stick-slip friction with a stuck/slip switch: D. Karnopp, ASME J. Dyn. Sys.
  Meas. Control 107 (1985), from memory).
- Above the breakaway torque it slips with the constant acceleration (T - T_c) / J.
"""
from __future__ import annotations

import numpy as np
import pytest

import emsim
from helpers import build_friction, run, tol

J, TC, W0, CREEP = 0.1, 0.5, 10.0, 1e-6

_runs: dict = {}


def cached(key, solver, build, t_end, out_dt):
    k = (key, id(solver))
    if k not in _runs:
        problem = emsim.assemble(build())
        _runs[k] = (problem, run(problem, t_end, solver, out_dt))
    return _runs[k]


def event_names(problem, result):
    return [problem.event_owner[i] if k == "state" else f"{c}:time"
            for i, k, c in zip(result.events["index"], result.events["kind"], result.events["component"])]


@pytest.fixture(scope="module")
def coast(solver):
    return cached("coast", solver, lambda: build_friction(inertia=J, coulomb=TC, w0=W0, creep=CREEP), 3.0, 0.01)


def test_coulomb_stop_time(coast, solver):
    problem, r = coast
    t_stop = J * W0 / TC  # closed form: uniform deceleration
    names = event_names(problem, r)
    print(f"coast: events {list(zip(r.events['time'], names))}; expected stop at {t_stop} s")
    assert names == ["fric.speed_zero"]
    err = abs(r.events["time"][0] - t_stop) / t_stop
    print(f"coast: stop time {r.events['time'][0]:.12f} s vs J w0/T_c = {t_stop} (rel {err:.2e})")
    assert err < tol(solver)  # the speed is linear in t; its root carries the global error, <~ 1e3 rtol
    before = r.time < t_stop
    w_ref = W0 - TC * r.time[before] / J
    werr = np.max(np.abs(r["disc_node.speed"][before] - w_ref)) / W0
    print(f"coast: deceleration phase max rel err {werr:.2e}")
    assert werr < tol(solver)


def test_stays_stopped_without_chatter(coast, solver):
    problem, r = coast
    after = r.time > J * W0 / TC + 1e-3
    w_after = np.max(np.abs(r["disc_node.speed"][after]))
    print(f"coast: largest |w| after the stop {w_after:.2e} rad/s (creep bound {CREEP}); "
          f"events {len(r.events['time'])}, mode at end {r['fric.mode.friction'][-1]:g}")
    assert w_after < CREEP             # the model's promise: a stuck shaft creeps below creep_speed
    assert len(r.events["time"]) == 1  # exactly the one stop, no chatter afterwards
    assert np.all(r["fric.mode.friction"][after] == 0)  # stuck (mode 0) from the stop on


def test_torque_below_breakaway_holds(solver):
    applied, breakaway = 0.4, 0.6
    problem, r = cached("hold", solver, lambda: build_friction(inertia=J, coulomb=TC, breakaway=breakaway,
                                                               applied=applied, creep=CREEP), 1.0, 0.01)
    w = r["disc_node.speed"]
    # stuck: the hold is a stiff viscous term c_h = T_br / w_creep, so the speed settles at
    # T / c_h = (0.4/0.6) w_creep; it never reaches the creep speed while T < T_br.
    print(f"hold: max |w| {np.max(np.abs(w)):.3e} rad/s (hold value T/c_h = {applied * CREEP / breakaway:.3e}); "
          f"events {len(r.events['time'])}")
    assert np.max(np.abs(w)) < CREEP
    assert len(r.events["time"]) == 0
    assert np.all(r["fric.mode.friction"] == 0)
    # The stuck phase is the first-order lag J w' = T - c_h w: w -> T / c_h (closed form). At that
    # fixed point the implicit (collocation) equations hold exactly, so only the Newton stopping error
    # (~ rtol) is left; 1e3 rtol relative as everywhere.
    w_hold = applied * CREEP / breakaway
    herr = abs(w[-1] - w_hold) / w_hold
    print(f"hold: final speed rel err vs T/c_h {herr:.2e}")
    assert herr < tol(solver)
    # Without the friction the same torque would have reached T t / J = 4 rad/s by t = 1 s.
    assert np.max(np.abs(w)) < 1e-6 * applied * 1.0 / J


def test_torque_above_breakaway_slips_with_net_acceleration(solver):
    applied, breakaway = 0.8, 0.6
    problem, r = cached("slip", solver, lambda: build_friction(inertia=J, coulomb=TC, breakaway=breakaway,
                                                               applied=applied, creep=CREEP), 1.0, 0.01)
    names = event_names(problem, r)
    print(f"slip: events {list(zip(r.events['time'], names))}")
    assert names == ["fric.breakaway"]
    # The stuck phase is the lag J w' = T - c_h w, w(0) = 0, until the hold torque c_h w reaches T_br:
    # t_b = (J / c_h) ln(T / (T - T_br)) (closed form of a first-order system), ~2.3e-7 s here.
    c_h = breakaway / CREEP
    t_b = J / c_h * np.log(applied / (applied - breakaway))
    berr = abs(r.events["time"][0] - t_b) / t_b
    print(f"slip: breakaway at {r.events['time'][0]:.6e} s vs (J/c_h) ln(T/(T-T_br)) = {t_b:.6e} (rel {berr:.2e})")
    # Near zero speed the error is governed by the absolute tolerance atol = rtol * nominal (nominal
    # 1 rad/s): an error of one atol in w shifts the crossing by atol / w'(t_b), w'(t_b) = (T - T_br)/J.
    # (The stiff stuck mode is contractive, so errors do not accumulate over the ~10 steps.)
    atol = solver.rtol * 1.0
    bound = atol / ((applied - breakaway) / J) / t_b
    print(f"slip: breakaway time bound from atol: rel {bound:.1e}")
    assert berr < bound
    acc_ref = (applied - TC) / J  # Newton: net torque over inertia (closed form)
    late = r.time > 0.05
    slope, intercept = np.polyfit(r.time[late], r["disc_node.speed"][late], 1)
    err = abs(slope - acc_ref) / acc_ref
    print(f"slip: acceleration {slope:.9f} rad/s^2 vs (T - T_c)/J = {acc_ref} (rel {err:.2e})")
    assert err < tol(solver)   # a straight line: the fit only sees the solver's error
    # and the speed itself: (T - T_c)/J (t - t_breakaway) (+ the creep speed reached while stuck)
    w_ref = acc_ref * (r.time[late] - r.events["time"][0]) + CREEP
    werr = np.max(np.abs(r["disc_node.speed"][late] - w_ref)) / np.max(w_ref)
    print(f"slip: speed max rel err {werr:.2e}")
    assert werr < tol(solver)
