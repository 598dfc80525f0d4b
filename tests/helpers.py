"""Shared test material: the solver catalogue, the catalogue of test systems, first-law check.

Every physics test file builds its systems here so that the same system
*structures* are reused: a structure (components, connections, which capacities
are non-zero, table lengths) compiles once (~10-20 s) and later loads from the
on-disk kernel cache (~1 s). Parameter values never recompile. That is why, for
example, every DC-source schedule in this catalogue has exactly three entries.

Reference values used by the builders are plain invented numbers (a small
hobby-size motor and bench loads), not taken from any data sheet.
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

import emsim
from emsim.components import (Battery, CompliantShaft, ConstantTorque, CoulombFriction, DCMotor, Gearbox,
                              Inertia, SwitchedDCSource)
from emsim.solvers.reference import ScipyReference

# --------------------------------------------------------------------------- solvers

REFERENCE_RTOL = 1e-9
COMPILED_RTOL = 1e-8


def solvers() -> list:
    """The solvers every physics test runs on: the scipy reference, plus the compiled Radau5 if present."""
    out = [ScipyReference(rtol=REFERENCE_RTOL)]
    try:
        from emsim.solvers.compiled import Radau5
    except ImportError:
        return out
    out.append(Radau5(rtol=COMPILED_RTOL))
    return out


def solver_id(solver) -> str:
    return "reference" if isinstance(solver, ScipyReference) else "compiled"


SOLVERS = solvers()
SOLVER_IDS = [solver_id(s) for s in SOLVERS]


def solver_params():
    """``pytest.fixture(params=...)`` arguments: ``@pytest.fixture(**solver_params())``."""
    return {"params": SOLVERS, "ids": SOLVER_IDS}


def tol(solver, factor: float = 1e3) -> float:
    """Relative tolerance to compare a run against an exact reference.

    Both backends control the *local* error per step to ``rtol`` (with ``atol =
    rtol * nominal``); the global error of a smooth, stable run is the sum of the
    local errors propagated along the trajectory, which for these short, damped
    runs of a few hundred to a few thousand steps stays well below 1e3 local errors.
    So ``1e3 * rtol`` is the bound used throughout (1e-6 for the reference at rtol 1e-9,
    1e-5 for the compiled solver at rtol 1e-8).
    """
    return factor * solver.rtol


def first_law_ok(result, rtol: float) -> float:
    """Assert the run's first-law residual is small; return the relative residual.

    The audit integrates supplied, lost and delivered power as quadrature states
    (same tolerance as the run) and reads stored energy from the states; every term
    carries a relative error of the order of the global integration error (<~ 1e3 *
    rtol, see :func:`tol`), so a correct energy bookkeeping keeps the relative residual
    below ``1e3 * rtol``. A missing or mis-signed term gives a residual of order 1.
    (First law of thermodynamics for a closed system: supplied = lost + delivered + stored change.)
    """
    e = result.energy
    assert e, "run produced no energy audit"
    assert np.isfinite(e["relative_residual"])
    assert e["relative_residual"] < 1e3 * rtol, (
        f"first-law residual {e['residual']:.3g} J is {e['relative_residual']:.3g} of the energy flows "
        f"(bound {1e3 * rtol:.1g}); audit: {e}")
    return e["relative_residual"]


def run(system, t_end, solver, out_dt, **kw):
    return emsim.simulate(system, t_end, out_dt=out_dt, solver=solver, **kw)


# --------------------------------------------------------------------------- systems

#: The bench DC motor used throughout (invented values).
MOTOR = dict(resistance=1.0, inductance=0.05, torque_constant=0.1)
V_SUPPLY = 12.0


def schedule(*pairs, t_far=1e6):
    """A three-entry source schedule (times, levels); missing entries are padded far beyond any run."""
    pairs = list(pairs)
    while len(pairs) < 3:
        pairs.append((t_far * (len(pairs) + 1), pairs[-1][1]))
    assert len(pairs) == 3
    return [p[0] for p in pairs], [p[1] for p in pairs]


def build_dc_motor(*, voltage=V_SUPPLY, inertia=0.01, viscous=1e-3, load_torque=0.0, switching=None,
                   motor=None, name="dc_motor"):
    """Source -> DC motor -> inertia (+ a constant load torque, 0 by default).

    The motor's own viscous friction is the damper; its rotor inertia is 0 so the
    load inertia is the shaft's only capacity. ``switching`` is a list of up to
    three (time, level) pairs; default: ``voltage`` from t = 0.
    """
    times, levels = schedule(*(switching or [(0.0, voltage)]))
    s = emsim.System(name)
    s.add(SwitchedDCSource("src", times=times, levels=levels),
          DCMotor("motor", **(motor or MOTOR), viscous_friction=viscous),
          Inertia("load", inertia=inertia),
          ConstantTorque("torque", torque=load_torque))
    s.connect("src.terminal", "motor.armature", name="bus")
    s.connect("motor.shaft", "load.shaft", "torque.shaft", name="rotor")
    return s


def build_battery_motor(*, voc=12.0, r_int=0.2, capacity=100.0, volt_per_soc=2.0, soc0=0.9, inertia=1e6):
    """Battery -> DC motor with a (practically) locked rotor: the motor is an R-L load."""
    s = emsim.System("battery_motor")
    s.add(Battery("bat", open_circuit_voltage=voc, internal_resistance=r_int, capacity=capacity,
                  voltage_per_soc=volt_per_soc, initial_soc=soc0),
          DCMotor("motor", **MOTOR),
          Inertia("load", inertia=inertia))
    s.connect("bat.terminal", "motor.armature", name="bus")
    s.connect("motor.shaft", "load.shaft", name="rotor")
    return s


def build_torsion(*, j1=0.02, j2=0.05, k=200.0, damping=0.0, twist0=0.0, w1=0.0, w2=0.0):
    """Two inertias joined by a compliant shaft (free vibration)."""
    s = emsim.System("torsion")
    s.add(Inertia("j1", inertia=j1), CompliantShaft("shaft", stiffness=k, damping=damping,
                                                     initial={"twist": twist0}),
          Inertia("j2", inertia=j2))
    s.connect("j1.shaft", "shaft.a", name="side1")
    s.connect("shaft.b", "j2.shaft", name="side2")
    s.set_initial("side1", w1).set_initial("side2", w2)
    return s


def build_geared_torsion(*, j1=0.002, ratio=4.0, j2=0.05, k=200.0, damping=0.0, twist0=0.0, w_out=0.0):
    """Inertia j1 -> rigid gear (input/output = ratio, lossless) -> compliant shaft -> inertia j2."""
    s = emsim.System("geared_torsion")
    s.add(Inertia("j1", inertia=j1), Gearbox("gear", ratio=ratio),
          CompliantShaft("shaft", stiffness=k, damping=damping, initial={"twist": twist0}),
          Inertia("j2", inertia=j2))
    s.connect("j1.shaft", "gear.input", name="fast")
    s.connect("gear.output", "shaft.a", name="slow")
    s.connect("shaft.b", "j2.shaft", name="side2")
    s.set_initial("slow", w_out).set_initial("side2", w_out)
    return s


def build_geared_drive(*, ratio=10.0, efficiency=0.8, load_torque=2.0, load_inertia=0.5, rotor_inertia=1e-3,
                       voltage=V_SUPPLY, viscous=0.0, name="geared_drive"):
    """Source -> DC motor -> gear (ratio, efficiency; rotor inertia on its input) -> load inertia + constant torque.

    ``load_torque`` > 0 resists (motoring); < 0 overhauls (drives the motor as a generator).
    With ``efficiency=1`` the gear is lossless (a different compiled structure: no power-flow mode).
    """
    times, levels = schedule((0.0, voltage))
    s = emsim.System(name)
    s.add(SwitchedDCSource("src", times=times, levels=levels),
          DCMotor("motor", **MOTOR, viscous_friction=viscous),
          Gearbox("gear", ratio=ratio, efficiency=efficiency, input_inertia=rotor_inertia),
          Inertia("load", inertia=load_inertia),
          ConstantTorque("torque", torque=load_torque))
    s.connect("src.terminal", "motor.armature", name="bus")
    s.connect("motor.shaft", "gear.input", name="rotor")
    s.connect("gear.output", "load.shaft", "torque.shaft", name="drum")
    return s


def build_friction(*, inertia=0.1, coulomb=0.5, breakaway=None, applied=0.0, w0=0.0, creep=1e-6):
    """Inertia with stick-slip Coulomb friction to ground and an applied (driving) constant torque."""
    fr = dict(coulomb_torque=coulomb, creep_speed=creep)
    if breakaway is not None:
        fr["breakaway_torque"] = breakaway
    s = emsim.System("friction")
    s.add(Inertia("disc", inertia=inertia), CoulombFriction("fric", **fr),
          ConstantTorque("drive", torque=-applied))  # a negative load torque drives the shaft
    s.connect("disc.shaft", "fric.shaft", "drive.shaft", name="disc_node")
    s.set_initial("disc_node", w0)
    return s


#: Every catalogue system with a run length and output step, for the first-law test.
CATALOGUE = {
    "dc_motor_step": (lambda: build_dc_motor(), 3.0, 0.01),
    "dc_motor_switching": (lambda: build_dc_motor(switching=[(0.0, 12.0), (0.1, 0.0), (0.2, 6.0)]), 0.3, 1e-3),
    "battery_motor": (lambda: build_battery_motor(), 2.0, 0.01),
    "torsion": (lambda: build_torsion(damping=0.05, twist0=0.01, w1=3.0), 1.0, 1e-3),
    "geared_torsion": (lambda: build_geared_torsion(damping=0.02, twist0=0.01, w_out=2.0), 1.0, 1e-3),
    "geared_drive_motoring": (lambda: build_geared_drive(), 2.0, 0.01),
    "geared_drive_overhauling": (lambda: build_geared_drive(load_torque=-2.0), 2.0, 0.01),
    "geared_drive_lossless": (lambda: build_geared_drive(efficiency=1.0), 2.0, 0.01),
    "friction_coast": (lambda: build_friction(w0=10.0), 3.0, 0.01),
    "friction_breakaway": (lambda: build_friction(applied=0.8, breakaway=0.6), 1.0, 0.01),
}


def build_benchmark_drive(variant: str = "averaged-drive") -> emsim.System:
    """The benchmark drive (battery, averaged bridge, motor, gear, shaft, load, sampled PI) of benchmarks/."""
    bench = str(Path(__file__).resolve().parents[1] / "benchmarks")
    if bench not in sys.path:
        sys.path.insert(0, bench)
    import emsim_side
    return emsim_side.build(variant)


def systems_with_benchmark_drive() -> dict:
    """Builders of every catalogue system plus the averaged benchmark drives, by name."""
    out = {name: entry[0] for name, entry in CATALOGUE.items()}
    out["bench_averaged"] = build_benchmark_drive
    # fan load and the plugin-style smooth Coulomb friction of benchmarks/emsim_side.py
    out["bench_nonlinear"] = lambda: build_benchmark_drive("averaged-drive-nonlinear")
    return out


def crossings(t, x):
    """Times where ``x`` changes sign, by linear interpolation between samples."""
    t, x = np.asarray(t), np.asarray(x)
    i = np.flatnonzero(np.sign(x[:-1]) * np.sign(x[1:]) < 0)
    return t[i] - x[i] * (t[i + 1] - t[i]) / (x[i + 1] - x[i])
