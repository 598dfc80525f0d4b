"""The system callbacks are compiled without numba's reference counting unless a component needs it.

emsim.solvers.abi.export compiles each callback "lean" (no reference counting,
which is dead work on arrays the caller owns) and falls back to numba's runtime
when a component's code allocates an array. Both kinds must give the same,
correct answer: a spinning inertia braked by a viscous damper, whose speed has
the closed form w(t) = w0 * exp(-c t / J) (first-order linear ODE with constant
coefficients; e.g. W. E. Boyce & R. C. DiPrima, Elementary Differential
Equations, ch. 2).
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np

import emsim
import emsim.assembly.compile as compile_mod
from emsim.components import Damper, Inertia
from emsim.solvers.compiled import Radau5

J = 0.02    # kg m^2 (invented)
C = 0.004   # N m s/rad (invented)
W0 = 50.0   # rad/s
T_END = 10.0


class ScratchDamper(emsim.Component):
    """A viscous damper written the way a plugin author might: through a temporary array."""

    params = (emsim.Param("damping", "N*m*s/rad", doc="viscous coefficient"),)
    ports = (emsim.Port("shaft", "rotational"),)
    outputs = (emsim.Output("loss", "W"),)
    energy = emsim.Energy(loss=("loss",))

    @staticmethod
    def equations(t, x, a, u, p, m, d, dx, f, s):
        tmp = np.empty(1)          # an allocation: needs numba's runtime
        tmp[0] = p[0] * a[0]
        f[0] = tmp[0]

    @staticmethod
    def monitor(t, x, a, f, u, p, m, d, out):
        out[0] = f[0] * a[0]


def _braked(damper):
    system = emsim.System("braked inertia")
    system.add(Inertia("rotor", inertia=J), damper)
    system.connect("rotor.shaft", f"{damper.name}.shaft", name="shaft")
    system.set_initial("shaft", W0).set_nominal("shaft", W0)
    return emsim.assemble(system)


def test_lean_and_runtime_callbacks_both_follow_the_closed_form_decay(monkeypatch):
    lean = _braked(Damper("brake", damping=C))
    with_runtime = _braked(ScratchDamper("brake", damping=C))
    # the built-in damper allocates nothing: its callbacks are lean; the allocating one fell back
    assert "cache=True, _nrt=False)(_abi_plain_copy(system_stages, " in Path(lean.module.__file__).read_text()
    # the generated analytic Jacobian allocates nothing either (component partials in work-array views)
    assert "cache=True, _nrt=False)(_abi_plain_copy(system_jacobian, " in Path(lean.module.__file__).read_text()
    assert "_nrt=False" not in Path(with_runtime.module.__file__).read_text()
    # the choice is remembered: assembling the allocating system again loads only the runtime module
    loads = []
    real_load = compile_mod.load_generated
    monkeypatch.setattr(compile_mod, "load_generated", lambda *a, **k: loads.append(a[1]) or real_load(*a, **k))
    again = _braked(ScratchDamper("brake", damping=C))
    assert again.module is with_runtime.module
    assert len(loads) == 1 and "_nrt=False" not in loads[0]
    runs = [emsim.simulate(pr, T_END, out_dt=0.5, solver=Radau5(rtol=1e-8))
            for pr in (lean, with_runtime)]
    t = runs[0].time
    exact = W0 * np.exp(-C * t / J)   # closed form (Boyce & DiPrima, ch. 2)
    for run in runs:
        np.testing.assert_allclose(run["shaft.speed"], exact, rtol=1e-6)
        # energy audit: kinetic energy lost equals the damper's dissipation (first law)
        assert run.energy["relative_residual"] < 1e-6
    np.testing.assert_allclose(runs[1]["shaft.speed"], runs[0]["shaft.speed"], rtol=1e-12)
    assert math.isclose(runs[0].energy["loss"], 0.5 * J * (W0 ** 2 - exact[-1] ** 2), rel_tol=1e-6)
