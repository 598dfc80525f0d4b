"""emsim plugin: a rope drum lifting a hanging mass (registered as ``hoist``)."""
from __future__ import annotations

import math

from emsim.errors import ParameterError
from emsim.model import Component, Energy, Output, Param, Port, State

__all__ = ["HoistDrum"]


class HoistDrum(Component):
    """Rope drum of radius r winding up a mass m against gravity.

    Positive shaft speed lifts the mass. The rope is assumed taut (the mass never
    falls faster than the rope pays out). Equations::

        f_shaft  = m * g * r          (gravity torque taken from the shaft, any speed)
        dh/dt    = r * w              (height of the mass, rope position)

    The drum and the mass reflected to the shaft, ``drum_inertia + m*r^2``, are
    lent to the shaft node as its capacity (derived value ``reflected_inertia``).

    Parameters
    ----------
    mass : float
        Hanging mass m, kg, > 0.
    drum_radius : float
        Drum radius r, m, > 0.
    drum_inertia : float, default 0
        Drum's own inertia, kg*m^2, >= 0.
    gravity : float, default 9.80665
        Gravitational acceleration g, m/s^2 (standard gravity, ISO 80000-3).

    Notes
    -----
    Port ``shaft`` (rotational, capacity ``reflected_inertia``). State ``height`` (m).
    Outputs ``rope_speed`` (m/s), ``lifting_power`` (W, m*g*r*w: the power handed
    to the load as potential energy; energy delivered), ``potential_energy``
    (J, m*g*h relative to the start height 0, for information).
    """

    params = (Param("mass", "kg", doc="hanging mass"),
              Param("drum_radius", "m", doc="drum radius"),
              Param("drum_inertia", "kg*m^2", 0.0, (0.0, math.inf), "drum inertia"),
              Param("gravity", "m/s^2", 9.80665, doc="gravitational acceleration"))
    derived = ("reflected_inertia",)
    states = (State("height", "m", 0.0, 1.0, doc="height of the mass"),)
    ports = (Port("shaft", "rotational", capacity="reflected_inertia", doc="drum shaft"),)
    outputs = (Output("rope_speed", "m/s", "r*w, positive lifting"),
               Output("lifting_power", "W", "m*g*r*w"),
               Output("potential_energy", "J", "m*g*h"))
    energy = Energy(delivered=("lifting_power",))

    def check(self, values):
        for name in ("mass", "drum_radius", "gravity"):
            if not 0.0 < values[name] < math.inf:
                unit = self.params[[p.name for p in self.params].index(name)].unit
                raise ParameterError(f"{type(self).__name__} '{self.name}': parameter '{name}' = "
                                     f"{values[name]:g} {unit} must be positive and finite")

    def derive(self, values):
        return {"reflected_inertia": values["drum_inertia"] + values["mass"] * values["drum_radius"] ** 2}

    # p: 0 m, 1 r, 2 J_drum, 3 g, 4 J_reflected
    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        dx[0] = p[1] * a[0]
        f[0] = p[0] * p[3] * p[1]

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        ja[0, 0] = p[1]  # d(height)/dt = r * w; the gravity torque is constant

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = p[1] * a[0]
        out[1] = p[0] * p[3] * p[1] * a[0]
        out[2] = p[0] * p[3] * x[0]
