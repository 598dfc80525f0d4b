"""The assembled problem: flat arrays and one generated module, no names in the hot path.

A :class:`Problem` is what assembly hands to a solver. The generated module
defines these compiled functions (all arrays float64 unless noted; ``m`` is
int64 modes, ``d`` discrete states held between time events, ``w`` a work
array the generated code uses for port and signal buffers)::

    system_rhs(t, y, p, m, d, w, dy)          # dy[:n_main]: y' on differential rows (mass 1),
                                              #   residual on algebraic rows (mass 0)
    system_quad(t, y, p, m, d, w, dq)         # dq[:n_quad]: derivatives of the quadrature
                                              #   states y[n_main:] (energy accumulators)
    system_quad_at_rhs(t, y, p, m, d, w, dq)  # the same, when w already holds system_rhs at (t, y)
    system_events(t, y, p, m, d, w, g)        # g[:n_events]: state-event functions
    system_on_event(k, t, y, p, m, d, w)      # apply state event k in place; returns the
                                              #   index of the owning component (int)
    system_next_time(t, p, m, d)              # next time-event instant strictly after t, inf if none
    system_at_time(t, y, p, m, d, w, log)     # apply every time event due at t; writes the owning
                                              #   component indices into log (int64), returns the count
    system_start(t, y, p, m, d, w)            # once, at the start: components set initial modes
    system_record(t, y, p, m, d, w, row)      # fill one output row (n_record values)
    system_jacobian(t, y, p, m, d, w, jac)    # fill d(dy)/dy (n_main x n_main) and return 1, or
                                              #   return 0: the solver uses finite differences
    system_stages(ts, y, z, ys, p, m, d, w, f, fq, want_quad)
                                              # the three Radau stage evaluations at once (written
                                              #   once for all modules in emsim.solvers.abi)
    system_rhs_quad(t, y, p, m, d, w, dy, dq) # system_rhs and system_quad_at_rhs at one point, one
                                              #   call (the explicit method's stages; also in abi)

``y`` holds ``n_main`` main rows followed by ``n_quad`` quadrature rows; the
quadrature rows never feed back into the main rows. The module also exports
the functions the compiled integrator calls as C callbacks ``cb_<name>``
(:data:`emsim.solvers.abi.ORDER`; ``system_quad`` serves the reference solver,
the integrator gets the integrands from ``system_stages``). The
generated code uses numpy's floating-point error model: a division by zero
gives inf/NaN, which the solvers report as a non-finite value naming the
component, rather than raising inside compiled code.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from types import ModuleType

import numpy as np


@dataclass
class Problem:
    """Everything a solver needs, as flat arrays plus the generated module.

    Attributes
    ----------
    module : ModuleType
        The generated, numba-compiled system functions (see module docstring).
    t0 : float
        Start time, s.
    y0 : ndarray, shape (n_main + n_quad,)
        Initial state (main rows then quadrature rows).
    p : ndarray
        All parameters, SI, concatenated component by component.
    m0 : ndarray of int64
        Initial discrete modes.
    d0 : ndarray
        Initial discrete (sampled) states.
    n_work : int
        Length of the work array ``w``.
    mass : ndarray, shape (n_main,)
        Diagonal of M: 1.0 on differential rows, 0.0 on algebraic rows.
    n_main, n_quad, n_events, n_record : int
        Sizes.
    event_direction : ndarray of int64, shape (n_events,)
        +1 triggers on rising crossings only, -1 on falling only, 0 on both.
    nominal : ndarray, shape (n_main + n_quad,)
        Nominal magnitude of each state, used for absolute error weights.
    state_names : list of str
        Name of every state row.
    row_owner : list of str
        Component or node whose equation each row is.
    event_owner : list of str
        ``"component.event"`` for each state event.
    component_names : list of str
        Component index -> name (indices returned by ``system_on_event``/``system_at_time``).
    record_names, record_units : list of str
        Names and SI units of the columns ``system_record`` fills.
    fresh_slot : int
        Index in ``w`` of the work array's currency flag (see :mod:`emsim.solvers.abi`), or -1
        if the module's functions take no notice of one.
    """

    module: ModuleType
    t0: float
    y0: np.ndarray
    p: np.ndarray
    m0: np.ndarray
    d0: np.ndarray
    n_work: int
    mass: np.ndarray
    n_main: int
    n_quad: int
    n_events: int
    n_record: int
    event_direction: np.ndarray
    nominal: np.ndarray
    state_names: list = field(default_factory=list)
    row_owner: list = field(default_factory=list)
    event_owner: list = field(default_factory=list)
    component_names: list = field(default_factory=list)
    record_names: list = field(default_factory=list)
    record_units: list = field(default_factory=list)
    description: dict = field(default_factory=dict)
    fresh_slot: int = -1
