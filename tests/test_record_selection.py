"""Recording a chosen set of signals (``simulate(..., record=...)``).

A run that keeps fewer signals must keep exactly the values the full run has for them, bit for
bit (the same solver steps; only the output rows are narrower), with every solver; the four
``energy.*`` signals of the first-law audit are always kept, and the audit is the same.
Reference: the run that records everything, and plain h5py for the file's content.
"""
from __future__ import annotations

import h5py
import numpy as np
import pytest

import emsim
from emsim.errors import ParameterError, SolverError
from emsim.solvers.compiled import DormandPrince5, Radau5
from emsim.solvers.reference import ScipyReference
from helpers import build_geared_drive

AUDIT = {"energy.supplied", "energy.loss", "energy.delivered", "energy.stored"}
T_END, DT = 0.3, 0.01


@pytest.fixture(scope="module")
def problem():
    # states, algebraic rows, a rigid group, a lossy gear with its power-flow events
    return emsim.assemble(build_geared_drive(ratio=10.0, efficiency=0.8, load_torque=-2.0, load_inertia=0.5))


@pytest.mark.parametrize("solver", [Radau5(rtol=1e-8), DormandPrince5(rtol=1e-8), ScipyReference(rtol=1e-9)],
                         ids=["radau5", "dopri5", "reference"])
def test_chosen_signals_equal_the_full_run(problem, solver):
    full = emsim.simulate(problem, T_END, out_dt=DT, solver=solver)
    some = emsim.simulate(problem, T_END, out_dt=DT, solver=solver, record=["motor.*", "load.shaft.speed"])
    motor = {n for n in full.signals if n.startswith("motor.")}
    assert motor and set(some.signals) == motor | {"load.shaft.speed"} | AUDIT
    np.testing.assert_array_equal(some.time, full.time)
    for name in some.signals:
        np.testing.assert_array_equal(some[name], full[name], err_msg=name)
        assert some.units[name] == full.units[name]
    assert some.energy == full.energy
    assert some.stats == full.stats


def test_one_name_as_a_string_keeps_it_and_the_audit(problem):
    run = emsim.simulate(problem, T_END, out_dt=DT, solver=DormandPrince5(rtol=1e-6), record="load.shaft.speed")
    assert set(run.signals) == {"load.shaft.speed"} | AUDIT


def test_the_file_holds_only_the_chosen_signals(problem, tmp_path):
    path = tmp_path / "chosen.h5"
    full = emsim.simulate(problem, T_END, out_dt=DT, solver=Radau5(rtol=1e-8))
    emsim.simulate(problem, T_END, out_dt=DT, solver=Radau5(rtol=1e-8), output=path, record=["gear.*"])
    with h5py.File(path, "r") as f:
        names = set(f["signals"].attrs["names"]) if "names" in f["signals"].attrs else set(f["signals"].keys())
    gear = {n for n in full.signals if n.startswith("gear.")}
    assert gear and names == gear | AUDIT
    with emsim.open_results(path) as res:
        for name in gear:
            np.testing.assert_array_equal(res[name], full[name], err_msg=name)


@pytest.mark.parametrize("entry, match", [
    ("load.speeed", r"record entry 'load\.speeed' matches no signal of this system; close: \["),
    ("pump.*", r"record entry 'pump\.\*' matches no signal"),
])
def test_an_entry_that_matches_nothing_names_itself(problem, entry, match):
    with pytest.raises(ParameterError, match=match):
        emsim.simulate(problem, T_END, out_dt=DT, record=[entry])


def test_a_record_entry_must_be_a_name(problem):
    with pytest.raises(ParameterError, match=r"record entries must be signal names or patterns \(str\); got 3"):
        emsim.simulate(problem, T_END, out_dt=DT, record=["load.shaft.speed", 3])


@pytest.mark.parametrize("solver", [Radau5(), ScipyReference()], ids=["compiled", "reference"])
@pytest.mark.parametrize("bad", [[0, "n"], []], ids=["outside", "empty"])
def test_solvers_refuse_columns_outside_the_row(problem, solver, bad):
    from emsim.results.memory import MemoryRecorder
    cols = [problem.n_record if c == "n" else c for c in bad]
    with pytest.raises(SolverError, match=r"record columns must be indices in \[0, "):
        solver.run(problem, T_END, out_dt=DT, sink=MemoryRecorder(), columns=cols)
