"""What a component declares, as data: parameters, states, ports, signals, outputs, events.

These small frozen records are the vocabulary of the component API. Built-in
components and plugins use exactly the same ones.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

#: The physical domains, each an (across, through) pair; power = across x through.
DOMAINS = {
    "electrical": ("voltage", "V", "current", "A"),
    "rotational": ("speed", "rad/s", "torque", "N*m"),
    "thermal": ("temperature", "K", "heat_flow", "W"),
}


@dataclass(frozen=True)
class Param:
    """A scalar parameter.

    Parameters
    ----------
    name : str
        Keyword the user passes to the component constructor.
    unit : str
        Coherent SI unit (``"ohm"``, ``"rad/s"``, ``""`` for none). Users may pass any
        compatible unit (``"1200 rpm"``); kernels always see the SI float.
    default : float or None
        ``None`` makes the parameter required.
    bounds : (float, float)
        Inclusive range the SI value must lie in.
    doc : str
        One line for error messages and documentation.
    """

    name: str
    unit: str = ""
    default: float | None = None
    bounds: tuple = (-math.inf, math.inf)
    doc: str = ""


@dataclass(frozen=True)
class Table:
    """An array parameter (a schedule, a lookup table). Stored in ``p`` as ``[n, v0 .. v(n-1)]``."""

    name: str
    unit: str = ""
    default: tuple | None = None
    min_length: int = 1
    increasing: bool = False
    doc: str = ""


@dataclass(frozen=True)
class State:
    """A continuous state of the component.

    ``algebraic=True`` makes it an algebraic variable: the kernel writes a residual
    (zero when satisfied) instead of a derivative. ``nominal`` is its typical
    magnitude, used for the absolute error weight.
    """

    name: str
    unit: str = ""
    initial: float = 0.0
    nominal: float = 1.0
    algebraic: bool = False
    doc: str = ""


@dataclass(frozen=True)
class Port:
    """A physical connection point in one domain.

    ``capacity`` names a parameter (inertia, capacitance, heat capacity) that the
    component lends to the node this port joins. ``fixes_across`` marks a port that
    imposes its across variable (an ideal voltage source): two such ports on one
    node over-determine it. ``required=False`` lets the port stay unconnected
    (its across then reads 0 and its through is ignored).
    """

    name: str
    domain: str
    capacity: str | None = None
    fixes_across: bool = False
    required: bool = True
    doc: str = ""

    def __post_init__(self):
        if self.domain not in DOMAINS:
            raise ValueError(f"port '{self.name}': domain {self.domain!r} is not one of {sorted(DOMAINS)}")


@dataclass(frozen=True)
class Input:
    """A signal input (a control value read by the component); ``default`` is used when unconnected."""

    name: str
    unit: str = ""
    default: float | None = None
    doc: str = ""


@dataclass(frozen=True)
class Signal:
    """A signal output computed by the ``equations`` kernel, connectable to inputs."""

    name: str
    unit: str = ""
    doc: str = ""


@dataclass(frozen=True)
class Output:
    """A named derived value computed by the ``monitor`` kernel and recorded (e.g. copper loss)."""

    name: str
    unit: str = ""
    doc: str = ""


@dataclass(frozen=True)
class Discrete:
    """A discrete state, held between time events and changed only by ``at_time``/``on_event``."""

    name: str
    unit: str = ""
    initial: float = 0.0
    doc: str = ""


@dataclass(frozen=True)
class Event:
    """A state event: the ``event_values`` kernel's entry crossing zero.

    ``direction``: +1 only on rising crossings, -1 only on falling ones, 0 on both.
    """

    name: str
    direction: int = 0
    doc: str = ""


@dataclass(frozen=True)
class RigidCoupling:
    """Two rotational ports coupled rigidly: speed(a) = ratio x speed(b).

    Assembly lumps both sides into one rigid group. ``efficiency`` (a parameter
    name, or None for lossless) is applied by the direction of power flow:
    torque to the driven side is multiplied by it, so the source side supplies
    1/efficiency of the power delivered.
    """

    port_a: str
    port_b: str
    ratio: str
    efficiency: str | None = None


@dataclass(frozen=True)
class Energy:
    """The component's energy bookkeeping, by names of its outputs.

    supplied : outputs (W) of power brought into the system from outside (a battery's chemistry)
    loss : outputs (W) of power dissipated as heat
    delivered : outputs (W) of power handed to an external process (a load's work)
    stored : outputs (J) of energy stored inside the component
    Port powers are not listed: they are exchanged between components.
    """

    supplied: tuple = ()
    loss: tuple = ()
    delivered: tuple = ()
    stored: tuple = ()


KERNELS = ("equations", "monitor", "event_values", "on_event", "at_time", "next_time", "start", "jacobian")
