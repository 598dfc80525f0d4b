"""Demo: a small parcel conveyor in an invented sorting room, run headless to an HDF5 file.

24 V battery -> averaged H-bridge -> brushed DC motor -> 12:1 gearbox -> flexible coupling ->
head drum turning the belt, with belt friction and the drag of the parcels on it. A sampled PI
loop at 1 kHz makes the drum follow an index cycle: speed up, run, slow down, pause, repeat.
All numbers are invented for the demo.

Run:  make demo      (or: python examples/parcel_conveyor.py [output.h5] [seconds])
"""
from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

import emsim
from emsim.components import (AveragedBridge, Battery, CompliantShaft, ConstantTorque, CoulombFriction, DCMotor,
                              Gearbox, Inertia, RepeatingRamp, SampledPISpeed)


def build() -> emsim.System:
    conveyor = emsim.System("parcel_conveyor")
    conveyor.add(
        Battery("pack", open_circuit_voltage="25.2 V", voltage_per_soc="2.4 V", internal_resistance="60 mohm",
                capacity="12 A*h", initial_soc=0.9),
        AveragedBridge("bridge"),
        DCMotor("motor", resistance="0.42 ohm", inductance="0.8 mH", torque_constant="0.062 N*m/A",
                rotor_inertia="6e-5 kg*m^2", viscous_friction="2e-5 N*m*s/rad", coulomb_friction="0.008 N*m"),
        Gearbox("gear", ratio=12, efficiency=0.9, output_inertia="1e-4 kg*m^2"),
        CompliantShaft("coupling", stiffness="800 N*m/rad", damping="0.4 N*m*s/rad"),
        Inertia("drum", inertia="0.012 kg*m^2"),            # drum plus belt reflected to the drum shaft
        CoulombFriction("belt_drag", coulomb_torque="0.25 N*m", breakaway_torque="0.35 N*m"),
        ConstantTorque("parcels", torque="0.6 N*m"),          # parcels on the belt, drum radius 5 cm
        RepeatingRamp("cycle", high="12 rad/s", ramp_up="0.6 s", hold="2.5 s", ramp_down="0.5 s", dwell="1.4 s"),
        SampledPISpeed("speed_loop", period="1 ms", kp="0.03 s/rad", ki="0.4 1/rad"),
    )
    conveyor.connect("pack.terminal", "bridge.bus", name="bus")
    conveyor.connect("bridge.armature", "motor.armature", name="armature")
    conveyor.connect("motor.shaft", "gear.input", name="motor_shaft")
    conveyor.connect("gear.output", "coupling.a", name="gear_out")
    conveyor.connect("coupling.b", "drum.shaft", "belt_drag.shaft", "parcels.shaft", "speed_loop.sensor",
                     name="drum_shaft")
    conveyor.connect("cycle.value", "speed_loop.reference")
    conveyor.connect("speed_loop.command", "bridge.duty")
    return conveyor


def main(path: str = "parcel_conveyor.h5", seconds: float = 20.0) -> None:
    run = emsim.simulate(build(), seconds, out_dt="2 ms", output=path)
    with emsim.open_results(path) as res:
        current = res["motor.current"]
        t = res.time
        rms = float(np.sqrt(np.trapezoid(current**2, t) / (t[-1] - t[0])))
        bus = res["bus.voltage"]
        print(f"parcel conveyor, {seconds:g} s simulated in {run.wall_time:.2f} s of wall time -> {path}")
        print(f"  drum speed peak/end  {res['drum_shaft.speed'].max():8.3f} / {res['drum_shaft.speed'][-1]:.3f} rad/s")
        print(f"  peak / RMS current   {np.abs(current).max():8.2f} A / {rms:.2f} A")
        print(f"  bus voltage min      {bus.min():8.2f} V (sag {bus.max() - bus.min():.2f} V)")
        print(f"  battery charge left  {100 * res['pack.soc'][-1]:8.2f} %")
        e = run.energy
        print(f"  energy from battery  {e['supplied']:8.1f} J; to the load {e['delivered']:.1f} J; "
              f"losses {e['loss']:.1f} J; stored change {e['stored_change']:.2f} J")
        print(f"  first-law residual   {e['residual']:.3e} J (relative {e['relative_residual']:.1e})")
        print(f"  solver: {run.stats.get('steps', '?')} steps, {len(res.events)} events logged")
        print("  (design estimates only: check against measurements; see the safety note in README.md)")


if __name__ == "__main__":
    main(*(sys.argv[1:2] or []), *(float(s) for s in sys.argv[2:3]))
