"""Find which component produced a non-finite value (Python side, called only after a failure)."""
from __future__ import annotations

import numpy as np


def nonfinite_culprit(prob, t: float, y: np.ndarray, m: np.ndarray, d: np.ndarray) -> str | None:
    """Name the first component, in evaluation order, whose derivatives or port flows are not finite.

    Evaluates ``system_rhs`` once at ``(t, y)`` and inspects each component's own rows of ``dy``
    and its port through-variables in the work array (the layout knows both). Returns a
    description such as ``"component 'bad' (DCMotor), port 'shaft' torque"``, or None.
    """
    lay, st = getattr(prob, "layout", None), getattr(prob, "structure", None)
    if lay is None or st is None:
        return None
    w = np.zeros(prob.n_work)
    dy = np.zeros(prob.n_main)
    with np.errstate(all="ignore"):
        prob.module.system_rhs(float(t), np.ascontiguousarray(y, dtype=float), prob.p,
                               np.ascontiguousarray(m, dtype=np.int64), np.ascontiguousarray(d, dtype=float), w, dy)
    pf = lay.work["PF"]
    for ci in st.order:
        comp, s = st.components[ci], lay.comp[ci]
        for j, state in enumerate(comp.states):
            if not np.isfinite(dy[s.x[0] + j]):
                return f"component '{comp.name}' ({type(comp).__name__}), state '{state.name}'"
        for j, port in enumerate(comp.ports):
            if not np.isfinite(w[pf + s.ports[0] + j]):
                return f"component '{comp.name}' ({type(comp).__name__}), port '{port.name}'"
    return None
