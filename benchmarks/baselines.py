"""Hand-written baselines for the drive benchmarks.

The model is the one in ``drive_model.py``, written out the way a Python
engineer would do it without emsim: the integrator is *restarted at every
controller sample* -- integrate 1 ms with the duty held, read the load speed,
update the PI, restart.

Every baseline has the signature ``f(variant, ..., n_samples=None) ->
(t, w_L)`` with ``t = k*TS, k = 0..n_samples`` (default n_samples =
N_SAMPLES, i.e. the full 10 s, 10001 points) and ``w_L`` the load speed at
those instants.

* ``scipy_ivp(variant, method, rtol, atol)`` -- scipy.integrate.solve_ivp
  (Radau / BDF / LSODA), numpy right-hand side, no Jacobian (finite
  differences inside scipy), one solve_ivp call per sample.
* ``cvode(variant, rtol, atol)`` -- SUNDIALS CVODE (BDF, dense linear solver,
  internal finite-difference Jacobian) through scikit-sundae; re-initialised
  at every sample.
* ``rk4_floor(variant, substeps)`` -- the floor: a numba-compiled loop with
  classical fixed-step RK4, ``substeps`` equal steps per sample (1 for the
  averaged variants; the stiff variant needs more, see FLOOR_SUBSTEPS).
* ``reference(variant)`` -- tight solution: the RK4 loop with many equal
  substeps per sample (REF_SUBSTEPS), its error estimated by Richardson
  extrapolation against half the substeps; cached in benchmarks/.cache/.
"""

from __future__ import annotations

import hashlib
import os
import time
from pathlib import Path

import numpy as np
import numba
from scipy.integrate import solve_ivp

import drive_model as dm

HERE = Path(__file__).resolve().parent
CACHE_DIR = HERE / ".cache"

# Tolerances chosen once for the variable-step baselines (matched-accuracy
# rule: emsim is run at tolerances that make its error no worse than each).
BASELINE_RTOL = 1e-6
BASELINE_ATOL = 1e-9

# Equal RK4 substeps per 1 ms sample used for the floor.  The averaged
# variants are stable with one step per sample.  The stiff variant is not:
# its armature pole (~ -9.6e3 1/s) and shaft mode (~ -280 +/- 3.4e3j 1/s)
# give |h*lambda| ~ 10 at h = 1 ms, far outside RK4's stability region; 1, 2
# and 3 substeps blow up, 4 (h = 0.25 ms) is the smallest stable count and is
# accurate (error of the same order as the averaged floor's one step per
# sample).  find_stable_substeps() re-derives it.
FLOOR_SUBSTEPS = {
    "averaged-drive": 1,
    "averaged-drive-nonlinear": 1,
    "stiff-drive": 4,
}


# --- (a) scipy solve_ivp, restarted every sample ----------------------------------
def scipy_ivp(variant, method="Radau", rtol=BASELINE_RTOL, atol=BASELINE_ATOL,
              n_samples=None):
    n_samples = dm.N_SAMPLES if n_samples is None else n_samples
    p = dm.params(variant)
    y = np.array(dm.Y0, dtype=float)
    integ = 0.0
    out = np.empty(n_samples + 1)
    for k in range(n_samples):
        t0 = k * dm.TS
        out[k] = y[dm.IDX_WL]
        d, integ = dm.pi_update(dm.w_ref(t0) - y[dm.IDX_WL], integ)
        sol = solve_ivp(dm.rhs, (t0, t0 + dm.TS), y, method=method,
                        rtol=rtol, atol=atol, args=(d, p))
        if not sol.success:
            raise RuntimeError(f"solve_ivp {method} failed at t={t0}: {sol.message}")
        y = sol.y[:, -1]
    out[-1] = y[dm.IDX_WL]
    return np.arange(n_samples + 1) * dm.TS, out


# --- (b) SUNDIALS CVODE via scikit-sundae, re-initialised every sample ---------------
def cvode(variant, rtol=BASELINE_RTOL, atol=BASELINE_ATOL, n_samples=None):
    from sksundae.cvode import CVODE

    n_samples = dm.N_SAMPLES if n_samples is None else n_samples
    p = dm.params(variant)
    duty = [0.0]  # mutable user data: the held duty

    def f(t, y, yp, ud):
        yp[:] = dm.rhs(t, y, ud[0], p)

    solver = CVODE(f, userdata=duty, method="BDF", linsolver="dense",
                   rtol=rtol, atol=atol)
    y = np.array(dm.Y0, dtype=float)
    integ = 0.0
    out = np.empty(n_samples + 1)
    for k in range(n_samples):
        t0 = k * dm.TS
        t1 = t0 + dm.TS
        out[k] = y[dm.IDX_WL]
        duty[0], integ = dm.pi_update(dm.w_ref(t0) - y[dm.IDX_WL], integ)
        solver.init_step(t0, y)
        sol = solver.step(t1, tstop=t1)
        if not sol.success:
            raise RuntimeError(f"CVODE failed at t={t0}: {sol.message}")
        y = np.array(sol.y, dtype=float).reshape(-1)
    out[-1] = y[dm.IDX_WL]
    return np.arange(n_samples + 1) * dm.TS, out


