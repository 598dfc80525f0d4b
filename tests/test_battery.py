"""A battery discharging into a DC motor held at stall (an R-L load).

Outside references:
- Thevenin battery model: terminal voltage V = V_oc(soc) - R_int I, with a linear
  V_oc(soc) = V_full + a (soc - 1); state of charge by coulomb counting,
  soc(t) = soc0 - (1/Q) * integral of I dt (common practice).
- A stalled DC motor is its armature R-L circuit: L dI/dt = V - R I (common practice;
  the reference ODE keeps the tiny back-EMF term anyway, see below).
- scipy.integrate.solve_ivp (DOP853, rtol 1e-12) on the two-state ODE of those equations,
  and scipy.integrate.cumulative_trapezoid of the recorded current for the coulomb count.

The rotor is held by a huge inertia (1e6 kg m^2): over 5 s its speed stays below
k I t / J = 5e-6 rad/s, a back-EMF below 5e-7 V (4e-8 of V_oc): the motor is practically
an R-L load. That term is kept in the solve_ivp reference so the check sees only solver error.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import cumulative_trapezoid, solve_ivp

from helpers import MOTOR, build_battery_motor, run, tol

VOC, R_INT, Q, A, SOC0 = 12.0, 0.2, 100.0, 2.0, 0.9
R, L = MOTOR["resistance"], MOTOR["inductance"]
T_END, DT = 5.0, 1e-3

_runs: dict = {}


@pytest.fixture(scope="module")
def result(solver):
    if id(solver) not in _runs:
        system = build_battery_motor(voc=VOC, r_int=R_INT, capacity=Q, volt_per_soc=A, soc0=SOC0, inertia=1e6)
        _runs[id(solver)] = run(system, T_END, solver, DT)
    return _runs[id(solver)]


@pytest.fixture(scope="module")
def reference(result):
    # the full motor equations (Ogata / Nise ch. 2, from memory), back-EMF included, so that the
    # comparison sees only the solver's error: L I' = V - R I - k w, J w' = k I
    k, j = MOTOR["torque_constant"], 1e6

    def rhs(t, y):
        i, soc, w = y
        voc = VOC + A * (soc - 1.0)
        return [(voc - (R_INT + R) * i - k * w) / L, -i / Q, k * i / j]
    sol = solve_ivp(rhs, (0.0, T_END), [0.0, SOC0, 0.0], method="DOP853", rtol=1e-12, atol=1e-14,
                    t_eval=result.time, dense_output=False)
    assert sol.success
    i, soc, _ = sol.y
    return {"current": i, "soc": soc, "voltage": VOC + A * (soc - 1.0) - R_INT * i}


def test_current_and_soc_match_solve_ivp(result, reference, solver):
    ei = np.max(np.abs(result["bat.current"] - reference["current"])) / np.max(reference["current"])
    es = np.max(np.abs(result["bat.soc"] - reference["soc"])) / SOC0
    print(f"battery: current max rel err {ei:.2e}, soc max rel err {es:.2e} vs solve_ivp")
    assert ei < tol(solver)  # solve_ivp at 1e-12 is exact at this scale; our bound is 1e3 rtol
    assert es < tol(solver)
    assert result["bat.soc"][-1] < SOC0 - 0.3  # a real discharge (~0.45 of the charge), not a flat line


def test_terminal_voltage_is_voc_minus_r_int_i(result, reference, solver):
    v = result["bus.voltage"]
    err = np.max(np.abs(v - reference["voltage"])) / VOC
    print(f"battery: terminal voltage max rel err vs V_oc(soc) - R_int I (solve_ivp) {err:.2e}")
    assert err < tol(solver)
    # the same relation on the run's own current and charge (Thevenin model)
    own = VOC + A * (result["bat.soc"] - 1.0) - R_INT * result["bat.current"]
    own_err = np.max(np.abs(v - own)) / VOC
    print(f"battery: terminal voltage vs its own Thevenin relation {own_err:.2e}")
    assert own_err < 1e-9  # the node's algebraic equation, solved by Newton to ~1e-10 or better
    # the recorded terminal_voltage output is the node voltage
    assert np.max(np.abs(result["bat.terminal_voltage"] - v)) < 1e-12 * VOC


def test_soc_is_coulomb_count_of_the_current(result, solver):
    charge = cumulative_trapezoid(result["bat.current"], result.time, initial=0.0)
    soc_count = SOC0 - charge / Q
    err = np.max(np.abs(result["bat.soc"] - soc_count))
    # trapezoid error <= h^2/12 * integral |I''| dt <= h^2/12 * 2 max|I'| (I' falls from V_oc/L to ~0
    # once, and stays small), over Q; plus the run's own error (1e3 rtol of the soc).
    bound = DT ** 2 / 12 * 2 * (VOC / L) / Q + tol(solver)
    print(f"battery: soc vs coulomb count of the recorded current: max abs diff {err:.2e} (bound {bound:.1e})")
    assert err < bound
