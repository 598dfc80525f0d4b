"""Events and failures of the compiled integrators, checked against closed forms.

Every test runs both methods of the compiled loop: Radau IIA (``radau5``) and the
explicit Dormand-Prince 5(4) (``dopri5``); events, outputs and diagnostics are the
loop's, the same for both.

All problems share one compiled module (tests/problems.py). The closed forms
are elementary kinematics and linear-ODE solutions (stated beside each check,
from memory).
"""
import math
import time

import numpy as np
import pytest

import problems as P
from emsim.errors import SolverError
from emsim.results.memory import MemoryRecorder
from emsim.solvers.compiled import DormandPrince5, Radau5
from emsim.solvers.standalone import solve_standalone

METHODS = pytest.mark.parametrize("method", ["radau5", "dopri5"])


@METHODS
def test_gap_closing_time(method):
    # J theta'' = T from rest: theta = T t^2 / (2 J), so the gap closes at t* = sqrt(2 gap J / T)
    torque, inertia, gap = 2.0, 0.5, 0.3
    pr = P.make(P.GAP, [0.0, 0.0], (torque, inertia, gap), directions=[1])
    t, y, (ev_t, ev_c, ev_k, ev_i), stats = solve_standalone(pr, 2.0, out_dt=0.05, rtol=1e-6, method=method)
    t_star = math.sqrt(2.0 * gap * inertia / torque)
    assert len(ev_t) == 1 and ev_k[0] == 2 and ev_i[0] == 0
    assert abs(ev_t[0] - t_star) <= 1e-10 * t_star
    # before contact the rows follow the parabola, after it the inertia rests at the gap
    before = t < t_star
    assert np.allclose(y[before, 0], torque * t[before] ** 2 / (2 * inertia), rtol=1e-9, atol=1e-12)
    assert np.allclose(y[~before, 0], gap, rtol=1e-9) and np.all(y[~before, 1] == 0.0)


@METHODS
def test_bouncing_ball_impact_times(method):
    # free fall from height H: first impact t1 = sqrt(2 H / g) at speed v1 = g t1; after impact n the
    # rebound speed is e^n v1 and the flight lasts 2 e^n v1 / g (elementary kinematics)
    g, e, height = 9.81, 0.8, 1.0
    pr = P.make(P.BOUNCE, [height, 0.0], (g, e), directions=[-1])
    t, y, (ev_t, _, ev_k, _), _ = solve_standalone(pr, 3.0, out_dt=0.01, rtol=1e-8, max_step=0.1, method=method)
    t1 = math.sqrt(2 * height / g)
    v1 = g * t1
    expected = t1 + np.concatenate(([0.0], np.cumsum([2 * e ** n * v1 / g for n in range(1, 6)])))
    expected = expected[expected < 3.0]
    assert len(ev_t) == len(expected) and np.all(ev_k == 2)
    assert np.allclose(ev_t, expected, rtol=1e-10, atol=0)
    # between the first two impacts the height is a parabola (closed form), reproduced by the dense output
    k = (t > expected[0]) & (t < expected[1])
    tau = t[k] - expected[0]
    assert np.allclose(y[k, 0], e * v1 * tau - 0.5 * g * tau ** 2, atol=1e-9)


@METHODS
def test_retriggering_event_is_chattering(method):
    # reset map y <- 1 - 1e-13 just below the surface y = 1 while y' = 1: re-triggers at once forever
    pr = P.make(P.RETRIGGER, [0.0], (), directions=[1])
    start = time.perf_counter()
    with pytest.raises(SolverError) as info:
        solve_standalone(pr, 3.0, out_dt=0.1, max_events_at_instant=20, method=method)
    assert time.perf_counter() - start < 10.0
    msg = str(info.value)
    assert "chattering" in msg and "more than 20 events" in msg and "y0=" in msg
    # y = t reaches the surface at t = 1 (closed form)
    assert abs(info.value.time - 1.0) < 1e-9


@METHODS
def test_time_event_lands_exactly_and_kink_is_exact(method):
    # y' = +1 until t1, then -1: y = t for t <= t1, y = 2 t1 - t after (closed form)
    t1 = 0.3  # not a binary fraction: the step must land on exactly this double
    pr = P.make(P.STEP_INPUT, [0.0], (t1,), d0=(1.0,))
    t, y, (ev_t, ev_c, ev_k, ev_i), stats = solve_standalone(pr, 1.0, out_dt=0.05, rtol=1e-6, method=method)
    assert len(ev_t) == 1 and ev_t[0] == t1 and ev_k[0] == 1 and ev_i[0] == -1
    exact = np.where(t <= t1, t, 2 * t1 - t)
    assert np.max(np.abs(y[:, 0] - exact)) < 1e-13
    assert stats["time_events"] == 1


