"""Stick-slip Coulomb friction shared by :class:`~emsim.components.machines.DCMotor` and
:class:`~emsim.components.mechanics.CoulombFriction`, plus small parameter checks
shared by the built-in components.

Model
-----
One integer mode per friction element:

* ``SLIP_FORWARD`` (1): the shaft turns forward; friction resists with ``+T_c``
  (the torque the element takes from the shaft, so ``-T_c`` acts on the shaft).
* ``SLIP_BACKWARD`` (2): the shaft turns backward; the element takes ``-T_c``.
* ``STUCK`` (0): the surfaces hold. The friction is then a stiff viscous hold
  ``c_h * w`` with ``c_h = T_breakaway / w_creep``: the speed that can persist while
  stuck is at most ``w_creep`` (param ``creep_speed``, default 1e-6 rad/s), so the
  load is stopped and held without chatter and without forcing tiny steps (the hold
  is a smooth, stiff term an implicit solver takes in its stride).

Two state events, both continuous in the states within a mode (an inactive event
holds a constant of the sign that cannot trigger it):

* 0 ``speed_zero`` (direction 0): in a slipping mode its value is the speed ``w``;
  when it reaches zero the element sticks.
* 1 ``breakaway`` (direction +1): in the stuck mode its value is
  ``c_h*|w| - T_breakaway`` (the hold torque in excess of what the surfaces can
  hold); when it rises through zero the element slips in the direction of ``w``.

``T_breakaway >= T_c`` is required: on breakaway the applied torque exceeds
``T_breakaway``, so with a kinetic torque no larger the shaft keeps accelerating
away from zero speed instead of falling straight back into the stuck mode.

With ``T_breakaway = 0`` (no Coulomb friction) the events are inactive in every mode
and the friction torque is zero whatever the mode.

The kernels call the ``@numba.njit(inline="always")`` helpers below; assembly must
compile the kernel *function objects* (``numba.njit(fn)``), which resolves these
module-level helpers through the kernel's globals.
"""
from __future__ import annotations

import math

import numba

from ..errors import ParameterError

STUCK = 0
SLIP_FORWARD = 1
SLIP_BACKWARD = 2

#: Event indices (both friction elements declare the two events in this order, first).
EVENT_SPEED_ZERO = 0
EVENT_BREAKAWAY = 1


@numba.njit(cache=True, inline="always")
def friction_torque(mode, w, coulomb, hold):
    """Torque (N*m) the friction takes from the shaft: resists positive speed when positive.

    Parameters
    ----------
    mode : int
        ``STUCK``, ``SLIP_FORWARD`` or ``SLIP_BACKWARD``.
    w : float
        Shaft speed, rad/s.
    coulomb : float
        Kinetic (Coulomb) friction torque ``T_c``, N*m.
    hold : float
        Stuck-mode hold coefficient ``c_h = T_breakaway / w_creep``, N*m*s/rad.
    """
    if mode == SLIP_FORWARD:
        return coulomb
    if mode == SLIP_BACKWARD:
        return -coulomb
    return hold * w


@numba.njit(cache=True, inline="always")
def friction_slope(mode, hold):
    """d(friction torque)/d(speed), N*m*s/rad: zero while slipping, the hold coefficient while stuck."""
    if mode == STUCK:
        return hold
    return 0.0


@numba.njit(cache=True, inline="always")
def speed_zero_value(mode, w, breakaway):
    """Event 0 (``speed_zero``) value: the speed while slipping, an inactive 1.0 otherwise."""
    if breakaway <= 0.0 or mode == STUCK:
        return 1.0
    return w


@numba.njit(cache=True, inline="always")
def breakaway_value(mode, w, breakaway, hold):
    """Event 1 (``breakaway``, rising) value: ``c_h*|w| - T_breakaway`` while stuck, inactive -1.0 otherwise."""
    if breakaway <= 0.0 or mode != STUCK:
        return -1.0
    return hold * abs(w) - breakaway


@numba.njit(cache=True, inline="always")
def mode_after_event(k, mode, w):
    """The mode after friction event ``k`` fired in ``mode`` at speed ``w``."""
    if k == EVENT_SPEED_ZERO:
        if mode == SLIP_FORWARD or mode == SLIP_BACKWARD:
            return STUCK
        return mode
    if k == EVENT_BREAKAWAY and mode == STUCK:
        if w >= 0.0:
            return SLIP_FORWARD
        return SLIP_BACKWARD
    return mode


@numba.njit(cache=True, inline="always")
def initial_mode(w, breakaway):
    """The mode at the start: from the sign of the initial speed; zero speed starts stuck."""
    if w > 0.0:
        return SLIP_FORWARD
    if w < 0.0:
        return SLIP_BACKWARD
    if breakaway <= 0.0:
        return SLIP_FORWARD  # no Coulomb friction: every mode gives zero torque; keep events idle
    return STUCK


def fill_breakaway(values: dict, breakaway: str, coulomb: str, coulomb_default: float = 0.0) -> dict:
    """Default the breakaway torque to the Coulomb torque when the user did not give it."""
    if breakaway not in values:
        values = dict(values)
        values[breakaway] = values.get(coulomb, coulomb_default)
    return values


def check_breakaway(component, values: dict, breakaway: str, coulomb: str) -> None:
    """Raise ParameterError unless ``breakaway >= coulomb`` (static friction at least kinetic)."""
    if values[breakaway] < values[coulomb]:
        raise ParameterError(
            f"{label(component)}: parameter '{breakaway}' = {values[breakaway]:g} N*m is below "
            f"'{coulomb}' = {values[coulomb]:g} N*m; expected breakaway (static) torque >= Coulomb "
            "(kinetic) torque, or leave it out to use the Coulomb torque")


def label(component) -> str:
    """``"ClassName 'instance'"``, the prefix of every parameter message."""
    return f"{type(component).__name__} '{component.name}'"


def require_positive(component, values: dict, *names: str) -> None:
    """Raise ParameterError naming the first of ``names`` that is not strictly positive."""
    units = {p.name: p.unit for p in component.params}
    for n in names:
        v = values[n]
        if not v > 0.0 or math.isinf(v):
            raise ParameterError(f"{label(component)}: parameter '{n}' = {v:g} {units.get(n, '')} must be "
                                 f"positive and finite (expected a value > 0 {units.get(n, '')})")
