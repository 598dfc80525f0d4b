"""Rotational mechanics: inertia, damper, gearbox, compliant shaft, Coulomb friction."""
from __future__ import annotations

import math

from ..model.component import Component
from ..model.declarations import Energy, Event, Output, Param, Port, RigidCoupling, State
from . import friction as _fr
from .friction import breakaway_value, friction_slope, friction_torque, initial_mode, mode_after_event, speed_zero_value


class Inertia(Component):
    """A rotating mass on one shaft.

    The inertia is lent to the shaft node as its capacity; assembly integrates the
    node and accounts its kinetic energy itself, so the component takes no torque
    (``f = 0``) and declares no energy entries.

    Parameters
    ----------
    inertia : float
        Moment of inertia J, kg*m^2, >= 0.

    Notes
    -----
    Port ``shaft`` (rotational, capacity ``inertia``). Output ``kinetic_energy``
    (J, J*w^2/2), for information only.
    """

    params = (Param("inertia", "kg*m^2", None, (0.0, math.inf), "moment of inertia"),)
    ports = (Port("shaft", "rotational", capacity="inertia"),)
    outputs = (Output("kinetic_energy", "J", "J*w^2/2"),)

    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        f[0] = 0.0

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = 0.5 * p[0] * a[0] * a[0]

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        pass  # the inertia is the node's capacity; the component itself takes no torque


class Damper(Component):
    """Viscous damper from a shaft to ground (the frame): torque ``c*w``.

    Parameters
    ----------
    damping : float
        c, N*m*s/rad, >= 0.

    Notes
    -----
    Port ``shaft`` (rotational); ``f = c*w``. Output ``loss`` (W, c*w^2), energy loss.
    """

    params = (Param("damping", "N*m*s/rad", None, (0.0, math.inf), "viscous coefficient"),)
    ports = (Port("shaft", "rotational"),)
    outputs = (Output("loss", "W", "c*w^2"),)
    energy = Energy(loss=("loss",))

    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        f[0] = p[0] * a[0]

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        ja[0, 0] = p[0]

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = p[0] * a[0] * a[0]


class Gearbox(Component):
    """Rigid gear stage: ``speed(input) = ratio * speed(output)``, with an efficiency.

    Assembly joins both sides into one rigid group through the declared
    :class:`~emsim.model.declarations.RigidCoupling` and applies the efficiency by
    the direction of power flow; the component itself takes no torque (``f = 0``
    at both ports) and lends its two inertias to the two sides.

    Parameters
    ----------
    ratio : float
        Input speed / output speed, dimensionless, > 0 (a reduction is > 1).
    efficiency : float, default 1
        Power efficiency, 0 < eta <= 1.
    input_inertia : float, default 0
        kg*m^2 on the input side.
    output_inertia : float, default 0
        kg*m^2 on the output side.

    Notes
    -----
    Ports ``input``, ``output`` (rotational). No states, no outputs; gear losses
    are computed by assembly, which knows the transmitted torque.
    """

    params = (Param("ratio", "", None, (0.0, math.inf), "input speed / output speed"),
              Param("efficiency", "", 1.0, (0.0, 1.0), "power efficiency"),
              Param("input_inertia", "kg*m^2", 0.0, (0.0, math.inf), "inertia on the input side"),
              Param("output_inertia", "kg*m^2", 0.0, (0.0, math.inf), "inertia on the output side"))
    ports = (Port("input", "rotational", capacity="input_inertia"),
             Port("output", "rotational", capacity="output_inertia"))
    couplings = (RigidCoupling("input", "output", ratio="ratio", efficiency="efficiency"),)

    def check(self, values):
        _fr.require_positive(self, values, "ratio", "efficiency")

    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        f[0] = 0.0
        f[1] = 0.0

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        pass  # the coupling is handled by assembly; no torque of its own


