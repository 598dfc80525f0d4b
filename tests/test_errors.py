"""Each bad input gives its own clear error, naming what is wrong and where.

Not physics: the reference here is the documented behaviour (emsim.errors, the component
contract, System.connect, simulate's output checks) and h5py/hashlib for the file checks.
"""
from __future__ import annotations

import hashlib
import math
import re

import numba
import pytest

import emsim
from emsim import AssemblyError, ParameterError, PluginError, ResultsError, SolverError, UnitError, WiringError
from emsim.components import Battery, DCMotor, Inertia, SwitchedDCSource
from emsim.model.declarations import Output, Param, Port
from helpers import MOTOR, SOLVERS, SOLVER_IDS, build_dc_motor, schedule


# --------------------------------------------------------------------------- plugin classes
# Kernels must live at module level in an importable module (contract rule 4): this test file.

class DictKernelLoad(emsim.Component):
    """A load whose kernel builds a dict with mixed key types, which numba's nopython mode rejects."""

    params = (Param("torque", "N*m", 1.0),)
    ports = (Port("shaft", "rotational"),)

    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        table = {1: p[0], "two": 2.0 * p[0]}
        f[0] = table[1]


class SqrtLoad(emsim.Component):
    """A load torque sqrt(t_fail - t): real until t_fail, NaN after it (a deliberately bad kernel)."""

    params = (Param("t_fail", "s", 1.0),)
    ports = (Port("shaft", "rotational"),)
    outputs = (Output("power", "W"),)
    energy = emsim.Energy(delivered=("power",))

    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        f[0] = math.sqrt(p[0] - t)

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = f[0] * a[0]


def sqrt_system(t_fail):
    s = emsim.System("sqrt_load")
    s.add(Inertia("disc", inertia=0.1), SqrtLoad("bad", t_fail=t_fail))
    s.connect("disc.shaft", "bad.shaft", name="disc_node")
    return s


def motor(**over):
    return DCMotor("m", **{**MOTOR, **over})


# --------------------------------------------------------------------------- parameters and units

def test_wrong_unit_dimension_names_component_and_parameter():
    with pytest.raises(UnitError, match=r"DCMotor 'm'.*parameter 'resistance' expects a quantity in ohm.*0\.3 meter"):
        motor(resistance="0.3 m")


def test_unreadable_quantity_string():
    with pytest.raises(UnitError, match=r"DCMotor 'm'.*'inductance' = 'five millihenry' is not a readable quantity"):
        motor(inductance="five millihenry")


def test_missing_required_parameter():
    with pytest.raises(ParameterError, match=r"DCMotor 'm'.*parameter 'torque_constant'.*is required"):
        DCMotor("m", resistance=1.0, inductance=0.05)


def test_out_of_bounds_value():
    with pytest.raises(ParameterError, match=r"Battery 'b'.*'initial_soc' = 1\.5.*outside \[0, 1\]"):
        Battery("b", open_circuit_voltage=12, internal_resistance=0.1, capacity="2 A*h", initial_soc=1.5)
    with pytest.raises(ParameterError, match=r"Inertia 'j'.*'inertia' = -1.*outside"):
        Inertia("j", inertia=-1.0)
    with pytest.raises(ParameterError, match=r"DCMotor 'm'.*'resistance' = 0.*must be positive"):
        motor(resistance=0.0)


def test_unknown_parameter_name():
    with pytest.raises(ParameterError, match=r"DCMotor 'm'.*unknown parameter\(s\) \['resistence'\]"):
        DCMotor("m", resistence=1.0, inductance=0.05, torque_constant=0.1)


# --------------------------------------------------------------------------- wiring

def test_duplicate_component_name():
    s = emsim.System("dup")
    s.add(Inertia("j", inertia=1.0))
    with pytest.raises(WiringError, match=r"component named 'j' is already added"):
        s.add(Inertia("j", inertia=2.0))


def test_unknown_port_in_connect():
    s = emsim.System("ports")
    s.add(motor(), Inertia("j", inertia=1.0))
    with pytest.raises(WiringError, match=r"component 'm' \(DCMotor\) has no port, signal or input 'shaftt'"):
        s.connect("m.shaftt", "j.shaft")
    with pytest.raises(WiringError, match=r"no component 'jj'.*did you mean \['j'\]"):
        s.connect("m.shaft", "jj.shaft")


def test_domain_mismatch_in_connect():
    s = emsim.System("domains")
    s.add(motor(), Inertia("j", inertia=1.0))
    with pytest.raises(WiringError, match=r"domain mismatch joining m\.armature \(electrical\), j\.shaft \(rotational\)"):
        s.connect("m.armature", "j.shaft")


def test_unconnected_required_port():
    s = emsim.System("open")
    times, levels = schedule((0.0, 12.0))
    s.add(SwitchedDCSource("src", times=times, levels=levels), motor())
    s.connect("src.terminal", "m.armature")
    with pytest.raises(AssemblyError, match=r"port 'm\.shaft' \(rotational\) is not connected"):
        emsim.assemble(s)


def test_two_ideal_sources_in_parallel_over_determine_the_node():
    s = emsim.System("parallel")
    times, levels = schedule((0.0, 12.0))
    s.add(SwitchedDCSource("a", times=times, levels=levels), SwitchedDCSource("b", times=times, levels=levels),
          motor(), Inertia("j", inertia=1.0))
    s.connect("a.terminal", "b.terminal", "m.armature", name="bus")
    s.connect("m.shaft", "j.shaft")
    with pytest.raises(AssemblyError, match=r"node 'bus' is over-determined: \['a\.terminal', 'b\.terminal'\]"):
        emsim.assemble(s)


