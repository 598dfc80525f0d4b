"""Reference profiles (signal sources)."""
from __future__ import annotations

import math

from ..errors import ParameterError
from ..model.component import Component
from ..model.declarations import Param, Signal
from . import friction as _fr


class RepeatingRamp(Component):
    """A repeating trapezoid: ramp up, hold high, ramp down, dwell low, again.

    Over one cycle of length ``P = ramp_up + hold + ramp_down + dwell``, starting
    at ``start_delay`` (the value is ``low`` before it), with ``tau`` the time
    into the cycle::

        tau < ramp_up                       low + (high - low) * tau / ramp_up
        tau < ramp_up + hold                high
        tau < ramp_up + hold + ramp_down    high - (high - low) * (tau - ramp_up - hold) / ramp_down
        otherwise                           low

    The value is a continuous function of time (a zero-length ramp makes a step).
    The corners are time events (``next_time``) so the solver lands on each of them;
    ``at_time`` changes nothing.

    Parameters
    ----------
    high : float
        Upper level, rad/s.
    ramp_up, hold, ramp_down, dwell : float
        Segment durations, s, >= 0, with a positive sum.
    low : float, default 0
        Lower level, rad/s.
    start_delay : float, default 0
        Time before the first cycle, s, >= 0.

    Notes
    -----
    No ports. Signal ``value`` (rad/s).
    """

    params = (Param("high", "rad/s", doc="upper level"),
              Param("ramp_up", "s", None, (0.0, math.inf), "rise time"),
              Param("hold", "s", None, (0.0, math.inf), "time at the upper level"),
              Param("ramp_down", "s", None, (0.0, math.inf), "fall time"),
              Param("dwell", "s", None, (0.0, math.inf), "time at the lower level"),
              Param("low", "rad/s", 0.0, doc="lower level"),
              Param("start_delay", "s", 0.0, (0.0, math.inf), "time before the first cycle"))
    derived = ("cycle",)
    signals = (Signal("value", "rad/s", "profile value"),)

    def check(self, values):
        if not values["ramp_up"] + values["hold"] + values["ramp_down"] + values["dwell"] > 0.0:
            raise ParameterError(f"{_fr.label(self)}: parameters 'ramp_up', 'hold', 'ramp_down', 'dwell' are all 0; "
                                 "expected a cycle of positive length (s)")

    def derive(self, values):
        return {"cycle": values["ramp_up"] + values["hold"] + values["ramp_down"] + values["dwell"]}

    # p: 0 high, 1 ramp_up, 2 hold, 3 ramp_down, 4 dwell, 5 low, 6 start_delay, 7 cycle
    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        high = p[0]
        low = p[5]
        rel = t - p[6]
        if rel < 0.0:
            s[0] = low
            return
        tau = rel - p[7] * math.floor(rel / p[7])
        if tau < p[1]:
            s[0] = low + (high - low) * tau / p[1]
        elif tau < p[1] + p[2]:
            s[0] = high
        elif tau < p[1] + p[2] + p[3]:
            s[0] = high - (high - low) * (tau - p[1] - p[2]) / p[3]
        else:
            s[0] = low

    @staticmethod
    def next_time(t, p, m, d):
        tol = 1e-12 * max(1.0, abs(t))
        if t + tol < p[6]:
            return p[6]
        k = math.floor((t - p[6]) / p[7])
        best = math.inf
        for c in range(2):
            base = p[6] + (k + c) * p[7]
            corners = (base, base + p[1], base + p[1] + p[2], base + p[1] + p[2] + p[3])
            for tc in corners:
                if tc > t + tol and tc < best:
                    best = tc
        return best

    @staticmethod
    def at_time(t, x, a, f, u, p, m, d):
        return
