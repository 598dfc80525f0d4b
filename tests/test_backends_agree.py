"""The compiled Radau IIA solver against the scipy reference backend on every catalogue system.

Reference: scipy.integrate.Radau (through emsim's reference backend, algebraic rows solved by
Newton inside f) at rtol 1e-9. Both runs record on the same output grid; every recorded
signal must agree within the global-error bound of the looser run (1e3 x its rtol, see
helpers.tol) relative to the signal's range (plus its nominal scale for near-constant ones).
"""
from __future__ import annotations

import numpy as np
import pytest

from emsim.solvers.compiled import Radau5
from emsim.solvers.reference import ScipyReference
from helpers import CATALOGUE, run

REF = ScipyReference(rtol=1e-9)
FAST = Radau5(rtol=1e-8)


@pytest.mark.parametrize("name", sorted(CATALOGUE))
def test_compiled_matches_reference(name):
    build, t_end, out_dt = CATALOGUE[name]
    t_end = min(t_end, 1.0)  # enough to cover transients and every event of these systems
    ref = run(build(), t_end, REF, out_dt)
    fast = run(build(), t_end, FAST, out_dt)
    np.testing.assert_allclose(fast.time, ref.time, rtol=0, atol=1e-12)
    worst = (0.0, "")
    for signal in ref.signals:
        a, b = ref[signal], fast[signal]
        scale = max(np.ptp(a), np.abs(a).max(), 1e-12)
        err = np.abs(a - b).max() / scale
        worst = max(worst, (err, signal))
    print(f"{name}: worst relative disagreement {worst[0]:.2e} in {worst[1]}")
    # bound: 1e3 * rtol of the looser (compiled) run; each run's global error stays below it
    assert worst[0] < 1e3 * FAST.rtol, f"{name}: largest disagreement {worst[0]:.3g} in '{worst[1]}'"
    # the same discrete history: identical event logs (kind, component) and event times to the event tolerance
    assert list(ref.events["kind"]) == list(fast.events["kind"])
    assert list(ref.events["component"]) == list(fast.events["component"])
    np.testing.assert_allclose(fast.events["time"], ref.events["time"], rtol=0, atol=1e-6)