class CompliantShaft(Component):
    """Torsionally elastic shaft between two rotating parts (spring and damper in parallel).

    Equations::

        d(theta)/dt = w_a - w_b
        T = k*theta + c*(w_a - w_b)
        f_a = +T   (the shaft takes T from side a)
        f_b = -T   (and hands it to side b)

    Parameters
    ----------
    stiffness : float
        k, N*m/rad, > 0.
    damping : float, default 0
        c, N*m*s/rad, >= 0.

    Notes
    -----
    Ports ``a``, ``b`` (rotational). State ``twist`` (rad). Outputs ``torque`` (N*m),
    ``loss`` (W, c*(w_a-w_b)^2, energy loss), ``elastic_energy`` (J, k*theta^2/2, stored).
    """

    params = (Param("stiffness", "N*m/rad", doc="torsional stiffness"),
              Param("damping", "N*m*s/rad", 0.0, (0.0, math.inf), "torsional damping"))
    states = (State("twist", "rad", 0.0, 1e-3, doc="angle of side a minus angle of side b"),)
    ports = (Port("a", "rotational"), Port("b", "rotational"))
    outputs = (Output("torque", "N*m", "transmitted torque"),
               Output("loss", "W", "damping loss"),
               Output("elastic_energy", "J", "spring energy"))
    energy = Energy(loss=("loss",), stored=("elastic_energy",))

    def check(self, values):
        _fr.require_positive(self, values, "stiffness")

    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        slip = a[0] - a[1]
        dx[0] = slip
        torque = p[0] * x[0] + p[1] * slip
        f[0] = torque
        f[1] = -torque

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        # rows: d(twist)/dt, f_a, f_b; columns: twist | w_a, w_b
        ja[0, 0] = 1.0
        ja[0, 1] = -1.0
        jx[1, 0] = p[0]
        ja[1, 0] = p[1]
        ja[1, 1] = -p[1]
        jx[2, 0] = -p[0]
        ja[2, 0] = -p[1]
        ja[2, 1] = p[1]

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        slip = a[0] - a[1]
        out[0] = p[0] * x[0] + p[1] * slip
        out[1] = p[1] * slip * slip
        out[2] = 0.5 * p[0] * x[0] * x[0]


class CoulombFriction(Component):
    """Stick-slip Coulomb friction (plus optional viscous part) from a shaft to ground.

    The friction stops and holds the shaft without chatter: see
    :mod:`emsim.components.friction` for the modes and events.

    Parameters
    ----------
    coulomb_torque : float
        Kinetic friction torque T_c, N*m, >= 0.
    breakaway_torque : float, default ``coulomb_torque``
        Static torque the stuck shaft holds, N*m, >= ``coulomb_torque``.
    creep_speed : float, default 1e-6
        Largest speed that persists while stuck, rad/s, > 0.
    viscous : float, default 0
        Viscous coefficient b, N*m*s/rad, >= 0.

    Notes
    -----
    Port ``shaft`` (rotational): ``f = T_fric(mode, w) + b*w``. Mode ``friction``
    (0 stuck, 1 slipping forward, 2 backward). Events ``speed_zero``, ``breakaway``.
    Derived ``hold_coefficient`` (N*m*s/rad). Output ``loss`` (W, ``f*w``, the power
    taken from the shaft and dissipated), energy loss.
    """

    params = (Param("coulomb_torque", "N*m", None, (0.0, math.inf), "kinetic friction torque"),
              Param("breakaway_torque", "N*m", None, (0.0, math.inf), "static friction torque (default: coulomb_torque)"),
              Param("creep_speed", "rad/s", 1e-6, (0.0, math.inf), "largest speed that persists while stuck"),
              Param("viscous", "N*m*s/rad", 0.0, (0.0, math.inf), "viscous coefficient"))
    derived = ("hold_coefficient",)
    ports = (Port("shaft", "rotational"),)
    modes = ("friction",)
    events = (Event("speed_zero", 0, "slipping shaft reaches zero speed"),
              Event("breakaway", +1, "stuck shaft's hold torque exceeds the breakaway torque"))
    outputs = (Output("loss", "W", "dissipated power f*w"),)
    energy = Energy(loss=("loss",))

    def __init__(self, name, *, initial=None, **values):
        super().__init__(name, initial=initial,
                         **_fr.fill_breakaway(values, "breakaway_torque", "coulomb_torque"))

    def check(self, values):
        _fr.require_positive(self, values, "creep_speed")
        _fr.check_breakaway(self, values, "breakaway_torque", "coulomb_torque")

    def derive(self, values):
        return {"hold_coefficient": values["breakaway_torque"] / values["creep_speed"]}

    # p: 0 Tc, 1 Tbr, 2 w_creep, 3 b, 4 c_hold
    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        f[0] = friction_torque(m[0], a[0], p[0], p[4]) + p[3] * a[0]

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        ja[0, 0] = friction_slope(m[0], p[4]) + p[3]

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = (friction_torque(m[0], a[0], p[0], p[4]) + p[3] * a[0]) * a[0]

    @staticmethod
    def event_values(t, x, a, f, u, p, m, d, g):
        g[0] = speed_zero_value(m[0], a[0], p[1])
        g[1] = breakaway_value(m[0], a[0], p[1], p[4])

    @staticmethod
    def on_event(k, t, x, a, f, u, p, m, d):
        m[0] = mode_after_event(k, m[0], a[0])

    @staticmethod
    def start(t, x, a, f, u, p, m, d):
        m[0] = initial_mode(a[0], p[1])
