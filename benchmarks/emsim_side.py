"""The benchmark drive built from emsim components, and the runner the harness times.

The model is the one in drive_model.py, assembled from the built-in library
(battery, averaged bridge, DC motor, gearbox, compliant shaft, inertia, damper,
fan load, sampled PI, repeating ramp) plus one small component defined here
the way a plugin author would: a smooth (tanh) Coulomb friction.
"""
from __future__ import annotations

import math
import os

import numpy as np

import emsim
from emsim.components import (AveragedBridge, Battery, CompliantShaft, Damper, DCMotor, FanLoad, Gearbox,
                              Inertia, RepeatingRamp, SampledPISpeed)
from emsim.solvers.compiled import DormandPrince5, Radau5

try:
    from . import drive_model as dm
except ImportError:  # run as a script from benchmarks/
    import drive_model as dm


class SmoothCoulomb(emsim.Component):
    """Smoothed Coulomb friction T = level * tanh(w / speed_scale) (a plugin-style component)."""

    params = (emsim.Param("level", "N*m", doc="friction torque at high speed"),
              emsim.Param("speed_scale", "rad/s", doc="tanh smoothing speed"))
    ports = (emsim.Port("shaft", "rotational"),)
    outputs = (emsim.Output("loss", "W"),)
    energy = emsim.Energy(loss=("loss",))

    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        f[0] = p[0] * math.tanh(a[0] / p[1])

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = f[0] * a[0]

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        # d/dw of level * tanh(w / speed_scale); with it the whole drive has an analytic Jacobian
        th = math.tanh(a[0] / p[1])
        ja[0, 0] = p[0] / p[1] * (1.0 - th * th)


def build(variant: str) -> emsim.System:
    """The benchmark drive of ``variant`` as an emsim system."""
    P = dm.params(variant)
    drive = emsim.System(variant)
    drive.add(
        Battery("battery", open_circuit_voltage=P.Voc, internal_resistance=P.Rb, capacity=1e9),
        AveragedBridge("bridge"),
        DCMotor("motor", resistance=P.R, inductance=P.L, torque_constant=P.k, rotor_inertia=P.Jm),
        Gearbox("gear", ratio=P.N),
        CompliantShaft("shaft", stiffness=P.Ks, damping=P.Cs),
        Inertia("load", inertia=P.JL),
        Damper("load_viscous", damping=P.bL),
        SampledPISpeed("pi", period=dm.TS, kp=dm.KP, ki=dm.KI, output_min=dm.D_MIN, output_max=dm.D_MAX),
        RepeatingRamp("reference", high=dm.W_REF_MAX, ramp_up=dm.T_RAMP_UP, hold=dm.T_HOLD,
                      ramp_down=dm.T_RAMP_DOWN, dwell=dm.T_DWELL),
    )
    load_ports = ["shaft.b", "load.shaft", "load_viscous.shaft", "pi.sensor"]
    if P.c_quad or P.t_coul:
        drive.add(FanLoad("fan", coefficient=P.c_quad), SmoothCoulomb("friction", level=P.t_coul,
                                                                     speed_scale=P.w_coul))
        load_ports += ["fan.shaft", "friction.shaft"]
    drive.connect("battery.terminal", "bridge.bus", name="bus")
    drive.connect("bridge.armature", "motor.armature", name="armature")
    drive.connect("motor.shaft", "gear.input", name="motor_side")
    drive.connect("gear.output", "shaft.a")
    drive.connect(*load_ports, name="load_side")
    drive.connect("reference.value", "pi.reference")
    drive.connect("pi.command", "bridge.duty")
    # typical magnitudes, for absolute error weights
    drive.set_nominal("bus", 48.0).set_nominal("armature", 48.0)
    drive.set_nominal("motor_side", 300.0).set_nominal("load_side", 30.0)
    return drive


# The method a drive engineer would pick: the averaged drives are not stiff (fastest eigenvalue
# about -550 1/s, the armature's (R + R_battery) / L, against Dormand-Prince's stability bound of
# about 3.3 / |lambda| = 6 ms on 1 ms samples), the 50 uH drive is. EMSIM_BENCH_METHOD=radau5 or
# dopri5 times one method on every benchmark instead.
AUTO_METHOD = {"averaged-drive": "dopri5", "averaged-drive-nonlinear": "dopri5", "stiff-drive": "radau5"}
SOLVERS = {"radau5": Radau5, "dopri5": DormandPrince5}


class Runner:
    """``runner(variant, rtol) -> (t, load speed)`` on the sample grid; assembly is done once per variant."""

    def __init__(self, method: str | None = None):
        self.problems = {}
        self.forced = method or os.environ.get("EMSIM_BENCH_METHOD", "auto")
        if self.forced != "auto" and self.forced not in SOLVERS:
            raise ValueError(f"EMSIM_BENCH_METHOD must be auto, radau5 or dopri5, got {self.forced!r}")

    def method(self, variant):
        return AUTO_METHOD[variant] if self.forced == "auto" else self.forced

    def label(self, variant):
        """Name of the emsim row in the benchmark table."""
        return f"emsim {self.method(variant)}"

    def compile(self, variant):
        if variant not in self.problems:
            self.problems[variant] = emsim.assemble(build(variant))
            self(variant, 1e-4)  # first run loads/compiles the integrator
        return self.problems[variant]

    def __call__(self, variant, rtol):
        prob = self.compile(variant) if variant not in self.problems else self.problems[variant]
        solver = SOLVERS[self.method(variant)](rtol=rtol, batch_rows=16384)
        # the baselines keep the load speed only; so does emsim (plus the four energy signals of
        # the first-law audit, which every run keeps)
        run = emsim.simulate(prob, dm.T_END, out_dt=dm.TS, solver=solver, record="load_side.speed")
        return run.time, run["load_side.speed"]


def make_runner():
    return Runner()


if __name__ == "__main__":
    import time
    r = Runner()
    ref_t = dm.sample_times()
    for v in dm.BENCHMARKS:
        t0 = time.perf_counter(); r.compile(v); print(v, "compile", round(time.perf_counter() - t0, 2), "s")
        for rtol in (1e-4, 1e-6, 1e-8, 1e-10):
            t0 = time.perf_counter(); t, w = r(v, rtol); wall = time.perf_counter() - t0
            print(f"  rtol {rtol:g}: {wall:.4f} s wall for {dm.T_END} s, rows {t.size}, w_end {w[-1]:.6f}")
