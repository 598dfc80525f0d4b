"""A whole run streamed to HDF5: the file's content with plain h5py, and read back with emsim.

Outside references:
- h5py (plain library access to the file: datasets, attributes);
- pint (units of the stored values) and the definition 1 rpm = 2 pi / 60 rad/s;
- the in-memory run of the same system (a file run must hold the same values).
"""
from __future__ import annotations

import json
import math

import h5py
import numpy as np
import pytest

import emsim
from emsim.model.declarations import DOMAINS
from helpers import build_geared_drive, run

T_END, DT = 0.5, 0.005

_runs: dict = {}


def build():
    # a drive with states, algebraic rows, a rigid group, a lossy gear (state events) and a load
    return build_geared_drive(ratio=10.0, efficiency=0.8, load_torque=-2.0, load_inertia=0.5)


@pytest.fixture(scope="module")
def runs(solver, tmp_path_factory):
    key = id(solver)
    if key not in _runs:
        path = tmp_path_factory.mktemp("h5run") / "run.h5"
        system = build()
        problem = emsim.assemble(system)
        memory = run(problem, T_END, solver, DT)
        filed = run(problem, T_END, solver, DT, output=path, metadata={"note": "bench run"})
        _runs[key] = (system, problem, memory, filed, path)
    return _runs[key]


def expected_columns(system, problem):
    """Every state, every port's across and through, every declared output, with its unit."""
    cols = {}
    for name, unit in zip(problem.state_names[:problem.n_main], problem.record_units):
        cols[name] = unit
    for comp in system.components.values():
        decl = {s.name: s.unit for s in comp.states}
        for s, unit in decl.items():
            cols[f"{comp.name}.{s}"] = unit
        for port in comp.ports:
            across, aunit, through, tunit = DOMAINS[port.domain]
            cols[f"{comp.name}.{port.name}.{across}"] = aunit
            cols[f"{comp.name}.{port.name}.{through}"] = tunit
        for out in comp.outputs:
            cols[f"{comp.name}.{out.name}"] = out.unit
    return cols


def same_unit(a: str, b: str) -> bool:
    pa = emsim.ureg.Quantity(1.0, a or "dimensionless")
    pb = emsim.ureg.Quantity(1.0, b or "dimensionless")
    return pa.dimensionality == pb.dimensionality and math.isclose(pa.to(pb.units).magnitude, 1.0)


def test_file_result_has_no_arrays_but_a_path(runs):
    system, problem, memory, filed, path = runs
    assert filed.path == str(path) and path.exists()
    assert not path.with_name(path.name + ".partial").exists()


def test_plain_h5py_sees_every_state_port_and_output_with_units(runs):
    system, problem, memory, filed, path = runs
    cols = expected_columns(system, problem)
    with h5py.File(path, "r") as f:
        sig = f["signals"]
        missing = sorted(set(cols) - set(sig))
        assert not missing, f"datasets missing from /signals: {missing}"
        wrong = {n: (sig[n].attrs["unit"], u) for n, u in cols.items() if not same_unit(sig[n].attrs["unit"], u)}
        assert not wrong, f"units differ from the declarations: {wrong}"
        n = f["time"].shape[0]
        assert n == len(memory.time) == int(round(T_END / DT)) + 1
        assert all(sig[name].shape == (n,) for name in cols)
        assert f["time"].attrs["unit"] in ("second", "s")
        assert f.attrs["status"] == "complete"
        print(f"h5py: {len(sig)} signal datasets, {len(cols)} checked against the declarations, {n} rows")


def test_metadata_describes_system_parameters_version_and_solver(runs, solver):
    system, problem, memory, filed, path = runs
    with h5py.File(path, "r") as f:
        meta = {k: json.loads(f["meta"][k][()]) for k in f["meta"]}
        assert f.attrs["emsim_version"] == emsim.__version__
    assert meta["emsim_version"] == emsim.__version__
    assert meta["note"] == "bench run"
    assert meta["t_end"] == T_END and meta["out_dt"] == DT
    assert meta["solver"]["rtol"] == solver.rtol
    desc = meta["system"]
    assert desc["name"] == system.name
    comps = {c["name"]: c for c in desc["components"]}
    assert sorted(comps) == sorted(system.components)
    for name, comp in system.components.items():
        assert comps[name]["parameters"] == pytest.approx(comp.values)
    assert comps["gear"]["parameters"]["ratio"] == 10.0 and comps["gear"]["parameters"]["efficiency"] == 0.8


def test_event_log_and_energy_audit_in_the_file(runs):
    system, problem, memory, filed, path = runs
    with h5py.File(path, "r") as f:
        ev = f["events"]
        names = [x.decode() if isinstance(x, bytes) else x for x in ev.attrs["component_names"]]
        t, comp = ev["time"][:], ev["component"][:]
        kinds = dict(zip(ev.attrs["kind_codes"], [k.decode() if isinstance(k, bytes) else k
                                                  for k in ev.attrs["kind_names"]]))
        energy = {k: float(f["energy"][k][()]) for k in f["energy"]}
        kind = [kinds[int(k)] for k in ev["kind"][:]]
    assert len(t) >= 1, "this run has power-flow events; the file logged none"
    np.testing.assert_array_equal(t, memory.events["time"])
    assert [names[c] for c in comp] == list(memory.events["component"])
    assert kind == list(memory.events["kind"])
    for key in ("supplied", "loss", "delivered", "stored_change", "residual", "relative_residual"):
        assert energy[key] == pytest.approx(memory.energy[key], rel=1e-12, abs=1e-12), key
    print(f"file events {list(t)}; energy {energy}")


def test_read_back_arrays_and_quantities_equal_the_memory_run(runs):
    system, problem, memory, filed, path = runs
    with emsim.open_results(path) as res:
        assert res.status == "complete"
        np.testing.assert_array_equal(res.time, memory.time)
        for name in memory.signals:
            a, b = res[name], memory[name]
            # the same deterministic computation: identical values are expected
            np.testing.assert_array_equal(a, b, err_msg=name)
        current = res.get("motor.current")
        assert isinstance(current, emsim.ureg.Quantity)
        assert current.units == emsim.ureg.ampere
        np.testing.assert_array_equal(current.magnitude, memory["motor.current"])
        rpm = res.get("rotor.speed").to("rpm").magnitude
        np.testing.assert_allclose(rpm, memory["rotor.speed"] * 60.0 / (2.0 * math.pi), rtol=1e-14)  # definition
        torque = res.get("motor.torque").to("N*m").magnitude
        np.testing.assert_array_equal(torque, memory["motor.torque"])
        assert res.energy["loss"] == pytest.approx(memory.energy["loss"], rel=1e-12)
        assert len(res.events) == len(memory.events["time"])
        print(f"read back {len(memory.signals)} signals x {len(memory.time)} rows: identical to the memory run")
