"""Power electronics: an averaged H-bridge."""
from __future__ import annotations

from ..model.component import Component
from ..model.declarations import Input, Output, Port, State


class AveragedBridge(Component):
    """Averaged (switching-cycle mean) H-bridge between a DC link and a load.

    The armature side sees the mean of the switched voltage, ``v_arm = d*v_bus``
    with the duty cycle ``d`` clipped to [-1, 1] (negative reverses the polarity);
    the bus supplies the mean current ``d*i_arm``. Ideal switches: lossless, so
    bus power ``v_bus*d*i_arm`` equals armature power ``v_arm*i_arm``.

    Notes
    -----
    Ports ``bus`` (electrical, the DC link) and ``armature`` (electrical, fixes its
    across). Input ``duty`` (dimensionless, default 0). Algebraic state
    ``armature_current`` (A, delivered to the armature; residual
    ``v_arm - d*v_bus``): ``f_armature = -armature_current``, ``f_bus = d*armature_current``.
    Outputs ``applied_duty`` (the clipped duty cycle; ``duty`` names the input) and
    ``bus_current`` (A, drawn from the bus).
    No parameters, no energy entries.
    """

    ports = (Port("bus", "electrical", doc="DC link"),
             Port("armature", "electrical", fixes_across=True, doc="output to the load"))
    inputs = (Input("duty", "", 0.0, "duty cycle command, clipped to [-1, 1]"),)
    states = (State("armature_current", "A", 0.0, 10.0, algebraic=True, doc="current delivered to the armature"),)
    outputs = (Output("applied_duty", "", "duty cycle applied, after clipping"),
               Output("bus_current", "A", "current drawn from the DC link"))

    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        duty = min(max(u[0], -1.0), 1.0)
        dx[0] = a[1] - duty * a[0]
        f[0] = duty * x[0]
        f[1] = -x[0]

    @staticmethod
    def jacobian(t, x, a, u, p, m, d, jx, ja):
        # rows: residual, f_bus, f_armature; the duty is held between samples (no y dependence)
        duty = min(max(u[0], -1.0), 1.0)
        ja[0, 0] = -duty
        ja[0, 1] = 1.0
        jx[1, 0] = duty
        jx[2, 0] = -1.0

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        duty = min(max(u[0], -1.0), 1.0)
        out[0] = duty
        out[1] = duty * x[0]
