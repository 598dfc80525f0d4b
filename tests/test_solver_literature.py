"""The compiled Radau IIA integrator against literature problems and outside references.

References used: SUNDIALS CVODE (BDF) through scikit-sundae at tight tolerances,
scipy.integrate.solve_ivp(method="Radau"), and closed-form solutions. Problems
come from E. Hairer, G. Wanner, *Solving Ordinary Differential Equations II*
(2nd ed., 1996): Robertson (IV.1), Van der Pol in the stiff scaling (IV.1),
HIRES (IV.10 test set). All problems share one compiled module (tests/problems.py).
"""
import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from sksundae.cvode import CVODE

import problems as P
from emsim.solvers.compiled import Radau5
from emsim.solvers.standalone import solve_standalone


def _cvode(rhs, t_out, y0, rtol, atol):
    """SUNDIALS CVODE (BDF) reference at the output times."""
    def f(t, y, yp):
        yp[:] = rhs(t, y)

    res = CVODE(f, method="BDF", rtol=rtol, atol=atol, max_num_steps=200000).solve(
        np.asarray(t_out, dtype=float), np.asarray(y0, dtype=float))
    assert res.success, res.message
    return res.y


def _robertson_f(t, y):
    return np.array([-0.04 * y[0] + 1e4 * y[1] * y[2],
                     0.04 * y[0] - 1e4 * y[1] * y[2] - 3e7 * y[1] ** 2,
                     3e7 * y[1] ** 2])


@pytest.fixture(scope="module")
def robertson_ref():
    t_out = np.arange(0.0, 1e5 + 1.0, 1e4)
    return t_out, _cvode(_robertson_f, t_out, [1.0, 0.0, 0.0], 1e-12, np.array([1e-16, 1e-20, 1e-16]))


def _scaled_error(y, yref, atol, rtol):
    return np.max(np.abs(y - yref) / (atol + rtol * np.abs(yref)))


@pytest.mark.parametrize("dae", [False, True])
def test_robertson_against_cvode(robertson_ref, dae):
    t_ref, y_ref = robertson_ref
    rtol = 1e-7
    nominal = np.array([1.0, 1e-4, 1.0])
    sel = P.ROBERTSON_DAE if dae else P.ROBERTSON
    pr = P.make(sel, [1.0, 0.0, 0.0], nominal=nominal, mass=[1.0, 1.0, 0.0] if dae else None)
    t, y, _, stats = solve_standalone(pr, 1e5, out_dt=1e4, rtol=rtol, atol_scale=rtol)
    assert np.array_equal(t, t_ref)
    # SUNDIALS CVODE at rtol 1e-12: global error within a small multiple of the requested tolerance
    err = _scaled_error(y, y_ref, rtol * nominal, rtol)
    assert err < 5.0, err  # measured about 0.1
    if dae:
        # the algebraic row is the conservation law y1 + y2 + y3 = 1 (Hairer & Wanner II, IV.1)
        assert np.max(np.abs(y.sum(axis=1) - 1.0)) < 1e-12
    assert stats["steps"] < 400 and stats["jacobians"] < stats["steps"]


def test_van_der_pol_stiff_against_cvode():
    # Hairer & Wanner II, IV.1 (1.5'): eps = 1e-6 (mu = 1000), y(0) = (2, -0.66), t in [0, 2]
    eps = 1e-6

    def f(t, y):
        return np.array([y[1], ((1.0 - y[0] ** 2) * y[1] - y[0]) / eps])

    t_out = np.array([0.0, 0.5, 1.0, 1.5, 2.0])
    y_ref = _cvode(f, t_out, [2.0, -0.66], 1e-12, 1e-12)
    rtol = 1e-7
    pr = P.make(P.VAN_DER_POL, [2.0, -0.66], (eps,))
    t, y, _, stats = solve_standalone(pr, 2.0, out_dt=0.5, rtol=rtol, atol_scale=rtol)
    assert np.allclose(t, t_out, rtol=0, atol=1e-15)
    # SUNDIALS CVODE reference; dense-output rows inside steps included
    err = _scaled_error(y, y_ref, rtol, rtol)
    assert err < 5.0, err