# --- (c) the floor: compiled fixed-step RK4 ---------------------------------------------
@numba.njit(cache=True)
def _rk4_loop(p, n_samples, ts, substeps, y0):
    n = y0.shape[0]
    y = y0.copy()
    k1 = np.empty(n)
    k2 = np.empty(n)
    k3 = np.empty(n)
    k4 = np.empty(n)
    tmp = np.empty(n)
    out = np.empty(n_samples + 1)
    h = ts / substeps
    integ = 0.0
    for k in range(n_samples):
        out[k] = y[2]
        d, integ = dm.pi_update_nb(dm.w_ref_nb(k * ts) - y[2], integ)
        for _ in range(substeps):
            dm.rhs_nb(y, d, p, k1)
            for j in range(n):
                tmp[j] = y[j] + 0.5 * h * k1[j]
            dm.rhs_nb(tmp, d, p, k2)
            for j in range(n):
                tmp[j] = y[j] + 0.5 * h * k2[j]
            dm.rhs_nb(tmp, d, p, k3)
            for j in range(n):
                tmp[j] = y[j] + h * k3[j]
            dm.rhs_nb(tmp, d, p, k4)
            for j in range(n):
                y[j] += h / 6.0 * (k1[j] + 2.0 * k2[j] + 2.0 * k3[j] + k4[j])
    out[n_samples] = y[2]
    return out


def rk4_floor(variant, substeps=None, n_samples=None):
    n_samples = dm.N_SAMPLES if n_samples is None else n_samples
    if substeps is None:
        substeps = FLOOR_SUBSTEPS[variant]
    p = tuple(float(x) for x in dm.params(variant))
    out = _rk4_loop(p, n_samples, dm.TS, int(substeps),
                    np.array(dm.Y0, dtype=float))
    return np.arange(n_samples + 1) * dm.TS, out


def find_stable_substeps(variant, target_error=1e-6, max_substeps=1024):
    """Smallest RK4 substep count per sample that is finite and within target."""
    _, ref = reference(variant)
    n = 1
    while n <= max_substeps:
        _, w = rk4_floor(variant, n)
        if np.all(np.isfinite(w)):
            err = np.max(np.abs(w - ref)) / (np.max(ref) - np.min(ref))
            if err <= target_error:
                return n, err
        n += 1
    raise RuntimeError("no stable substep count found")


# --- (d) tight reference, cached -------------------------------------------------------------
# The reference is the same compiled RK4 loop as the floor with many equal substeps per sample
# (the integrator is restarted at every sample exactly like every baseline, so the reference
# solves the same sampled-data problem).  Its error is estimated in the same run by Richardson
# extrapolation against half the substeps: for a method of order 4,
#     w_N - w_exact ~ (w_N - w_{N/2}) / (2**4 - 1).
# bench_drive asserts that this estimate is below REF_MARGIN times the smallest baseline error.
REF_SUBSTEPS = {
    "averaged-drive": 64,
    "averaged-drive-nonlinear": 64,
    "stiff-drive": 256,
}
REF_ORDER = 4
REF_MARGIN = 1e-3


def _cache_key(variant):
    """Hash of everything the reference depends on (not comments/docs)."""
    import inspect

    h = hashlib.sha1()
    for fn in (dm.rhs_nb.py_func, dm.pi_update, dm.w_ref, _rk4_loop.py_func, rk4_floor):
        h.update(inspect.getsource(fn).encode())
    consts = {k: v for k, v in vars(dm).items()
              if k.isupper() and isinstance(v, (int, float, tuple))}
    h.update(repr(sorted(consts.items())).encode())
    h.update(repr(tuple(dm.params(variant))).encode())
    h.update(repr((variant, REF_SUBSTEPS[variant], REF_ORDER, "rk4-richardson")).encode())
    return h.hexdigest()[:16]


def reference_error_estimate(w_fine, w_half):
    """Richardson estimate of max |w_fine - w_exact| / span(w_fine) (RK4: divide by 2**4 - 1)."""
    span = float(np.max(w_fine) - np.min(w_fine))
    return float(np.max(np.abs(w_fine - w_half)) / (2 ** REF_ORDER - 1) / span)


def reference(variant, verbose=False, with_estimate=False):
    """Reference (t, w_L): RK4 with REF_SUBSTEPS[variant] substeps per sample, cached.

    With ``with_estimate`` returns ``(t, w_L, estimated relative error)``; the
    estimate (Richardson, against half the substeps) is computed together with
    the reference and cached beside it.
    """
    path = CACHE_DIR / f"ref_{variant}_{_cache_key(variant)}.npz"
    if path.exists():
        data = np.load(path)
        t, w, est = data["t"], data["w_L"], float(data["err_est"])
    else:
        n_sub = REF_SUBSTEPS[variant]
        t0 = time.perf_counter()
        t, w = rk4_floor(variant, n_sub)
        _, w_half = rk4_floor(variant, n_sub // 2)
        if not (np.all(np.isfinite(w)) and np.all(np.isfinite(w_half))):
            raise RuntimeError(f"reference for {variant}: RK4 with {n_sub} substeps is not finite")
        est = reference_error_estimate(w, w_half)
        CACHE_DIR.mkdir(exist_ok=True)
        tmp = path.with_suffix(f".tmp{os.getpid()}.npz")
        np.savez(tmp, t=t, w_L=w, err_est=est)
        os.replace(tmp, path)
        if verbose:
            print(f"  reference for {variant}: RK4, {n_sub} substeps/sample (h = {dm.TS / n_sub:.3g} s), "
                  f"{time.perf_counter() - t0:.2f} s (cached afterwards)", flush=True)
    if verbose:
        print(f"  reference error estimate (Richardson vs {REF_SUBSTEPS[variant] // 2} substeps): "
              f"{est:.3e}", flush=True)
    return (t, w, est) if with_estimate else (t, w)
