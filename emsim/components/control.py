"""Controllers."""
from __future__ import annotations


from ..errors import ParameterError
from ..model.component import Component
from ..model.declarations import Discrete, Input, Output, Param, Port, Signal
from . import friction as _fr


class SampledPISpeed(Component):
    """Sampled (discrete-time) PI speed controller with clamping anti-windup.

    Every ``period`` seconds, at sample ``k`` (speed ``w`` read from the sensor port,
    reference ``r`` from the input), in this order::

        e   = r - w
        v   = kp*e + I_k                      (unsaturated candidate, uses I before this update)
        y_k = clip(v, output_min, output_max) (held until the next sample)
        I_{k+1} = I_k + ki*period*e           unless (v > output_max and e > 0)
                                              or (v < output_min and e < 0)

    The integral is thus frozen while the candidate is beyond a limit and the error
    would push it further (clamping anti-windup).

    Assembly calls ``at_time`` at every sample instant ``t0 + k*period``, k >= 0: the first
    sample is taken at the start time.

    Parameters
    ----------
    period : float
        Sample period T, s, > 0.
    kp : float
        Proportional gain, s/rad (output per rad/s of error).
    ki : float
        Integral gain, 1/rad (output per rad of integrated error).
    output_min : float, default -1
        Lower output limit (dimensionless).
    output_max : float, default 1
        Upper output limit, > ``output_min``.

    Notes
    -----
    Port ``sensor`` (rotational, takes no torque: ``f = 0``). Input ``reference``
    (rad/s, default 0). Discrete states ``integral`` and ``output``. Signal
    ``command`` (dimensionless) = the held output. Output ``error`` (rad/s,
    the continuous-time error r - w, for the record).
    """

    params = (Param("period", "s", doc="sample period"),
              Param("kp", "s/rad", doc="proportional gain"),
              Param("ki", "1/rad", doc="integral gain"),
              Param("output_min", "", -1.0, doc="lower output limit"),
              Param("output_max", "", 1.0, doc="upper output limit"))
    sample_period = "period"
    ports = (Port("sensor", "rotational", doc="speed measured at this node"),)
    inputs = (Input("reference", "rad/s", 0.0, "speed reference"),)
    discrete = (Discrete("integral", "", 0.0, "integral term I"),
                Discrete("output", "", 0.0, "held output"))
    signals = (Signal("command", "", "held controller output"),)
    held_signals = True  # the command changes only at sample instants
    outputs = (Output("error", "rad/s", "reference minus speed"),)

    def check(self, values):
        _fr.require_positive(self, values, "period")
        lo, hi = values["output_min"], values["output_max"]
        if not lo < hi:
            raise ParameterError(f"{_fr.label(self)}: parameters 'output_min' = {lo:g} and 'output_max' = {hi:g}; "
                                 "expected output_min < output_max")

    # p: 0 T, 1 kp, 2 ki, 3 min, 4 max ; d: 0 integral, 1 output
    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        f[0] = 0.0
        s[0] = d[1]

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        pass  # an ideal sensor takes no torque; the command is held between samples

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = u[0] - a[0]

    @staticmethod
    def at_time(t, x, a, f, u, p, m, d):
        e = u[0] - a[0]
        v = p[1] * e + d[0]
        d[1] = min(max(v, p[3]), p[4])
        if not ((v > p[4] and e > 0.0) or (v < p[3] and e < 0.0)):
            d[0] = d[0] + p[2] * p[0] * e
