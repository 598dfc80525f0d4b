"""Free torsional vibration of two rotors on a compliant shaft, directly and through a rigid gear.

Outside references:
- Two-rotor torsional system (S. S. Rao, *Mechanical Vibrations*, from memory):
      w_n = sqrt(k (J1 + J2) / (J1 J2));  relative twist theta(t) = theta0 cos(w_n t) + (dw0/w_n) sin(w_n t)
  and the centre-of-mass speed (J1 w1 + J2 w2)/(J1 + J2) stays constant (conservation of
  angular momentum, any mechanics text).
- Through a rigid gear of ratio N (input/output speed) an input-side inertia acts on the
  output as J N^2 (reflected inertia, common practice), so w_n = sqrt(k (J1 N^2 + J2) / (J1 N^2 J2)).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from helpers import build_geared_torsion, build_torsion, crossings, run, tol

J1, J2, KS = 0.02, 0.05, 200.0
JG, N = 0.002, 4.0
T_END, DT = 0.5, 2e-4   # ~9 periods of the two-rotor mode (53 ms)

_runs: dict = {}


def cached(key, solver, build):
    k = (key, id(solver))
    if k not in _runs:
        _runs[k] = run(build(), T_END, solver, DT)
    return _runs[k]


def frequency_from_crossings(t, x):
    """Angular frequency from the first and last zero crossing (half a period apart each)."""
    tc = crossings(t, x)
    assert tc.size >= 10, "too few zero crossings to measure a frequency"
    half_period = (tc[-1] - tc[0]) / (tc.size - 1)
    return math.pi / half_period


# The crossings come from linear interpolation between samples 2e-4 s apart. For a sine the
# interpolated root is off by ~ (w dt)^2 dt / 50 (the curvature vanishes at a crossing) ~ 2e-9 s
# here, i.e. ~5e-9 of the ~0.45 s span between the first and last crossing; the solver's own timing
# error is ~ (relative amplitude error) / w_n. Both stay well inside 1e3 * rtol (helpers.tol).


def test_two_rotor_frequency_from_initial_twist(solver):
    theta0 = 0.01
    r = cached("twist", solver, lambda: build_torsion(j1=J1, j2=J2, k=KS, twist0=theta0))
    wn = math.sqrt(KS * (J1 + J2) / (J1 * J2))  # Rao, two-rotor system (from memory)
    w = frequency_from_crossings(r.time, r["shaft.twist"])
    err = abs(w - wn) / wn
    print(f"two-rotor: measured w_n {w:.9f} rad/s vs {wn:.9f} (rel {err:.2e})")
    assert err < tol(solver)
    # the whole waveform: theta0 cos(w_n t) (Rao)
    werr = np.max(np.abs(r["shaft.twist"] - theta0 * np.cos(wn * r.time))) / theta0
    print(f"two-rotor: twist waveform max rel err {werr:.2e}")
    assert werr < tol(solver)  # global error bound 1e3 * rtol, as for every smooth run


def test_two_rotor_initial_speed_difference(solver):
    w1 = 3.0
    r = cached("speed", solver, lambda: build_torsion(j1=J1, j2=J2, k=KS, w1=w1))
    wn = math.sqrt(KS * (J1 + J2) / (J1 * J2))  # Rao (from memory)
    w = frequency_from_crossings(r.time, r["shaft.twist"])
    err = abs(w - wn) / wn
    print(f"two-rotor (speed difference): measured w_n {w:.9f} vs {wn:.9f} (rel {err:.2e})")
    assert err < tol(solver)
    ref = (w1 / wn) * np.sin(wn * r.time)
    werr = np.max(np.abs(r["shaft.twist"] - ref)) / (w1 / wn)
    cm = (J1 * r["side1.speed"] + J2 * r["side2.speed"]) / (J1 + J2)  # angular momentum
    cm_err = np.max(np.abs(cm - J1 * w1 / (J1 + J2))) / w1
    print(f"twist waveform rel err {werr:.2e}; centre-of-mass speed drift {cm_err:.2e}")
    assert werr < tol(solver)
    assert cm_err < tol(solver)


def test_geared_frequency_uses_reflected_inertia(solver):
    theta0 = 0.01
    r = cached("geared", solver, lambda: build_geared_torsion(j1=JG, ratio=N, j2=J2, k=KS, twist0=theta0))
    j_ref = JG * N ** 2  # reflected to the output side (common practice)
    wn = math.sqrt(KS * (j_ref + J2) / (j_ref * J2))
    wn_unreflected = math.sqrt(KS * (JG + J2) / (JG * J2))
    w = frequency_from_crossings(r.time, r["shaft.twist"])
    err = abs(w - wn) / wn
    print(f"geared: measured {w:.9f} rad/s vs reflected formula {wn:.9f} (rel {err:.2e}); "
          f"the unreflected formula would give {wn_unreflected:.3f}")
    assert err < tol(solver)
    # the gear's kinematics: input speed = N * output speed at every sample (common practice)
    fast, slow = r["j1.shaft.speed"], r["shaft.a.speed"]
    kin = np.max(np.abs(fast - N * slow)) / np.max(np.abs(fast))
    print(f"geared: |w_in - N w_out| / max|w_in| = {kin:.2e}")
    assert kin < 1e-12  # an exact algebraic relation of the rigid group: round-off only
