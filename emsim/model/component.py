"""The component base class: the one API that built-ins and plugins share.

A component is a Python class that declares its data (parameters, states,
ports, signals, outputs, events) and supplies behaviour as plain functions in
the numba-compilable subset of Python. Assembly compiles those functions into
one system right-hand side; no Python runs per step.

Contract for a component class (numbered, like the rules of a solver):

1. Declare ``params``, ``states``, ``ports`` and optionally ``tables``,
   ``inputs``, ``signals``, ``outputs``, ``discrete``, ``modes``, ``events``,
   ``couplings``, ``energy``, ``derived``, ``sample_period`` (see
   :mod:`emsim.model.declarations`). Units are coherent SI. An instance may
   narrow its ``events`` to ``()`` in ``__init__`` when its values make them
   meaningless (a motor without Coulomb friction); that is part of the structure.
2. Provide ``equations(t, x, a, u, p, m, d, dx, f, s)`` as a ``staticmethod``:
   read time ``t``, own states ``x``, the across variable of each port ``a``
   (voltage V, speed rad/s, temperature K, in port order), signal inputs ``u``,
   parameters ``p`` (scalars in declared order, then ``derived`` values, then
   each table as ``[n, v0..v(n-1)]``), integer modes ``m`` and discrete states
   ``d``; write ``dx`` (derivative of each differential state, residual of each
   algebraic one), ``f`` (the through variable INTO the component at each port:
   current into its + terminal, torque it takes from the shaft, heat flow into
   it) and ``s`` (signal outputs). Write every entry, every call.
3. Optional kernels, same argument conventions:
   ``monitor(t, x, a, f, u, p, m, d, out)`` fills declared ``outputs``;
   ``event_values(t, x, a, f, u, p, m, d, g)`` fills one value per declared event;
   ``on_event(k, t, x, a, f, u, p, m, d)`` applies event ``k`` (change ``m``, ``d``,
   or reset ``x``); ``start(t, x, a, f, u, p, m, d)`` sets initial modes once;
   ``at_time(t, x, a, f, u, p, m, d)`` runs at time events — every
   ``sample_period`` seconds from the start if that names a parameter, else at
   the instants ``next_time(t, p, m, d)`` returns (strictly after ``t``,
   ``inf`` for none). Every kernel treats ``a``, ``f``, ``u`` and ``p`` as
   read-only: they are the system's shared values.
4. Optionally ``jacobian(t, x, a, u, p, m, d, jx, ja)`` gives the partial
   derivatives of the outputs of ``equations``: rows are ``dx`` then ``f`` (one
   per port), ``jx`` columns the own states ``x``, ``ja`` columns the ports'
   across variables ``a``. Both arrays arrive zeroed; write the non-zeros. Signal
   inputs count as held (no dependence on the states): a component whose signals
   are computed from its states or ports declares ``held_signals = True`` only if
   they change solely at events (as a sampled controller's do). A system whose every
   component supplies this kernel gets an analytic Jacobian; otherwise the solver
   uses compiled finite differences.
5. Kernels allocate nothing and call only numpy/math functions numba supports.
   They must be importable (defined at module level in a real module).
6. Python-side checks go in ``check(self, values)`` (raise ParameterError naming
   the parameter) and derived values in ``derive(self, values) -> dict``; both
   run once, at construction.
"""
from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np

from ..errors import ParameterError, PluginError
from ..units import check_si, to_si
from .declarations import (DOMAINS, KERNELS, Discrete, Energy, Event, Input, Output, Param, Port,
                           RigidCoupling, Signal, State, Table)


