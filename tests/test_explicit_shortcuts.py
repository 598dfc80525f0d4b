"""Two shortcuts of the compiled loop against the plain path they replace: same rows, bit for bit.

* ``explicit_stages`` (emsim/solvers/abi.py): Dormand-Prince stages 1..6 of a step in one callback,
  handing back to the loop's own consistency solve at the first stage whose algebraic rows it
  cannot confirm. Reference: ``one_call_stages = False``, one callback per stage.
* The work array's currency flag (``Problem.fresh_slot``): ``at_time`` and ``record`` reuse the
  evaluation the integrator vouches for. Reference: ``fresh_slot = -1``, every call evaluates.

Both references are the paths that the physics tests (closed forms, scipy, SUNDIALS) check; the
shortcuts must change no arithmetic, so rows, event logs and the evaluation counts must be
identical. Checked on every catalogue system (switching, stick-slip events, lossy gears) and the
benchmark drives (three algebraic rows, 1 kHz sampled controller).
"""
from __future__ import annotations

import numpy as np
import pytest

import emsim
from emsim.errors import SolverError
from emsim.solvers.compiled import DormandPrince5, Radau5
from helpers import CATALOGUE, systems_with_benchmark_drive

SYSTEMS = systems_with_benchmark_drive()


def _span(name):
    return (CATALOGUE[name][1], CATALOGUE[name][2]) if name in CATALOGUE else (0.5, 1e-3)


def _run(prob, solver, t_end, out_dt):
    r = emsim.simulate(prob, t_end, out_dt=out_dt, solver=solver)
    rows = np.column_stack([r.signals[name] for name in sorted(r.signals)])
    return r.time, rows, r.events, r.stats


def _assert_same(a, b, what):
    np.testing.assert_array_equal(a[0], b[0], err_msg=f"{what}: row times")
    np.testing.assert_array_equal(a[1], b[1], err_msg=f"{what}: rows")
    assert sorted(a[2]) == sorted(b[2]), f"{what}: event log fields"
    for key in a[2]:
        np.testing.assert_array_equal(np.asarray(a[2][key]), np.asarray(b[2][key]), err_msg=f"{what}: events {key}")
    assert a[3] == b[3], f"{what}: statistics {a[3]} != {b[3]}"


@pytest.mark.parametrize("name", sorted(SYSTEMS))
def test_one_call_stages_equal_one_callback_per_stage(name):
    prob = emsim.assemble(SYSTEMS[name]())
    t_end, out_dt = _span(name)
    # 3e-8: on the drives the prediction then misses after most duty changes, so the hand-back
    # at a stage (and the Jacobian it asks for) is exercised, not only the straight path
    for rtol in (1e-4, 3e-8):
        runs = []
        for one_call in (True, False):
            solver = DormandPrince5(rtol=rtol)
            solver.one_call_stages = one_call
            runs.append(_run(prob, solver, t_end, out_dt))
        _assert_same(runs[0], runs[1], f"{name} rtol {rtol:g}")
        if name.startswith("bench") and rtol < 1e-6:
            assert runs[0][3]["jacobians"] > 20, runs[0][3]


@pytest.mark.parametrize("name", sorted(SYSTEMS))
def test_work_array_flag_changes_no_row(name):
    prob = emsim.assemble(SYSTEMS[name]())
    assert prob.fresh_slot >= 0
    t_end, out_dt = _span(name)
    for solver_class in (DormandPrince5, Radau5):
        runs = []
        for slot in (prob.fresh_slot, -1):
            p = emsim.assemble(SYSTEMS[name]()) if slot < 0 else prob
            p.fresh_slot = slot
            runs.append(_run(p, solver_class(rtol=1e-6), t_end, out_dt))
        _assert_same(runs[0], runs[1], f"{name} {solver_class.__name__}")


def test_a_flag_slot_outside_the_work_array_is_refused():
    prob = emsim.assemble(SYSTEMS["battery_motor"]())
    prob.fresh_slot = prob.n_work
    with pytest.raises(SolverError, match="fresh_slot"):
        emsim.simulate(prob, 0.1, out_dt=0.01, solver=DormandPrince5())


def _chain(mass=None):
    from emsim.solvers.standalone import compile_standalone
    from problems import chain_rhs, chain_rows
    xr, zr, chain_mass = chain_rows()
    y0 = np.zeros(len(chain_mass))
    for k, r in enumerate(xr):
        y0[r] = 1.0 + 0.1 * k
    for k, r in enumerate(zr):
        y0[r] = y0[xr[k]] + y0[xr[k + 1]]
    return compile_standalone(chain_rhs, y0, mass=chain_mass if mass is None else mass, name="chain"), xr, y0


def _run_standalone(prob, one_call, rtol=1e-8):
    from emsim.results.memory import MemoryRecorder
    solver = DormandPrince5(rtol=rtol)
    solver.one_call_stages = one_call
    sink = MemoryRecorder()
    stats = solver.run(prob, 1.0, out_dt=0.05, sink=sink)
    t, rows = sink.arrays()
    return t, rows, stats


def test_written_out_stages_on_a_layout_with_long_sums_and_interleaved_rows():
    # 12 differential rows interleaved with 10 algebraic ones: the written-out sums run past one
    # statement (stage_source._TERMS_PER_LINE) and the rows are not in algebraic-first order
    prob, xr, y0 = _chain()
    one, per_stage = _run_standalone(prob, True), _run_standalone(prob, False)
    np.testing.assert_array_equal(one[1], per_stage[1])
    assert one[2] == per_stage[2]
    # closed form (on the constraint the coupling vanishes): x_k = x_k(0) exp(-(k + 1) t)
    t, rows = one[0], one[1]
    for k, r in enumerate(xr):
        exact = y0[r] * np.exp(-(k + 1.0) * t)
        np.testing.assert_allclose(rows[:, r], exact, rtol=1e-6, atol=1e-9, err_msg=f"x_{k}")
    # z_k = x_k + x_{k+1} at the last row, a step end (inside a step algebraic rows are interpolated
    # linearly), to the consistency test's 1e-3 of the tolerance
    for k in range(len(xr) - 2):
        assert abs(rows[-1, 2 * k + 1] - rows[-1, xr[k]] - rows[-1, xr[k + 1]]) < 1e-10, k


def test_one_source_with_two_row_layouts_gets_two_modules():
    prob, _, _ = _chain()
    all_differential = np.ones(len(prob.mass))
    other, _, _ = _chain(mass=all_differential)
    assert other.module is not prob.module
    assert prob.module._abi_explicit_layout[0] == tuple(int(i) for i in np.flatnonzero(prob.mass == 0.0))
    assert other.module._abi_explicit_layout[0] == ()


def test_a_mass_changed_after_the_module_was_built_is_refused():
    prob, _, _ = _chain()
    prob.mass = np.ones(len(prob.mass))
    with pytest.raises(SolverError, match="explicit stages were generated for algebraic rows"):
        _run_standalone(prob, True)
