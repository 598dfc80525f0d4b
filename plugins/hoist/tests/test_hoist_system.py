"""The hoist plugin in a whole drive: found through its entry point, steady currents by torque balance.

Steady lifting: the drum needs m*g*r; through a gear of ratio N and efficiency eta the motor
supplies m*g*r/(N*eta) when motoring, and holds back m*g*r*eta/N when the load overhauls the gear
while lowering, so the armature current is that torque over k (common practice, torque balance
with gear efficiency by the direction of power flow). g = 9.80665 m/s^2, standard gravity (ISO 80000-3).
"""
from __future__ import annotations

import numpy as np
import pytest

import emsim
from emsim.components import DCMotor, Gearbox, SwitchedDCSource
from emsim.solvers.compiled import Radau5
from emsim.solvers.reference import ScipyReference

G0 = 9.80665
MASS, RADIUS, RATIO, ETA, K = 20.0, 0.05, 20.0, 0.85, 0.08


def test_hoist_is_found_by_name_through_its_entry_point():
    assert "hoist" in emsim.available()
    cls = emsim.component_class("hoist")
    assert cls.__module__ == "emsim_hoist" and issubclass(cls, emsim.Component)


def build(voltage):
    hoist = emsim.create("hoist", "hoist", mass=MASS, drum_radius=RADIUS, drum_inertia="2e-3 kg*m^2")
    s = emsim.System("hoist_drive")
    s.add(SwitchedDCSource("src", times=[0.0], levels=[voltage]),
          DCMotor("motor", resistance=0.5, inductance=1e-3, torque_constant=K, rotor_inertia=1e-4),
          Gearbox("gear", ratio=RATIO, efficiency=ETA), hoist)
    s.connect("src.terminal", "motor.armature", name="bus")
    s.connect("motor.shaft", "gear.input", name="motor_shaft")
    s.connect("gear.output", "hoist.shaft", name="drum")
    return s


@pytest.mark.parametrize("solver", [ScipyReference(rtol=1e-9), Radau5(rtol=1e-8)], ids=["reference", "compiled"])
@pytest.mark.parametrize("voltage, expected_torque, moves", [
    (24.0, MASS * G0 * RADIUS / (RATIO * ETA), +1),    # lifting: gear motoring
    (-24.0, MASS * G0 * RADIUS * ETA / RATIO, -1),     # lowering: gear back-driven by the load
], ids=["lifting", "lowering"])
def test_steady_current_matches_torque_balance(solver, voltage, expected_torque, moves):
    run = emsim.simulate(build(voltage), 0.6, out_dt=0.01, solver=solver)
    current = run["motor.current"][-1]
    expected = expected_torque / K
    print(f"{'lifting' if moves > 0 else 'lowering'} ({solver.name}): current {current:.9f} A, "
          f"expected {expected:.9f} A, relative error {abs(current / expected - 1):.2e}")
    # 0.6 s is > 30 mechanical time constants (R*J/k^2 ~ 18 ms): the transient is below 1e-12
    assert current == pytest.approx(expected, rel=1e3 * solver.rtol)
    assert np.sign(run["hoist.height"][-1]) == moves
    assert run.energy["relative_residual"] < 1e3 * solver.rtol