class Component:
    """Base of every component; subclass it and declare (see the module contract).

    Parameters
    ----------
    name : str
        Instance name, unique in its system (letters, digits, underscore).
    initial : dict, optional
        Initial values of states or discrete states by name (units accepted).
    **values
        Parameter and table values by name (a number in SI, a string such as
        ``"0.35 ohm"``, or an ``emsim.ureg`` Quantity).
    """

    params: ClassVar[tuple] = ()
    tables: ClassVar[tuple] = ()
    states: ClassVar[tuple] = ()
    ports: ClassVar[tuple] = ()
    inputs: ClassVar[tuple] = ()
    signals: ClassVar[tuple] = ()
    outputs: ClassVar[tuple] = ()
    discrete: ClassVar[tuple] = ()
    modes: ClassVar[tuple] = ()
    events: ClassVar[tuple] = ()
    couplings: ClassVar[tuple] = ()
    energy: ClassVar[Energy] = Energy()
    derived: ClassVar[tuple] = ()
    sample_period: ClassVar[str | None] = None
    #: True when the signal outputs change only at time or state events (held between them),
    #: so they do not enter the Jacobian; sampled controllers set it.
    held_signals: ClassVar[bool] = False

    equations = None
    monitor = None
    event_values = None
    on_event = None
    at_time = None
    next_time = None
    start = None
    jacobian = None

    def __init_subclass__(cls, **kwargs):
        super().__init_subclass__(**kwargs)
        _validate_class(cls)

    def __init__(self, name: str, *, initial: dict | None = None, **values: Any):
        if not isinstance(name, str) or not name.isidentifier():
            raise ParameterError(f"{type(self).__name__}: name {name!r} must be an identifier "
                                 "(letters, digits, underscore; not starting with a digit)")
        self.name = name
        label = f"{type(self).__name__} '{name}'"
        known = {p.name for p in self.params} | {t.name for t in self.tables}
        unknown = sorted(set(values) - known)
        if unknown:
            raise ParameterError(f"{label}: unknown parameter(s) {unknown}; "
                                 f"this component takes {sorted(known)}")
        self.values: dict[str, float] = {}
        for par in self.params:
            raw = values.get(par.name, par.default)
            if raw is None:
                raise ParameterError(f"{label}: parameter '{par.name}' ({par.doc or par.unit}) is required, "
                                     f"in {par.unit or 'no unit'}")
            value = to_si(raw, par.unit, owner=label, name=par.name)
            lo, hi = par.bounds
            if not (lo <= value <= hi) or math.isnan(value):
                raise ParameterError(f"{label}: parameter '{par.name}' = {value:g} {par.unit} is outside "
                                     f"[{lo:g}, {hi:g}] {par.unit}")
            self.values[par.name] = value
        self.table_values: dict[str, np.ndarray] = {}
        for tab in self.tables:
            raw = values.get(tab.name, tab.default)
            if raw is None:
                raise ParameterError(f"{label}: table '{tab.name}' is required ({tab.doc or tab.unit})")
            arr = np.array([to_si(v, tab.unit, owner=label, name=f"{tab.name}[{i}]")
                            for i, v in enumerate(np.atleast_1d(np.asarray(raw, dtype=object)))], dtype=float)
            if arr.size < tab.min_length:
                raise ParameterError(f"{label}: table '{tab.name}' needs at least {tab.min_length} entries; "
                                     f"got {arr.size}")
            if not np.all(np.isfinite(arr)):
                raise ParameterError(f"{label}: table '{tab.name}' holds a non-finite value")
            if tab.increasing and np.any(np.diff(arr) <= 0):
                i = int(np.argmax(np.diff(arr) <= 0))
                raise ParameterError(f"{label}: table '{tab.name}' must increase strictly; "
                                     f"entry {i + 1} ({arr[i + 1]:g}) does not exceed entry {i} ({arr[i]:g})")
            self.table_values[tab.name] = arr
        self.check(dict(self.values))
        extra = self.derive(dict(self.values))
        missing = [n for n in self.derived if n not in extra]
        if missing:
            raise PluginError(f"{type(self).__name__}.derive() did not return {missing}")
        self.derived_values = {n: float(extra[n]) for n in self.derived}
        self.initial_values = {s.name: s.initial for s in self.states}
        self.discrete_initial = {s.name: s.initial for s in self.discrete}
        for key, raw in (initial or {}).items():
            decl = {s.name: s for s in self.states + self.discrete}.get(key)
            if decl is None:
                raise ParameterError(f"{label}: initial value for unknown state '{key}'; states are "
                                     f"{[s.name for s in self.states + self.discrete]}")
            value = to_si(raw, decl.unit, owner=label, name=f"initial {key}")
            (self.initial_values if key in self.initial_values else self.discrete_initial)[key] = value

    # -- hooks a subclass may override ------------------------------------------------
    def check(self, values: dict) -> None:
        """Cross-check parameters (SI floats by name); raise ParameterError naming them."""

    def derive(self, values: dict) -> dict:
        """Return the ``derived`` values (SI floats) computed from the parameters."""
        return {}

    # -- flat views used by assembly --------------------------------------------------
    def parameter_vector(self) -> np.ndarray:
        """Parameters as the kernels see them: scalars, derived, then ``[n, values..]`` per table."""
        parts = [np.array([self.values[p.name] for p in self.params], dtype=float),
                 np.array([self.derived_values[n] for n in self.derived], dtype=float)]
        for tab in self.tables:
            arr = self.table_values[tab.name]
            parts += [np.array([float(arr.size)]), arr]
        return np.concatenate(parts) if parts else np.zeros(0)

    def scalar(self, name: str) -> float:
        """SI value of a parameter or derived value by name."""
        return self.values[name] if name in self.values else self.derived_values[name]

    def scalar_index(self, name: str) -> int:
        """Position of a parameter or derived value in :meth:`parameter_vector`."""
        names = [p.name for p in self.params] + list(self.derived)
        return names.index(name)

    def port(self, name: str) -> Port:
        for p in self.ports:
            if p.name == name:
                return p
        raise KeyError(name)

    def __repr__(self) -> str:
        return f"{type(self).__name__}({self.name!r})"


