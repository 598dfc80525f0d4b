"""The shared ``system_stages`` function against separate rhs and quadrature evaluations.

``system_stages`` (emsim/solvers/abi.py) evaluates the three Radau stages of one Newton iteration in
one call and, on request, the energy integrands at the same points. Reference: ``system_rhs`` and
``system_quad`` called one point at a time from a zeroed work array. Checked on every catalogue
system and the benchmark drive; results must be bit-identical (the same compiled arithmetic).
"""
from __future__ import annotations

import numpy as np
import pytest

import emsim
from helpers import systems_with_benchmark_drive

SYSTEMS = systems_with_benchmark_drive()


@pytest.mark.parametrize("name", sorted(SYSTEMS))
def test_stages_equal_separate_evaluations(name):
    prob = emsim.assemble(SYSTEMS[name]())
    mod, n, nq = prob.module, prob.n_main, prob.n_quad
    rng = np.random.default_rng(3)
    y = prob.y0.copy()
    y[:n] += rng.normal(0.0, 0.3, n) * prob.nominal[:n]
    z = np.zeros((3, y.size))
    z[:, :n] = rng.normal(0.0, 0.05, (3, n)) * prob.nominal[:n]
    ts = np.array([0.010, 0.011, 0.0125])
    m, d = prob.m0.copy(), prob.d0.copy()
    for want_quad in (0, 1):
        f = np.full((3, n), np.nan)
        fq = np.full((3, max(nq, 1)), np.nan)
        mod.system_stages(ts, y, z, np.zeros(y.size), prob.p, m, d, np.zeros(prob.n_work), f, fq, want_quad)
        for s in range(3):
            ys = y.copy()
            ys[:n] += z[s, :n]
            ref = np.zeros(n)
            mod.system_rhs(ts[s], ys, prob.p, m, d, np.zeros(prob.n_work), ref)
            np.testing.assert_array_equal(f[s], ref, err_msg=f"{name}: stage {s} rhs")
            if want_quad:
                refq = np.zeros(nq)
                mod.system_quad(ts[s], ys, prob.p, m, d, np.zeros(prob.n_work), refq)
                np.testing.assert_array_equal(fq[s, :nq], refq, err_msg=f"{name}: stage {s} energy integrands")
            else:
                assert np.isnan(fq).all(), f"{name}: integrands written although not asked for"
