"""An in-memory sink for short runs and tests (memory grows with the run: use a file for long ones)."""
from __future__ import annotations

import numpy as np


class MemoryRecorder:
    """Collects output rows and the event log in memory (a solver sink, see emsim.solvers.base).

    Parameters
    ----------
    names, units : list of str, optional
        Column names and units, kept for the caller.
    """

    def __init__(self, names: list | None = None, units: list | None = None):
        self.names, self.units = list(names or []), list(units or [])
        self._t, self._rows, self._ev = [], [], []

    def rows(self, t, data):
        self._t.append(np.asarray(t, dtype=float))    # no copy: solvers hand their batches over
        self._rows.append(np.asarray(data, dtype=float))

    def events(self, t, component, kind, index):
        self._ev.append(tuple(np.asarray(a) for a in (t, component, kind, index)))

    def arrays(self):
        """``(t, data)``: output times and the rows, concatenated."""
        if not self._t:
            return np.zeros(0), np.zeros((0, len(self.names)))
        if len(self._t) == 1:  # one batch: the solver handed it over, nothing to join
            return self._t[0], self._rows[0]
        return np.concatenate(self._t), np.concatenate(self._rows)

    def event_arrays(self):
        """``(t, component, kind, index)`` of the event log, concatenated."""
        if not self._ev:
            return np.zeros(0), np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0, np.int64)
        if len(self._ev) == 1:
            return self._ev[0]
        return tuple(np.concatenate([e[i] for e in self._ev]) for i in range(4))
