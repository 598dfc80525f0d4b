"""What every solver of emsim promises.

A solver turns a :class:`emsim.assembly.problem.Problem` into output rows and an
event log. The contract, which every subclass of :class:`Solver` keeps:

1. ``run(problem, t_end, *, out_dt, sink, columns=None)`` integrates from ``problem.t0`` to
   ``t_end`` (inclusive) and returns a ``dict`` of integer statistics (at least
   ``steps``, ``rejected``, ``rhs_evals``, ``jacobians``, ``factorizations``,
   ``newton_iterations``, ``time_events``, ``state_events``).
2. Output rows are taken at ``problem.t0 + k * out_dt`` for ``k = 0, 1, ...``
   up to and including ``t_end``; the first row is at ``t0``. Each row holds the
   ``problem.n_record`` values that the generated ``system_record`` fills, or with
   ``columns`` (a sequence of indices into them) those values in that order.
3. ``sink.rows(t, data)`` receives rows in time order in batches: ``t`` of shape
   ``(k,)``, ``data`` of shape ``(k, problem.n_record)`` (``(k, len(columns))``). The arrays are handed
   over: the solver never writes to them after the call, so a sink may keep
   them without copying (copying a long run's rows cost more than the
   solver's own bookkeeping).
4. ``sink.events(t, component, kind, index)`` receives the event log in time
   order in batches (handed over like the rows): ``component`` is the index into ``problem.component_names``,
   ``kind`` is 1 for a time event and 2 for a state event, ``index`` is the state
   event index (into ``problem.event_owner``) or -1 for a time event. The
   batches of rows and of events each stay in time order; rows of a batch are
   delivered before the events of the same batch.
5. At one instant state events are applied first, in increasing event index,
   then the time events due at that instant. A row at exactly an event instant
   shows the state after the events.
6. Any failure raises :class:`emsim.errors.SolverError` whose message names the
   time, the kind of failure, the state vector by ``problem.state_names`` and,
   where one can be identified, the owning component or node.
7. ``settings()`` returns the solver's options as a plain ``dict`` (JSON-able
   values) for result metadata; ``name`` is a short method name.
8. A solver does not modify the ``problem`` it is given.
"""
from __future__ import annotations

from abc import ABC, abstractmethod

import numpy as np

from ..errors import SolverError


class Solver(ABC):
    """Abstract base of the time integrators; see the module docstring for the contract."""

    name: str = "solver"

    @abstractmethod
    def run(self, problem, t_end: float, *, out_dt: float, sink, columns=None) -> dict:
        """Integrate ``problem`` to ``t_end`` feeding ``sink``; return statistics (contract 1-6)."""

    @abstractmethod
    def settings(self) -> dict:
        """The solver options as a plain dict (contract 7)."""


def record_columns(columns, n_record: int, who: str) -> np.ndarray | None:
    """``columns`` of contract item 2 checked and as an int64 array (None: every recorded value).

    Raises
    ------
    SolverError
        An empty selection, or an index outside ``[0, n_record)``.
    """
    if columns is None:
        return None
    cols = np.ascontiguousarray(np.asarray(columns, dtype=np.int64).reshape(-1))
    if not (cols.size > 0 and bool(np.all((cols >= 0) & (cols < n_record)))):
        raise SolverError(f"{who}: record columns must be indices in [0, {n_record}), got {cols.tolist()[:10]}")
    return cols
