"""The explicit Dormand-Prince 5(4) method of the compiled loop, against closed forms and scipy.

The method is the one of J. R. Dormand and P. J. Prince (J. Comput. Appl. Math. 6, 1980),
order 5 with an embedded order-4 error estimate (Hairer, Norsett & Wanner, Solving ODEs I,
II.5). The problems are those of tests/problems.py (one compiled module); the closed forms
are stated beside each check. The observed order is tested with Radau5's in
tests/test_solver_literature.py; events, sampling and failure reports of this method are
tested together with Radau5's in tests/test_solver_events.py.
"""
import numpy as np
import pytest
from scipy.integrate import solve_ivp

import problems as P
from emsim.errors import SolverError
from emsim.solvers.compiled import DormandPrince5
from emsim.solvers.standalone import solve_standalone
from helpers import build_benchmark_drive


def test_adaptive_run_against_closed_form_and_scipy_rk45():
    pr = P.make(P.SMOOTH, [1.0, 1.0, 0.0], n_quad=1)
    for rtol in (1e-5, 1e-8):
        t, y, _, stats = solve_standalone(pr, 10.0, out_dt=0.01, rtol=rtol, atol_scale=rtol, method="dopri5")
        assert len(t) == 1001 and stats["steps"] < len(t)  # most rows come from the dense output
        exact = P.smooth_exact(t).T
        ours = np.max(np.abs(y - exact) / (rtol + rtol * np.abs(exact)))
        # scipy's RK45 is the same published method, implemented independently: same tolerances,
        # errors of the same size (within 10x either way), both against the closed form
        ref = solve_ivp(lambda s, v: [v[0] * np.cos(s), -2 * s * v[1] ** 2, v[1]], (0.0, 10.0),
                        [1.0, 1.0, 0.0], method="RK45", rtol=rtol, atol=rtol, t_eval=t, dense_output=True)
        theirs = np.max(np.abs(ref.y.T - exact) / (rtol + rtol * np.abs(exact)))
        assert ours < 20.0, (rtol, ours)       # an explicit method's global error: a few local tolerances
        assert 0.1 < ours / theirs < 10.0, (rtol, ours, theirs)


def test_energy_audit_of_the_sampled_benchmark_drive():
    # First law (stored energy change = supplied - lost - delivered) on the benchmark drive with
    # its three algebraic rows: the energy integrands are evaluated at the consistent stage points
    # and integrated with the solution weights, so the residual is the method's own local error
    # summed over the run: measured 0.2-0.8 x rtol for rtol 1e-5 .. 1e-8 (Radau5's collocation
    # formula gives 1e-2 x rtol, tests/test_first_law.py). Bound: rtol
    import emsim
    r = emsim.simulate(build_benchmark_drive(), 2.0, out_dt=1e-3, solver=DormandPrince5(rtol=1e-6))
    e = r.energy
    assert e["supplied"] > 1.0
    assert e["relative_residual"] < 1e-6, e
    assert r.stats["newton_iterations"] == 0 and r.stats["steps"] >= 2000


def test_benchmark_drive_agrees_with_radau5():
    # the two methods of the loop, independent formulas, on the drive with algebraic rows and a
    # 1 kHz sampled controller: load speed within a few tolerances of each other (Radau5 at 100x tighter)
    import emsim
    from emsim.solvers.compiled import Radau5
    system = build_benchmark_drive()
    prob = emsim.assemble(system)
    a = emsim.simulate(prob, 1.0, out_dt=1e-3, solver=DormandPrince5(rtol=1e-7))
    b = emsim.simulate(prob, 1.0, out_dt=1e-3, solver=Radau5(rtol=1e-9))
    w_a, w_b = a["load_side.speed"], b["load_side.speed"]
    span = float(np.ptp(w_b))
    assert span > 1.0
    assert np.max(np.abs(w_a - w_b)) / span < 1e-6
    for name in ("bus.voltage", "motor.current"):
        assert np.max(np.abs(a[name] - b[name])) <= 1e-6 * np.max(np.abs(b[name])), name


def test_rows_between_samples_of_the_benchmark_drive_come_from_the_dense_output():
    # The step loop computes the quartic dense output only for a step with an output row inside it
    # (or event functions). Rows every 0.25 ms on the 1 kHz drive: the rows at the sample instants
    # must be those of a run with rows only there (bit for bit: the steps are the same), and the rows
    # between them must follow Radau5 at a much tighter rtol (independent formula) to the tolerance
    import emsim
    from emsim.solvers.compiled import Radau5
    prob = emsim.assemble(build_benchmark_drive())
    fine = emsim.simulate(prob, 0.3, out_dt=2.5e-4, solver=DormandPrince5(rtol=1e-7))
    coarse = emsim.simulate(prob, 0.3, out_dt=1e-3, solver=DormandPrince5(rtol=1e-7))
    ref = emsim.simulate(prob, 0.3, out_dt=2.5e-4, solver=Radau5(rtol=1e-10))
    assert fine.stats == coarse.stats
    at_samples = np.isin(np.round(fine.time / 2.5e-4).astype(int) % 4, [0])
    for name in ("load_side.speed", "motor.current", "bus.voltage"):
        np.testing.assert_array_equal(fine[name][at_samples], coarse[name], err_msg=name)
        inside = ~at_samples
        scale = float(np.max(np.abs(ref[name])))
        # the dense output is 4th order: a few rtol of the signal's scale (stale output would be far off)
        assert np.max(np.abs(fine[name][inside] - ref[name][inside])) <= 2e-6 * scale, name


def test_options_and_settings():
    with pytest.raises(TypeError, match="newton_tol"):
        DormandPrince5(newton_tol=1e-3)
    with pytest.raises(ValueError, match=r"DormandPrince5: rtol must lie in \(0, 1\)"):
        DormandPrince5(rtol=2.0)
    s = DormandPrince5(rtol=1e-5).settings()
    assert "Dormand-Prince" in s["method"] and s["rtol"] == 1e-5 and "newton_tol" not in s
    # failures name the method (the diagnostics themselves: tests/test_solver_events.py)
    pr = P.make(P.BLOWUP, [1.0], (), state_names=["speed"], row_owner=["runaway_machine"])
    with pytest.raises(SolverError, match=r"^DormandPrince5 failed .*step size too small"):
        solve_standalone(pr, 2.0, out_dt=0.1, method="dopri5")
    with pytest.raises(ValueError, match="method must be one of"):
        solve_standalone(P.make(P.BLOWUP, [1.0], ()), 0.1, out_dt=0.1, method="euler")