@METHODS
def test_sampled_feedback_matches_zero_order_hold_recursion(method):
    # y' = -a y + u with u = -K y(t_k) held over [t_k, t_k + Ts): exactly
    # y_{k+1} = phi y_k + gam u_k, phi = exp(-a Ts), gam = (1 - phi) / a
    # (zero-order-hold discretisation, e.g. Franklin, Powell & Workman, Digital Control; from memory)
    a, gain, ts, t_end = 1.0, 5.0, 1e-3, 2.0
    y0 = 1.0
    rtol = 1e-8
    pr = P.make(P.SAMPLED, [y0], (a, gain, ts), d0=(-gain * y0,))
    t, y, (ev_t, _, ev_k, _), stats = solve_standalone(pr, t_end, out_dt=ts, rtol=rtol, atol_scale=rtol,
                                                       batch_rows=512, event_log_size=300, method=method)
    n = int(round(t_end / ts))
    phi = math.exp(-a * ts)
    gam = (1 - phi) / a
    ref = np.empty(n + 1)
    ref[0] = y0
    for k in range(n):
        ref[k + 1] = (phi - gam * gain) * ref[k]
    assert len(t) == n + 1 and len(ev_t) == n  # samples at k Ts, k = 1..n (the last one at t_end)
    assert np.all(ev_k == 1)
    assert np.allclose(ev_t, ts * np.arange(1, len(ev_t) + 1), rtol=0, atol=1e-15)
    assert np.max(np.abs(y[:, 0] - ref)) < 10 * rtol * y0
    # the cheap restart: the Jacobian and LU survive time events that only change d (Radau5; the
    # explicit method has no algebraic rows here, so no Jacobian at all)
    if method == "radau5":
        assert stats["jacobians"] == 1 and stats["factorizations"] <= 3
    else:
        assert stats["jacobians"] == 0 and stats["newton_iterations"] == 0
    assert stats["time_events"] == len(ev_t)


@METHODS
def test_rows_and_events_arrive_in_batches_in_order(method):
    # same closed form as above, batches far smaller than the run: nothing lost or duplicated
    a, gain, ts = 1.0, 5.0, 1e-3
    pr = P.make(P.SAMPLED, [1.0], (a, gain, ts), d0=(-gain,))
    sink = MemoryRecorder()
    solver = {"radau5": Radau5, "dopri5": DormandPrince5}[method]
    run = solver(rtol=1e-6, batch_rows=7, event_log_size=40).start(pr, out_dt=2.5e-4)
    run.advance(0.05, sink)
    run.advance(0.1, sink)  # continuing keeps the state, J and LU
    t, y = sink.arrays()
    ev_t = sink.event_arrays()[0]
    assert np.allclose(t, 2.5e-4 * np.arange(len(t)), rtol=0, atol=1e-15) and len(t) == 401
    assert np.all(np.diff(ev_t) > 0) and len(ev_t) == 100
    assert len(sink._t) > 50  # really batched
    assert run.stats()["jacobians"] == (1 if method == "radau5" else 0)


@METHODS
def test_step_size_underflow_at_finite_time_blowup(method):
    # y' = y^2, y(0) = 1 has the solution 1 / (1 - t): it blows up at t = 1 (closed form)
    pr = P.make(P.BLOWUP, [1.0], (), state_names=["speed"], row_owner=["runaway_machine"])
    with pytest.raises(SolverError) as info:
        solve_standalone(pr, 2.0, out_dt=0.1, method=method)
    msg = str(info.value)
    assert "step size too small" in msg and "speed=" in msg and "runaway_machine" in msg
    assert abs(info.value.time - 1.0) < 1e-4


@METHODS
def test_nan_from_rhs_names_row_and_owner(method):
    # y1' = 1, y2' = sqrt(1 - y1): y1 = t, so the square root has no real value after t = 1 (closed form)
    pr = P.make(P.SQRT_NEG, [0.0, 0.0], (), state_names=["position", "energy"],
                row_owner=["feeder", "sqrt_source"])
    with pytest.raises(SolverError) as info:
        solve_standalone(pr, 2.0, out_dt=0.1, method=method)
    msg = str(info.value)
    assert "non-finite" in msg and "state energy" in msg and "sqrt_source" in msg and "position=" in msg
    assert abs(info.value.time - 1.0) < 1e-6


@METHODS
def test_invalid_initial_state_is_reported_by_name(method):
    pr = P.make(P.BLOWUP, [float("nan")], (), state_names=["shaft.speed"])
    with pytest.raises(SolverError, match=r"non-finite initial state shaft\.speed=nan"):
        solve_standalone(pr, 1.0, out_dt=0.1, method=method)


@METHODS
def test_sampled_drive_with_algebraic_rows_against_scipy_segments(method):
    # 5 differential + 3 algebraic rows, PI speed control sampled every Ts. Reference: scipy
    # solve_ivp(Radau) on each sampling interval with the algebraic rows eliminated by hand and the
    # same controller applied between intervals (held duty cycle): problems.drive_segment_reference
    k, Ts = P.DRIVE_P[2], P.DRIVE_P[15]
    n = 40
    ref = P.drive_segment_reference(n)
    nominal = np.array([10, 100, 0.01, 100, 100, 48, 1, 1.0])
    rtol = 1e-8
    pr = P.make(P.DRIVE, np.zeros(8), P.DRIVE_P, d0=(0.0, 0.0), mass=[1, 1, 1, 1, 1, 0, 0, 0], nominal=nominal)
    t, y, (ev_t, _, _, _), stats = solve_standalone(pr, n * Ts, out_dt=Ts, rtol=rtol, atol_scale=rtol, method=method)
    assert len(t) == n + 1 and len(ev_t) == n
    err = np.max(np.abs(y[:, :5] - ref) / (rtol * nominal[:5] + rtol * np.abs(ref)))
    # Radau5 measured below 3 local tolerances; Dormand-Prince 43, in the shaft twist (nominal 0.01),
    # whose rate is the difference of two speeds of ~100 rad/s, with 222 steps against Radau's 539
    assert err < (20.0 if method == "radau5" else 100.0), err
    # algebraic rows consistent after every sample: terminal voltage follows the held duty exactly
    assert np.allclose(y[:, 6], k * y[:, 0], rtol=1e-9, atol=1e-9)
    # time events changed only d: one Jacobian for the whole run (Radau5; the explicit method
    # refreshes the algebraic block when its prediction of the algebraic rows misses)
    if method == "radau5":
        assert stats["jacobians"] == 1
