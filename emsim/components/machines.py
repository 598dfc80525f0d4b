"""Electrical machines."""
from __future__ import annotations

import math

from ..errors import ParameterError
from ..model.component import Component
from ..model.declarations import Energy, Event, Output, Param, Port, State
from ..units import to_si
from . import friction as _fr
from .friction import breakaway_value, friction_slope, friction_torque, initial_mode, mode_after_event, speed_zero_value


class DCMotor(Component):
    """Brushed permanent-magnet DC motor: armature R-L circuit, back-EMF, friction.

    Equations (SI, torque constant equal to back-EMF constant ``k``)::

        L di/dt = v - R i - k w
        f_armature = i                                   (current into the + terminal)
        f_shaft    = -(k i - b w - T_fric(mode, w))      (torque taken from the shaft)

    ``T_fric`` is the stick-slip Coulomb friction of :mod:`emsim.components.friction`.

    Parameters
    ----------
    resistance : float
        Armature (terminal) resistance R, ohm, > 0.
    inductance : float
        Armature inductance L, H, > 0.
    torque_constant : float
        k, N*m/A (= V*s/rad), > 0; back-EMF is ``k*w``.
    rotor_inertia : float, default 0
        kg*m^2, lent to the shaft node as its capacity.
    viscous_friction : float, default 0
        b, N*m*s/rad.
    coulomb_friction : float, default 0
        Kinetic friction torque T_c, N*m.
    breakaway_torque : float, default ``coulomb_friction``
        Largest torque the stuck rotor holds, N*m; >= ``coulomb_friction``.
    creep_speed : float, default 1e-6
        Largest speed that persists while stuck, rad/s, > 0.

    Notes
    -----
    Ports: ``armature`` (electrical), ``shaft`` (rotational, capacity ``rotor_inertia``).
    State ``current`` (A). Mode ``friction`` (0 stuck, 1 slipping forward, 2 backward).
    Events ``speed_zero``, ``breakaway`` (none when ``coulomb_friction`` and
    ``breakaway_torque`` are both 0). Derived ``hold_coefficient`` = breakaway/creep
    (N*m*s/rad). Outputs ``torque`` (k i, N*m), ``back_emf`` (V), ``copper_loss`` (W),
    ``friction_loss`` (W, the power the friction and viscous torques take from the
    shaft), ``magnetic_energy`` (J, L i^2 / 2, stored).
    """

    params = (
        Param("resistance", "ohm", doc="armature resistance"),
        Param("inductance", "H", doc="armature inductance"),
        Param("torque_constant", "N*m/A", doc="torque constant = back-EMF constant"),
        Param("rotor_inertia", "kg*m^2", 0.0, (0.0, math.inf), "rotor inertia"),
        Param("viscous_friction", "N*m*s/rad", 0.0, (0.0, math.inf), "viscous friction coefficient"),
        Param("coulomb_friction", "N*m", 0.0, (0.0, math.inf), "kinetic Coulomb friction torque"),
        Param("breakaway_torque", "N*m", None, (0.0, math.inf), "static friction torque (default: coulomb_friction)"),
        Param("creep_speed", "rad/s", 1e-6, (0.0, math.inf), "largest speed that persists while stuck"),
    )
    derived = ("hold_coefficient",)
    states = (State("current", "A", 0.0, 10.0, doc="armature current"),)
    ports = (Port("armature", "electrical", doc="armature terminals"),
             Port("shaft", "rotational", capacity="rotor_inertia", doc="motor shaft"))
    modes = ("friction",)
    events = (Event("speed_zero", 0, "slipping shaft reaches zero speed"),
              Event("breakaway", +1, "stuck shaft's hold torque exceeds the breakaway torque"))
    outputs = (Output("torque", "N*m", "electromagnetic torque k*i"),
               Output("back_emf", "V", "k*w"),
               Output("copper_loss", "W", "R*i^2"),
               Output("friction_loss", "W", "power taken by viscous and Coulomb friction"),
               Output("magnetic_energy", "J", "L*i^2/2"))
    energy = Energy(loss=("copper_loss", "friction_loss"), stored=("magnetic_energy",))

    def __init__(self, name, *, initial=None, **values):
        super().__init__(name, initial=initial,
                         **_fr.fill_breakaway(values, "breakaway_torque", "coulomb_friction"))
        if self.values["coulomb_friction"] == 0.0 and self.values["breakaway_torque"] == 0.0:
            # no Coulomb friction: the friction torque is zero in every mode, so the stick/slip
            # events could never matter; without them the solver evaluates no event functions
            # (like a lossless gear, which needs no power-flow mode). Part of the structure.
            self.events = ()

    def check(self, values):
        _fr.require_positive(self, values, "resistance", "inductance", "torque_constant", "creep_speed")
        _fr.check_breakaway(self, values, "breakaway_torque", "coulomb_friction")

    def derive(self, values):
        return {"hold_coefficient": values["breakaway_torque"] / values["creep_speed"]}

    # p: 0 R, 1 L, 2 k, 3 J, 4 b, 5 Tc, 6 Tbr, 7 w_creep, 8 c_hold
    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        i = x[0]
        w = a[1]
        dx[0] = (a[0] - p[0] * i - p[2] * w) / p[1]
        f[0] = i
        f[1] = -(p[2] * i - p[4] * w - friction_torque(m[0], w, p[5], p[8]))

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        # rows: di/dt, f_armature, f_shaft; columns: current | voltage, speed
        jx[0, 0] = -p[0] / p[1]
        ja[0, 0] = 1.0 / p[1]
        ja[0, 1] = -p[2] / p[1]
        jx[1, 0] = 1.0
        jx[2, 0] = -p[2]
        ja[2, 1] = p[4] + friction_slope(m[0], p[8])

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        i = x[0]
        w = a[1]
        out[0] = p[2] * i
        out[1] = p[2] * w
        out[2] = p[0] * i * i
        out[3] = (p[4] * w + friction_torque(m[0], w, p[5], p[8])) * w
        out[4] = 0.5 * p[1] * i * i

    @staticmethod
    def event_values(t, x, a, f, u, p, m, d, g):
        g[0] = speed_zero_value(m[0], a[1], p[6])
        g[1] = breakaway_value(m[0], a[1], p[6], p[8])

    @staticmethod
    def on_event(k, t, x, a, f, u, p, m, d):
        m[0] = mode_after_event(k, m[0], a[1])

    @staticmethod
    def start(t, x, a, f, u, p, m, d):
        m[0] = initial_mode(a[1], p[6])

    @classmethod
    def from_datasheet(cls, name, *, rated_voltage, no_load_speed, inductance, stall_torque=None,
                       terminal_resistance=None, rotor_inertia=0.0, no_load_current=0.0, **others):
        """Build a motor from catalogue values.

        For an ideal DC motor the no-load speed is ``V/k`` and the stall torque
        ``k*V/R``, so ``k = V/w_nl`` and ``R = k*V/T_stall``. With a no-load current
        ``i0 > 0`` the no-load speed satisfies ``V = R*i0 + k*w_nl`` and the no-load
        torque ``k*i0`` is the friction at no load: any ``coulomb_friction`` given, and
        the rest as viscous friction ``b = (k*i0 - T_c)/w_nl``. Only the Coulomb part acts
        at stall, so the stall torque used here is the electromagnetic ``k*V/R``.

        Parameters
        ----------
        name : str
        rated_voltage : float or quantity
            V, > 0.
        no_load_speed : float or quantity
            rad/s (``"3000 rpm"`` accepted), > 0.
        inductance : float or quantity
            H.
        stall_torque : float or quantity, optional
            N*m. Give this or ``terminal_resistance`` (or both, if they agree within 5 %).
        terminal_resistance : float or quantity, optional
            ohm. When both are given, this one is used.
        rotor_inertia : float or quantity, default 0
            kg*m^2.
        no_load_current : float or quantity, default 0
            A.
        **others
            Further :class:`DCMotor` parameters (friction, creep speed). With
            ``no_load_current > 0``, ``viscous_friction`` must not be given (it is computed).

        Raises
        ------
        ParameterError
            Missing or non-positive values, or stall torque and terminal resistance
            that disagree by more than 5 %.
        """
        label = f"{cls.__name__} '{name}' (from_datasheet)"

        def si(value, unit, pname, positive=True):
            v = to_si(value, unit, owner=label, name=pname)
            if (positive and not v > 0.0) or v < 0.0 or not math.isfinite(v):
                raise ParameterError(f"{label}: '{pname}' = {v:g} {unit} must be "
                                     f"{'positive' if positive else 'non-negative'} and finite")
            return v

        V = si(rated_voltage, "V", "rated_voltage")
        w_nl = si(no_load_speed, "rad/s", "no_load_speed")
        i0 = si(no_load_current, "A", "no_load_current", positive=False)
        if stall_torque is None and terminal_resistance is None:
            raise ParameterError(f"{label}: give 'stall_torque' (N*m) or 'terminal_resistance' (ohm) "
                                 "to fix the armature resistance")
        R_given = None if terminal_resistance is None else si(terminal_resistance, "ohm", "terminal_resistance")
        R_stall = None
        if stall_torque is not None:
            T_s = si(stall_torque, "N*m", "stall_torque")
            # V = R i0 + k w_nl and T_s = k V / R  =>  k = V / (w_nl + V i0 / T_s)
            k_s = V / (w_nl + V * i0 / T_s)
            R_stall = k_s * V / T_s
            if i0 * R_stall >= V:
                raise ParameterError(f"{label}: no_load_current = {i0:g} A is too large for "
                                     f"stall_torque = {T_s:g} N*m at rated_voltage = {V:g} V")
        if R_given is not None and R_stall is not None:
            rel = abs(R_given - R_stall) / R_given
            if rel > 0.05:
                raise ParameterError(
                    f"{label}: stall_torque = {T_s:g} N*m and terminal_resistance = {R_given:g} ohm disagree: "
                    f"the stall torque implies a terminal resistance of {R_stall:g} ohm "
                    f"({100 * rel:.1f} % off; expected within 5 %). Give one of them, or consistent values")
        R = R_given if R_given is not None else R_stall
        if i0 * R >= V:
            raise ParameterError(f"{label}: no_load_current = {i0:g} A times terminal resistance {R:g} ohm "
                                 f"reaches rated_voltage = {V:g} V; expected R*i0 < V")
        k = (V - R * i0) / w_nl
        values = dict(others)
        if i0 > 0.0:
            if "viscous_friction" in values:
                raise ParameterError(f"{label}: give either 'no_load_current' (which sets the viscous "
                                     "friction) or 'viscous_friction', not both")
            T_c = to_si(values.get("coulomb_friction", 0.0), "N*m", owner=label, name="coulomb_friction")
            T_0 = k * i0
            if T_c > T_0:
                raise ParameterError(f"{label}: coulomb_friction = {T_c:g} N*m exceeds the no-load friction "
                                     f"torque k*i0 = {T_0:g} N*m implied by no_load_current = {i0:g} A")
            values["viscous_friction"] = (T_0 - T_c) / w_nl
        return cls(name, resistance=R, inductance=inductance, torque_constant=k,
                   rotor_inertia=rotor_inertia, **values)
