"""Electrical sources: a switched ideal DC voltage source and a battery."""
from __future__ import annotations

import math

from ..errors import ParameterError
from ..model.component import Component
from ..model.declarations import Discrete, Energy, Output, Param, Port, State, Table
from . import friction as _fr


class SwitchedDCSource(Component):
    """Ideal DC voltage source whose level follows a switching schedule.

    At each instant ``times[i]`` the output becomes ``levels[i]``; before the first
    instant it is ``initial_level``. A level of 0 V ("off") holds the terminals at
    0 V -- a freewheeling short, like a bridge with both low-side switches on --
    not an open circuit: current keeps flowing through the source.

    Parameters
    ----------
    times : sequence of float
        Switching instants, s, strictly increasing.
    levels : sequence of float
        Voltage from each instant on, V; same length as ``times``.
    initial_level : float, default 0
        Voltage before the first instant, V.

    Notes
    -----
    Port ``terminal`` (electrical, fixes its across). Algebraic state ``current``
    (A, the current the source delivers; residual ``v - level``; ``f = -current``).
    Discrete state ``level`` (V), changed only by ``start`` and ``at_time``; the
    schedule instants are time events (``next_time``). An instant within
    ``1e-12*max(1, |t|)`` s of ``t`` counts as reached. Output ``power``
    (W, ``v*current``, energy supplied).
    """

    params = (Param("initial_level", "V", 0.0, doc="voltage before the first switching instant"),)
    tables = (Table("times", "s", increasing=True, doc="switching instants"),
              Table("levels", "V", doc="voltage from each instant on"))
    states = (State("current", "A", 0.0, 10.0, algebraic=True, doc="current delivered"),)
    ports = (Port("terminal", "electrical", fixes_across=True),)
    discrete = (Discrete("level", "V", 0.0, "present output voltage"),)
    outputs = (Output("power", "W", "delivered power v*i"),)
    energy = Energy(supplied=("power",))

    def check(self, values):
        nt, nl = self.table_values["times"].size, self.table_values["levels"].size
        if nt != nl:
            raise ParameterError(f"{_fr.label(self)}: tables 'times' ({nt} entries) and 'levels' ({nl} entries) "
                                 "must have the same length")

    # p: 0 initial_level, 1 n, 2..1+n times, 2+n n, 3+n..2+2n levels
    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        dx[0] = a[0] - d[0]
        f[0] = -x[0]

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        # rows: residual, f_terminal; columns: current | terminal voltage
        ja[0, 0] = 1.0
        jx[1, 0] = -1.0

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = a[0] * x[0]

    @staticmethod
    def next_time(t, p, m, d):
        n = int(p[1])
        tol = 1e-12 * max(1.0, abs(t))
        for i in range(n):
            if p[2 + i] > t + tol:
                return p[2 + i]
        return math.inf

    @staticmethod
    def at_time(t, x, a, f, u, p, m, d):
        n = int(p[1])
        tol = 1e-12 * max(1.0, abs(t))
        level = p[0]
        for i in range(n):
            if p[2 + i] <= t + tol:
                level = p[3 + n + i]
            else:
                break
        d[0] = level

    start = at_time  # at the start, the level is the one the schedule gives for t0


class Battery(Component):
    """Battery as an open-circuit voltage behind an internal resistance, with charge counting.

    Thevenin equivalent (common practice)::

        V_oc = open_circuit_voltage + voltage_per_soc * (soc - 1)
        i    = (V_oc - v) / R                    (terminal current delivered)
        d(soc)/dt = -i / capacity

    The terminal voltage ``v`` is the node voltage, fixed by the rest of the circuit
    (Kirchhoff's current law at the node, solved by assembly). The state of charge
    is not limited: it can fall below 0 if the model is run past empty.

    Parameters
    ----------
    open_circuit_voltage : float
        V_oc at full charge, V, > 0.
    internal_resistance : float
        R, ohm, > 0.
    capacity : float
        Charge at full, C (``"2.5 A*h"`` accepted = 9000 C), > 0.
    voltage_per_soc : float, default 0
        Slope of V_oc with state of charge, V (per unit soc).
    initial_soc : float, default 1
        State of charge at the start, in [0, 1] (or give ``initial={"soc": ...}``).

    Notes
    -----
    Port ``terminal`` (electrical): ``f = -i``. State ``soc`` (dimensionless).
    Outputs ``current`` (A), ``terminal_voltage`` (V), ``chemical_power``
    (W, V_oc*i, energy supplied), ``loss`` (W, R*i^2, energy loss). The state of
    charge is the state ``soc`` (a state and an output cannot share a name).
    """

    params = (Param("open_circuit_voltage", "V", doc="open-circuit voltage at full charge"),
              Param("internal_resistance", "ohm", doc="internal resistance"),
              Param("capacity", "C", doc="charge at full"),
              Param("voltage_per_soc", "V", 0.0, doc="open-circuit voltage change per unit state of charge"),
              Param("initial_soc", "", 1.0, (0.0, 1.0), "state of charge at the start"))
    states = (State("soc", "", 1.0, 1.0, doc="state of charge"),)
    ports = (Port("terminal", "electrical"),)
    outputs = (Output("current", "A", "terminal current delivered"),
               Output("terminal_voltage", "V", "terminal voltage"),
               Output("chemical_power", "W", "V_oc*i"),
               Output("loss", "W", "R*i^2"))
    energy = Energy(supplied=("chemical_power",), loss=("loss",))

    def __init__(self, name, *, initial=None, **values):
        super().__init__(name, initial=initial, **values)
        if initial and "soc" in initial:
            if "initial_soc" in values:
                raise ParameterError(f"{_fr.label(self)}: give the starting charge once, as 'initial_soc' "
                                     "or initial={'soc': ...}, not both")
        else:
            self.initial_values["soc"] = self.values["initial_soc"]

    def check(self, values):
        _fr.require_positive(self, values, "open_circuit_voltage", "internal_resistance", "capacity")

    # p: 0 V_oc0, 1 R, 2 Q, 3 dV/dsoc, 4 soc0
    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        voc = p[0] + p[3] * (x[0] - 1.0)
        i = (voc - a[0]) / p[1]
        dx[0] = -i / p[2]
        f[0] = -i

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        # i = (voc(soc) - v)/R: di/dsoc = voltage_per_soc/R, di/dv = -1/R
        di_dsoc = p[3] / p[1]
        di_dv = -1.0 / p[1]
        jx[0, 0] = -di_dsoc / p[2]
        ja[0, 0] = -di_dv / p[2]
        jx[1, 0] = -di_dsoc
        ja[1, 0] = -di_dv

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        voc = p[0] + p[3] * (x[0] - 1.0)
        i = (voc - a[0]) / p[1]
        out[0] = i
        out[1] = a[0]
        out[2] = voc * i
        out[3] = p[1] * i * i
