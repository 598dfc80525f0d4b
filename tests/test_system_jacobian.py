"""The generated analytic system Jacobian against numerical differentiation of the system right-hand side.

Reference: scipy.optimize.approx_fprime (forward differences) on the compiled ``system_rhs``,
at perturbed states of catalogue systems (motor, battery, rigid lossy gear in both power-flow
modes, compliant shafts, friction) and of the benchmark drives (averaged bridge, sampled PI, fan load, smooth Coulomb friction).
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import approx_fprime

import emsim
from emsim.assembly.jacgen import analytic_possible
from helpers import systems_with_benchmark_drive

SYSTEMS = systems_with_benchmark_drive()


@pytest.mark.parametrize("name", sorted(SYSTEMS))
def test_analytic_jacobian_matches_finite_differences(name):
    prob = emsim.assemble(SYSTEMS[name]())
    ok, why = analytic_possible(prob.structure)
    assert ok, why  # every built-in supplies a jacobian kernel
    mod, n = prob.module, prob.n_main
    rng = np.random.default_rng(11)
    w = np.zeros(prob.n_work)
    modes = [prob.m0.copy()]
    for k in prob.layout.coupling_mode.values():  # also the other power-flow mode of each lossy gear
        other = prob.m0.copy()
        other[k] = 1 - other[k]
        modes.append(other)
    for m in modes:
        for _ in range(3):
            y = prob.y0.copy()
            y[:n] += rng.normal(0.0, 0.3, n) * prob.nominal[:n]
            jac = np.zeros((n, n))
            assert mod.system_jacobian(0.01, y, prob.p, m, prob.d0, w, jac) == 1

            def row(z, i):
                yy = y.copy()
                yy[:n] = z
                dy = np.zeros(n)
                mod.system_rhs(0.01, yy, prob.p, m, prob.d0, w, dy)
                return dy[i]

            for i in range(n):
                num = approx_fprime(y[:n], row, 1e-7 * np.maximum(1.0, np.abs(y[:n])), i)
                # forward differences: truncation ~1e-7 relative to the curvature; 1e-5 is ample
                np.testing.assert_allclose(jac[i], num, rtol=1e-5, atol=1e-5 * max(1.0, np.abs(num).max()),
                                           err_msg=f"{name}: row {i} ({prob.state_names[i]}), modes {m}")
