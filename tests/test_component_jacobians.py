"""Every built-in ``jacobian`` kernel against a numerical derivative of its ``equations`` kernel.

Reference: ``scipy.optimize.approx_fprime`` (forward differences, a general-purpose
library) applied to the plain-Python equations; the analytic kernel is also run
compiled by numba to prove it stays in the nopython subset.
"""
from __future__ import annotations

import sys
from pathlib import Path

import numba
import numpy as np
import pytest
from scipy.optimize import approx_fprime

from emsim.components import (AveragedBridge, Battery, CompliantShaft, ConstantTorque, CoulombFriction, Damper,
                              DCMotor, FanLoad, Gearbox, Inertia, SampledPISpeed, SwitchedDCSource, TableTorque)

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "plugins" / "hoist"))
from emsim_hoist import HoistDrum  # noqa: E402

CASES = [
    # (factory, modes to try, signal inputs)
    (lambda: SwitchedDCSource("src", times=[0.1], levels=[12.0]), [()], []),
    (lambda: Battery("bat", open_circuit_voltage=24, internal_resistance=0.05, capacity="2 A*h",
                     voltage_per_soc=3.0, initial_soc=0.7), [()], []),
    (lambda: DCMotor("mot", resistance=0.4, inductance=1e-3, torque_constant=0.06, viscous_friction=2e-4,
                     coulomb_friction=0.02), [(0,), (1,), (2,)], []),
    (lambda: CoulombFriction("fr", coulomb_torque=0.3, viscous=0.01), [(0,), (1,), (2,)], []),
    (lambda: Inertia("j", inertia=0.1), [()], []),
    (lambda: Damper("b", damping=0.02), [()], []),
    (lambda: Gearbox("g", ratio=5, efficiency=0.9), [()], []),
    (lambda: CompliantShaft("sh", stiffness=300.0, damping=0.4), [()], []),
    (lambda: ConstantTorque("ld", torque=1.5), [()], []),
    (lambda: FanLoad("fan", coefficient=3e-3), [()], []),
    (lambda: TableTorque("tab", speeds=[-10, 0, 5, 20], torques=[-2, 0, 1, 4]), [()], []),
    (lambda: AveragedBridge("br"), [()], [0.37]),
    (lambda: SampledPISpeed("pi", period=1e-3, kp=0.1, ki=1.0), [()], [12.0]),
    (lambda: HoistDrum("hoist", mass=50.0, drum_radius=0.1), [()], []),
]


def _outputs(cls, comp, t, x, a, u, p, m, d):
    nx, npt = len(comp.states), len(comp.ports)
    dx, f, s = np.zeros(nx), np.zeros(npt), np.zeros(len(comp.signals))
    cls.equations(t, x, a, u, p, m, d, dx, f, s)
    return np.concatenate([dx, f])


@pytest.mark.parametrize("factory, modes, inputs", CASES, ids=[c[0]().name for c in CASES])
def test_jacobian_kernel_matches_numerical_derivative(factory, modes, inputs):
    comp = factory()
    cls = type(comp)
    assert cls.jacobian is not None, f"{cls.__name__} supplies no jacobian kernel"
    rng = np.random.default_rng(7)
    nx, npt = len(comp.states), len(comp.ports)
    p = comp.parameter_vector()
    u = np.array(inputs, dtype=float)
    d = np.array([comp.discrete_initial[s.name] for s in comp.discrete], dtype=float) if comp.discrete else np.zeros(0)
    if isinstance(comp, SwitchedDCSource):
        d = np.array([12.0])
    compiled = numba.njit(cls.jacobian)
    for mode in modes:
        m = np.array(mode, dtype=np.int64)
        for _ in range(5):
            x = rng.uniform(0.2, 1.0, nx)
            a = rng.uniform(0.5, 15.0, npt) * (1.0 if mode != (2,) else -1.0)  # slip direction matches speed sign
            jx, ja = np.zeros((nx + npt, nx)), np.zeros((nx + npt, npt))
            cls.jacobian(0.2, x, a, u, p, m, d, jx, ja)
            jx_c, ja_c = np.zeros_like(jx), np.zeros_like(ja)
            compiled(0.2, x, a, u, p, m, d, jx_c, ja_c)
            np.testing.assert_array_equal(jx, jx_c)
            np.testing.assert_array_equal(ja, ja_c)
            # reference: scipy's forward differences, one output row at a time
            z0 = np.concatenate([x, a])
            for row in range(nx + npt):
                def g(z, row=row):
                    return _outputs(cls, comp, 0.2, z[:nx], z[nx:], u, p, m, d)[row]
                num = approx_fprime(z0, g, 1e-7 * np.maximum(1.0, np.abs(z0)))
                ana = np.concatenate([jx[row], ja[row]])
                # forward differences carry O(eps) truncation error: 1e-5 relative is ample
                np.testing.assert_allclose(ana, num, rtol=1e-5, atol=1e-5 * max(1.0, np.abs(num).max()),
                                           err_msg=f"{cls.__name__} mode {mode} row {row}")
