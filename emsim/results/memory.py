"""An in-memory sink for short runs without a file (memory grows with the run: use a file for long ones)."""
from __future__ import annotations

import numpy as np


class MemoryRecorder:
    """Collects rows and events in memory; ``result()`` gives arrays by signal name."""

    def __init__(self, names: list, units: list):
        self.names, self.units = list(names), list(units)
        self._t, self._rows, self._ev = [], [], []

    def rows(self, t, data):
        self._t.append(np.asarray(t, dtype=float).copy())
        self._rows.append(np.asarray(data, dtype=float).copy())

    def events(self, t, component, kind, index):
        self._ev.append((np.asarray(t, float), np.asarray(component), np.asarray(kind), np.asarray(index)))

    def arrays(self):
        t = np.concatenate(self._t) if self._t else np.zeros(0)
        data = np.vstack(self._rows) if self._rows else np.zeros((0, len(self.names)))
        if self._ev:
            ev = tuple(np.concatenate([e[i] for e in self._ev]) for i in range(4))
        else:
            ev = (np.zeros(0), np.zeros(0, int), np.zeros(0, int), np.zeros(0, int))
        return t, data, ev
