"""Mechanical loads: constant torque, fan (quadratic) torque, tabulated torque-speed curve.

Every load takes its torque from the shaft: ``f = +T`` resists positive rotation.
Each reports ``power`` = ``f*w`` (W), the power handed to the driven process
(energy delivered; negative when the load drives the shaft).
"""
from __future__ import annotations

import math

from ..errors import ParameterError
from ..model.component import Component
from ..model.declarations import Energy, Output, Param, Port, Table
from ..units import to_si
from . import friction as _fr


class ConstantTorque(Component):
    """A load torque independent of speed (a conveyor belt's weight, a constant-tension winder).

    Parameters
    ----------
    torque : float
        T, N*m; positive resists positive rotation, negative drives the shaft.

    Notes
    -----
    Port ``shaft`` (rotational): ``f = T``. Output ``power`` (W, T*w, energy delivered).
    The torque does not vanish at standstill (it is an active load, like a weight).
    """

    params = (Param("torque", "N*m", doc="load torque, positive resisting positive rotation"),)
    ports = (Port("shaft", "rotational"),)
    outputs = (Output("power", "W", "power taken by the load"),)
    energy = Energy(delivered=("power",))

    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        f[0] = p[0]

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        pass  # constant torque: every partial derivative is zero

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = p[0] * a[0]


class FanLoad(Component):
    """Fan or centrifugal-pump load: torque ``c*w*|w|`` (affinity laws: torque ~ w^2, power ~ w^3).

    Parameters
    ----------
    coefficient : float
        c, N*m*s^2/rad^2, >= 0 (``"1e-4 N*m/rpm**2"`` accepted).

    Notes
    -----
    Port ``shaft`` (rotational). Output ``power`` (W, c*|w|^3, energy delivered).
    See :meth:`from_rated` to build it from one operating point.
    """

    params = (Param("coefficient", "N*m*s**2/rad**2", None, (0.0, math.inf), "torque / speed^2"),)
    ports = (Port("shaft", "rotational"),)
    outputs = (Output("power", "W", "power taken by the load"),)
    energy = Energy(delivered=("power",))

    @classmethod
    def from_rated(cls, name, *, rated_speed, rated_torque):
        """Build the load through one operating point: ``c = T_rated / w_rated**2``.

        Parameters
        ----------
        rated_speed : float or quantity
            rad/s (``"1450 rpm"`` accepted), > 0.
        rated_torque : float or quantity
            N*m, >= 0.
        """
        label = f"{cls.__name__} '{name}' (from_rated)"
        w = to_si(rated_speed, "rad/s", owner=label, name="rated_speed")
        T = to_si(rated_torque, "N*m", owner=label, name="rated_torque")
        if not (w > 0.0 and math.isfinite(w)):
            raise ParameterError(f"{label}: 'rated_speed' = {w:g} rad/s must be positive")
        if not (T >= 0.0 and math.isfinite(T)):
            raise ParameterError(f"{label}: 'rated_torque' = {T:g} N*m must be non-negative")
        return cls(name, coefficient=T / (w * w))

    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        f[0] = p[0] * a[0] * abs(a[0])

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        ja[0, 0] = 2.0 * p[0] * abs(a[0])

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = p[0] * a[0] * a[0] * abs(a[0])


class TableTorque(Component):
    """Load torque from a torque-speed table, interpolated linearly.

    Beyond the table's ends the torque stays at the end values. Negative speeds
    use the table as given: if the load can turn backwards, let the table cover
    negative speeds too (with negative torques for a resisting load).

    Parameters
    ----------
    speeds : sequence of float
        rad/s, strictly increasing, at least 1 entry.
    torques : sequence of float
        N*m at each speed (positive resists positive rotation); same length.

    Notes
    -----
    Port ``shaft`` (rotational). Output ``power`` (W, T(w)*w, energy delivered).
    """

    tables = (Table("speeds", "rad/s", increasing=True, doc="table speeds"),
              Table("torques", "N*m", doc="torque at each speed"))
    ports = (Port("shaft", "rotational"),)
    outputs = (Output("power", "W", "power taken by the load"),)
    energy = Energy(delivered=("power",))

    def check(self, values):
        ns, nt = self.table_values["speeds"].size, self.table_values["torques"].size
        if ns != nt:
            raise ParameterError(f"{_fr.label(self)}: tables 'speeds' ({ns} entries) and 'torques' ({nt} entries) "
                                 "must have the same length")

    # p: 0 n, 1..n speeds, 1+n n, 2+n..1+2n torques
    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        n = int(p[0])
        w = a[0]
        if w <= p[1]:
            f[0] = p[2 + n]
        elif w >= p[n]:
            f[0] = p[1 + 2 * n]
        else:
            j = 1
            while j < n - 1 and p[1 + j] <= w:
                j += 1
            w0 = p[j]
            w1 = p[1 + j]
            f[0] = p[1 + n + j] + (p[2 + n + j] - p[1 + n + j]) * (w - w0) / (w1 - w0)

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        n = int(p[0])
        w = a[0]
        if n < 2 or w <= p[1] or w >= p[n]:
            return  # flat beyond the ends
        j = 1
        while j < n - 1 and p[1 + j] <= w:
            j += 1
        ja[0, 0] = (p[2 + n + j] - p[1 + n + j]) / (p[1 + j] - p[j])

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = f[0] * a[0]