def test_hires_against_scipy_radau():
    # HIRES, Hairer & Wanner II, IV.10 test set: y(0) = (1,0,0,0,0,0,0,0.0057), t_end = 321.8122
    def f(t, y):
        return np.array([
            -1.71 * y[0] + 0.43 * y[1] + 8.32 * y[2] + 0.0007,
            1.71 * y[0] - 8.75 * y[1],
            -10.03 * y[2] + 0.43 * y[3] + 0.035 * y[4],
            8.32 * y[1] + 1.71 * y[2] - 1.12 * y[3],
            -1.745 * y[4] + 0.43 * y[5] + 0.43 * y[6],
            -280.0 * y[5] * y[7] + 0.69 * y[3] + 1.71 * y[4] - 0.43 * y[5] + 0.69 * y[6],
            280.0 * y[5] * y[7] - 1.81 * y[6],
            -280.0 * y[5] * y[7] + 1.81 * y[6],
        ])

    y0 = [1.0, 0, 0, 0, 0, 0, 0, 0.0057]
    t_end = 321.8122
    t_out = np.linspace(0.0, t_end, 5)
    ref = solve_ivp(f, (0.0, t_end), y0, method="Radau", t_eval=t_out, rtol=1e-11, atol=1e-15)
    assert ref.success
    rtol = 1e-8
    nominal = np.full(8, 1e-3)  # the solution components are of order 1e-4 .. 1
    pr = P.make(P.HIRES, y0, nominal=nominal)
    t, y, _, stats = solve_standalone(pr, t_end, out_dt=t_end / 4, rtol=rtol, atol_scale=rtol)
    assert len(t) == 5 and t[-1] == pytest.approx(t_end, rel=1e-14)
    # scipy Radau at rtol 1e-11
    err = _scaled_error(y, ref.y.T, rtol * nominal, rtol)
    assert err < 5.0, err


@pytest.mark.parametrize("method", ["radau5", "dopri5"])
def test_observed_order_five_with_fixed_steps(method):
    # Radau IIA with s = 3 has classical order 2s - 1 = 5 (Hairer & Wanner II, IV.5, Theorem 5.3);
    # Dormand-Prince 5(4) propagates its 5th-order solution (Dormand & Prince 1980; Hairer, Norsett &
    # Wanner I, Table II.5.2)
    pr = P.make(P.SMOOTH, [1.0, 1.0, 0.0], n_quad=1)
    t_end = 2.0
    errors = []
    for n_steps in (8, 16, 32, 64):
        t, y, _, stats = solve_standalone(pr, t_end, out_dt=t_end, fixed_step=t_end / n_steps,
                                          rtol=1e-13, atol_scale=1e-13, method=method)
        assert stats["steps"] == n_steps and t[-1] == t_end
        errors.append(np.abs(y[-1] - P.smooth_exact(t_end)))
    errors = np.array(errors)
    orders = np.log2(errors[:-1] / errors[1:])
    if method == "radau5":
        # main rows and the quadrature row (same collocation formula) both converge with order 5
        assert np.all((orders > 4.5) & (orders < 5.5)), orders
        return
    assert stats["newton_iterations"] == 0 and stats["factorizations"] == 0  # explicit: no solves
    # the main rows in the asymptotic range (last doubling): 5.1 and 5.4 measured
    assert np.all((orders[-1, :2] > 4.6) & (orders[-1, :2] < 5.6)), orders
    # the quadrature row, integrated with the same weights, has an error that changes sign along
    # the refinement: its slope over the whole range (5.5 measured)
    overall = np.log2(errors[0, 2] / errors[-1, 2]) / 3
    assert 4.5 < overall < 6.5, overall


def test_adaptive_error_and_dense_output_on_smooth_problem():
    pr = P.make(P.SMOOTH, [1.0, 1.0, 0.0], n_quad=1)
    errs = []
    for rtol in (1e-5, 1e-8):
        t, y, _, stats = solve_standalone(pr, 10.0, out_dt=0.01, rtol=rtol, atol_scale=rtol)
        assert len(t) == 1001 and stats["steps"] < len(t)  # most rows come from the interpolant
        exact = P.smooth_exact(t).T
        e = np.max(np.abs(y - exact) / (rtol + rtol * np.abs(exact)))
        errs.append(e)
        # closed-form solution; the dense output (collocation polynomial) stays within the tolerance scale
        assert e < 5.0, (rtol, e)
    # tighter tolerance must really be more accurate in absolute terms
    assert errs[1] * 1e-8 < errs[0] * 1e-5


def test_newton_tolerance_option_tightens_the_iteration_and_keeps_the_accuracy():
    pr = P.make(P.SMOOTH, [1.0, 1.0, 0.0], n_quad=1)
    rtol = 1e-6
    runs = {tol: solve_standalone(pr, 10.0, out_dt=0.01, rtol=rtol, atol_scale=rtol, newton_tol=tol)
            for tol in (None, 1e-6)}
    for tol, (t, y, _, stats) in runs.items():
        exact = P.smooth_exact(t).T   # closed-form solution
        assert np.max(np.abs(y - exact) / (rtol + rtol * np.abs(exact))) < 5.0, tol
    # a 1000x tighter stopping tolerance than the default sqrt(rtol) = 1e-3 must cost Newton iterations
    assert runs[1e-6][3]["newton_iterations"] > runs[None][3]["newton_iterations"]
    with pytest.raises(ValueError, match="newton_tol"):
        Radau5(newton_tol=0.0)