def _validate_class(cls) -> None:
    """Check a component class's declarations once, when the class is defined."""
    label = f"component class {cls.__module__}.{cls.__qualname__}"
    groups = {"params": Param, "tables": Table, "states": State, "ports": Port, "inputs": Input,
              "signals": Signal, "outputs": Output, "discrete": Discrete, "events": Event,
              "couplings": RigidCoupling}
    for attr, kind in groups.items():
        items = getattr(cls, attr)
        if not isinstance(items, tuple) or not all(isinstance(i, kind) for i in items):
            raise PluginError(f"{label}: '{attr}' must be a tuple of emsim {kind.__name__} declarations")
    names = [d.name for attr in ("params", "tables", "states", "ports", "inputs", "signals", "outputs", "discrete")
             for d in getattr(cls, attr)]
    dupes = sorted({n for n in names if names.count(n) > 1})
    if dupes:
        raise PluginError(f"{label}: names used twice among its declarations: {dupes}")
    for decl in [*cls.params, *cls.tables, *cls.states, *cls.inputs, *cls.signals, *cls.outputs, *cls.discrete]:
        check_si(decl.unit, owner=label, name=decl.name)
    pnames = {p.name for p in cls.params}
    for port in cls.ports:
        if port.capacity is not None and port.capacity not in pnames | set(cls.derived):
            raise PluginError(f"{label}: port '{port.name}' lends capacity '{port.capacity}', "
                              "which is neither a parameter nor a derived value")
    ports = {p.name: p for p in cls.ports}
    for c in cls.couplings:
        for pn in (c.port_a, c.port_b):
            if pn not in ports or ports[pn].domain != "rotational":
                raise PluginError(f"{label}: coupling names '{pn}', which is not a rotational port")
        for par in (c.ratio, c.efficiency):
            if par is not None and par not in pnames:
                raise PluginError(f"{label}: coupling parameter '{par}' is not declared in params")
    outs = {o.name for o in cls.outputs}
    for group in ("supplied", "loss", "delivered", "stored"):
        for n in getattr(cls.energy, group):
            if n not in outs:
                raise PluginError(f"{label}: energy '{group}' names '{n}', which is not a declared output")
    if cls.sample_period is not None and cls.sample_period not in pnames:
        raise PluginError(f"{label}: sample_period names '{cls.sample_period}', which is not a parameter")
    if cls.__dict__.get("equations") is None and not cls.__name__.startswith("_") and cls.equations is None:
        raise PluginError(f"{label}: define the 'equations' kernel (see emsim.Component's contract, rule 2)")
    for kname in KERNELS:
        fn = getattr(cls, kname)
        if fn is not None and not callable(fn):
            raise PluginError(f"{label}: kernel '{kname}' must be a function (staticmethod)")
    if cls.outputs and cls.monitor is None:
        raise PluginError(f"{label}: declares outputs but no 'monitor' kernel to compute them")
    if cls.events and (cls.event_values is None or cls.on_event is None):
        raise PluginError(f"{label}: declares events but lacks 'event_values' or 'on_event'")
    if (cls.sample_period is not None or cls.next_time is not None) and cls.at_time is None:
        raise PluginError(f"{label}: has time events but no 'at_time' kernel")