def test_node_of_only_inductive_members_cannot_be_determined():
    # Two armatures in parallel and nothing else: each is L di/dt = v - R i - k w, so Kirchhoff's
    # current law i1 + i2 = 0 never involves the node voltage v; nothing fixes it.
    s = emsim.System("floating")
    s.add(DCMotor("m1", **MOTOR), DCMotor("m2", **MOTOR), Inertia("j1", inertia=1.0), Inertia("j2", inertia=1.0))
    s.connect("m1.armature", "m2.armature", name="pair")
    s.connect("m1.shaft", "j1.shaft")
    s.connect("m2.shaft", "j2.shaft")
    with pytest.raises(AssemblyError, match=r"cannot determine \['pair\.voltage'\]"):
        emsim.assemble(s)


# --------------------------------------------------------------------------- plugins

def test_kernel_numba_rejects_names_the_class():
    s = emsim.System("dict_plugin")
    s.add(Inertia("j", inertia=1.0), DictKernelLoad("dl"))
    s.connect("j.shaft", "dl.shaft")
    with pytest.raises(PluginError, match=r"component class test_errors\.DictKernelLoad \(used by \['dl'\]\), "
                                          r"kernel 'equations'.*nopython"):
        emsim.assemble(s)


def test_plugin_class_without_equations_is_rejected_at_definition():
    with pytest.raises(PluginError, match=r"NoEquations.*define the 'equations' kernel"):
        class NoEquations(emsim.Component):  # noqa: F841 - the definition itself must fail
            ports = (Port("shaft", "rotational"),)


def test_kernel_returning_nan_names_the_component():
    # t_fail < 0: sqrt of a negative number from the very start, caught at assembly
    with pytest.raises(PluginError, match=r"non-finite value.*t = 0"):
        emsim.assemble(sqrt_system(-1.0))


def test_kernel_returning_nan_message_names_the_culprit_component():
    with pytest.raises(PluginError, match=r"\bbad\b"):
        emsim.assemble(sqrt_system(-1.0))


# --------------------------------------------------------------------------- output files

def sha(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_unwritable_output_fails_before_simulating(tmp_path):
    # The system below cannot even be assembled (open port): getting ResultsError, not
    # AssemblyError, shows the path is checked first.
    s = emsim.System("unbuilt")
    s.add(motor())
    target = tmp_path / "no_such_folder" / "run.h5"
    with pytest.raises(ResultsError, match=r"folder .*no_such_folder.* does not exist"):
        emsim.simulate(s, 1.0, output=target, solver=SOLVERS[0])
    with pytest.raises(ResultsError, match=r"is a directory"):
        emsim.simulate(s, 1.0, output=tmp_path, solver=SOLVERS[0])
    assert list(tmp_path.iterdir()) == []  # no file, no probe, no partial left behind


def test_foreign_file_at_target_is_refused_and_untouched(tmp_path):
    target = tmp_path / "notes.h5"
    target.write_text("not an emsim file")
    before = sha(target)
    with pytest.raises(ResultsError, match=r"exists and is not an HDF5 file.*Refusing to replace it"):
        emsim.simulate(build_dc_motor(), 0.1, output=target, solver=SOLVERS[0])
    assert sha(target) == before


@pytest.mark.parametrize("solver", SOLVERS, ids=SOLVER_IDS)
def test_run_failing_midway_leaves_earlier_good_file_untouched(tmp_path, solver):
    target = tmp_path / "run.h5"
    good = emsim.simulate(sqrt_system(10.0), 0.3, out_dt=0.01, output=target, solver=solver)
    assert good.path == str(target)
    before = sha(target)
    with pytest.raises(SolverError, match=r"non-finite|NaN"):
        emsim.simulate(sqrt_system(0.1), 0.3, out_dt=0.01, output=target, solver=solver)
    assert sha(target) == before  # the earlier good result is untouched
    with emsim.open_results(target) as res:
        assert res.status == "complete" and res.time[-1] == pytest.approx(0.3)
    partial = tmp_path / "run.h5.partial"
    assert partial.exists()  # kept for diagnosis, marked failed (results/writer.py contract)
    with emsim.open_results(partial) as res:
        assert res.status == "failed"
        assert res.error and "SolverError" in res.error
        assert len(res.time) == 0 or res.time[-1] <= 0.1 + 1e-9


@pytest.mark.parametrize("solver", SOLVERS, ids=SOLVER_IDS)
def test_run_failing_midway_leaves_no_file_at_a_fresh_target(tmp_path, solver):
    target = tmp_path / "fresh.h5"
    with pytest.raises(SolverError, match=r"non-finite|NaN") as info:
        emsim.simulate(sqrt_system(0.1), 0.3, out_dt=0.01, output=target, solver=solver)
    print(f"mid-run failure ({solver.name}): {info.value}")
    assert not target.exists()
    # the message names the time of failure (solver contract 6): just after t_fail = 0.1 s
    when = re.search(r"t = ([0-9.eE+-]+)", str(info.value))
    assert when, f"no failure time in {info.value}"
    assert 0.1 <= float(when.group(1).rstrip(".")) < 0.11


@pytest.mark.parametrize("solver", SOLVERS, ids=SOLVER_IDS)
def test_run_failing_midway_names_the_culprit_component(tmp_path, solver):
    with pytest.raises(SolverError, match=r"\bbad\b"):
        emsim.simulate(sqrt_system(0.1), 0.3, out_dt=0.01, solver=solver)
