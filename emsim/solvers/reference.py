"""The reference backend: scipy's Radau stepping the differential rows, algebraic rows solved inside f.

It is deliberately simple and slow (Python per step); it exists to cross-check
the compiled integrator on every system. It calls the same generated system
functions, so it checks the solver, not the model.

Algorithm: between time events, ``scipy.integrate.Radau`` advances the
differential and quadrature rows (``solve_ivp``'s own Radau stepper, driven
step by step); at every right-hand-side call the algebraic rows are solved by
Newton's method for the algebraic variables. State events are detected after
each step (a crossing from strictly negative to non-negative counts as rising,
strictly positive to non-positive as falling) and located with
``scipy.optimize.brentq`` on the step's dense output. Simultaneous events are
applied in index order, then time events due at the same instant. A function
that has just fired restarts from "zero", so only a later, real crossing
triggers it again (otherwise round-off at the root re-fires it forever).
"""
from __future__ import annotations

import math

import numpy as np
from scipy.integrate import Radau
from scipy.optimize import brentq

from ..assembly.diagnose import nonfinite_culprit
from ..errors import SolverError
from .base import Solver, record_columns

KIND_TIME, KIND_STATE = 1, 2


class ScipyReference(Solver):
    """scipy Radau on the differential rows with the algebraic rows solved inside f.

    Parameters
    ----------
    rtol : float
        Relative tolerance.
    atol_scale : float, optional
        Absolute tolerance per state = ``atol_scale`` x the state's nominal value (default ``rtol``).
    max_step : float
        Largest step, s.
    """

    name = "scipy-reference"

    def __init__(self, *, rtol: float = 1e-8, atol_scale: float | None = None, max_step: float = math.inf,
                 max_events_at_instant: int = 50):
        self.rtol = float(rtol)
        self.atol_scale = float(rtol if atol_scale is None else atol_scale)
        self.max_step = float(max_step)
        self.max_events_at_instant = int(max_events_at_instant)

    def settings(self) -> dict:
        return {"solver": self.name, "method": "Radau IIA (scipy.integrate.Radau), algebraic rows by Newton",
                "rtol": self.rtol, "atol_scale": self.atol_scale, "max_step": self.max_step}

    def run(self, problem, t_end: float, *, out_dt: float, sink, columns=None) -> dict:
        return _Run(self, problem, float(t_end), float(out_dt), sink, columns).go()


class _Run:
    def __init__(self, opts, prob, t_end, out_dt, sink, columns=None):
        self.o, self.prob, self.t_end, self.out_dt, self.sink = opts, prob, t_end, out_dt, sink
        self.cols = record_columns(columns, prob.n_record, opts.name)
        self.y = prob.y0.astype(float).copy()
        self.m = prob.m0.copy()
        self.d = prob.d0.copy()
        self.w = np.zeros(prob.n_work)
        n = prob.n_main
        self.diff = np.flatnonzero(prob.mass[:n] != 0.0)
        self.alg = np.flatnonzero(prob.mass[:n] == 0.0)
        self.quad = np.arange(n, n + prob.n_quad)
        self.ode_rows = np.concatenate([self.diff, self.quad])
        self.dy = np.zeros(n)
        self.dq = np.zeros(prob.n_quad)
        self.g = np.zeros(max(prob.n_events, 1))
        self.row = np.zeros(prob.n_record)
        self.stats = {"steps": 0, "rejected": 0, "rhs_evals": 0, "jacobians": 0, "factorizations": 0,
                      "newton_iterations": 0, "time_events": 0, "state_events": 0}
        self.k_out = 0

    # -- algebraic rows ---------------------------------------------------------------
    def solve_algebraic(self, t, y):
        mod, p = self.prob.module, self.prob.p
        alg = self.alg
        mod.system_rhs(t, y, p, self.m, self.d, self.w, self.dy)
        self.stats["rhs_evals"] += 1
        if alg.size == 0:
            return
        nominal = self.prob.nominal
        for _ in range(30):
            res = self.dy[alg].copy()
            jac = np.empty((alg.size, alg.size))
            for j, col in enumerate(alg):
                h = 1e-7 * max(abs(y[col]), nominal[col])
                keep = y[col]
                y[col] = keep + h
                mod.system_rhs(t, y, p, self.m, self.d, self.w, self.dy)
                jac[:, j] = (self.dy[alg] - res) / h
                y[col] = keep
            self.stats["rhs_evals"] += alg.size + 1
            step = np.linalg.solve(jac, res)
            y[alg] -= step
            mod.system_rhs(t, y, p, self.m, self.d, self.w, self.dy)
            if np.all(np.abs(step) <= 1e-12 * np.maximum(np.abs(y[alg]), nominal[alg])):
                return
        raise SolverError(f"reference backend: algebraic rows did not converge at t = {t:.9g} s")

    def full_state(self, t, z):
        y = self.y.copy()
        y[self.ode_rows] = z
        self.solve_algebraic(t, y)
        self.y_alg_guess = y[self.alg].copy()
        return y

    def f(self, t, z):
        y = self.y_work
        y[self.ode_rows] = z
        self.solve_algebraic(t, y)
        self.prob.module.system_quad(t, y, self.prob.p, self.m, self.d, self.w, self.dq)
        out = np.empty(z.size)
        out[: self.diff.size] = self.dy[self.diff]
        out[self.diff.size:] = self.dq
        if not np.all(np.isfinite(out)):
            bad = self.ode_rows[np.flatnonzero(~np.isfinite(out))[0]]
            culprit = nonfinite_culprit(self.prob, t, y, self.m, self.d) or self.prob.row_owner[bad]
            raise SolverError(f"non-finite value from {culprit} at t = {t:.9g} s (first seen in the derivative "
                              f"of '{self.prob.state_names[bad]}'); state: "
                              + ", ".join(f"{n}={v:.6g}" for n, v in zip(self.prob.state_names, y)))
        return out

    def events_at(self, t, z):
        y = self.y_work.copy()
        y[self.ode_rows] = z
        self.solve_algebraic(t, y)
        self.prob.module.system_events(t, y, self.prob.p, self.m, self.d, self.w, self.g)
        return self.g[: self.prob.n_events].copy()

    # -- output -------------------------------------------------------------------------
    def record_until(self, t_reached, dense, t_from, inclusive=True):
        """Rows up to ``t_reached``; exclusive when events are about to apply there (contract 5)."""
        rows_t, rows = [], []
        while True:
            tk = self.prob.t0 + self.k_out * self.out_dt
            if tk > self.t_end * (1 + 1e-14) + 1e-300:
                break
            if (tk > t_reached) if inclusive else (tk >= t_reached):
                break
            z = dense(tk) if (dense is not None and tk > t_from) else self.y[self.ode_rows]
            y = self.y.copy()
            y[self.ode_rows] = z
            self.y_work = y
            self.solve_algebraic(tk, y)
            self.prob.module.system_record(tk, y, self.prob.p, self.m, self.d, self.w, self.row)
            rows_t.append(tk)
            rows.append(self.row.copy() if self.cols is None else self.row[self.cols])
            self.k_out += 1
        if rows:
            self.sink.rows(np.array(rows_t), np.array(rows))

    def log(self, t, comps, kind, index):
        n = len(comps)
        self.sink.events(np.full(n, t), np.asarray(comps, dtype=np.int64), np.full(n, kind, dtype=np.int64),
                         np.asarray(index, dtype=np.int64))

    # -- main loop ----------------------------------------------------------------------
    def go(self):
        prob, mod = self.prob, self.prob.module
        t = prob.t0
        self.y_work = self.y.copy()
        self.solve_algebraic(t, self.y)
        self.record_until(t, None, t)
        atol = self.o.atol_scale * prob.nominal[self.ode_rows]
        last_event_t, at_instant = None, 0
        rearm: list = []
        while t < self.t_end:
            t_bound = min(mod.system_next_time(t, prob.p, self.m, self.d), self.t_end)
            self.y_work = self.y.copy()
            z0 = self.y[self.ode_rows].copy()
            stepper = Radau(self.f, t, z0, t_bound, rtol=self.o.rtol, atol=atol, max_step=self.o.max_step)
            g_old = self.events_at(t, z0) if prob.n_events else None
            if g_old is not None and rearm:
                g_old[rearm] = 0.0  # a function that just fired counts as sitting on zero: no re-trigger
            rearm = []
            event_hit = None
            while stepper.status == "running":
                t_prev = stepper.t
                msg = stepper.step()
                if stepper.status == "failed":
                    raise SolverError(f"reference backend failed at t = {stepper.t:.9g} s: {msg}; state: "
                                      + ", ".join(f"{n}={v:.6g}" for n, v in zip(prob.state_names, self.y)))
                self.stats["steps"] += 1
                dense = stepper.dense_output()
                if prob.n_events:
                    g_new = self.events_at(stepper.t, stepper.y)
                    hits = _crossings(g_old, g_new, prob.event_direction)
                    if hits.size:
                        times = []
                        for k in hits:
                            fn = lambda s, k=k: self.events_at(s, dense(s))[k]
                            times.append(brentq(fn, t_prev, stepper.t, xtol=1e-14 * max(1.0, abs(t_prev)),
                                                rtol=4 * np.finfo(float).eps))
                        t_ev = min(times)
                        tol = 1e-12 * max(1.0, abs(t_ev))
                        event_hit = (t_ev, [int(k) for k, te in zip(hits, times) if te <= t_ev + tol])
                        self.record_until(t_ev, dense, t_prev, inclusive=False)
                        self.y[self.ode_rows] = dense(t_ev)
                        t = t_ev
                        break
                    g_old = g_new
                at_bound = stepper.t >= t_bound and t_bound < self.t_end
                self.record_until(stepper.t, dense, t_prev, inclusive=not at_bound)
                t = stepper.t
                self.y[self.ode_rows] = stepper.y
            self.stats["jacobians"] += stepper.njev
            self.stats["factorizations"] += stepper.nlu
            self.y_work = self.y.copy()
            self.solve_algebraic(t, self.y)
            if event_hit is not None:
                t_ev, ks = event_hit
                comps = [mod.system_on_event(k, t_ev, self.y, prob.p, self.m, self.d, self.w) for k in ks]
                rearm = ks
                self.stats["state_events"] += len(ks)
                self.log(t_ev, comps, KIND_STATE, ks)
                at_instant = at_instant + len(ks) if last_event_t is not None and abs(t_ev - last_event_t) <= 1e-12 * max(1, abs(t_ev)) else len(ks)
                last_event_t = t_ev
                if at_instant > self.o.max_events_at_instant:
                    raise SolverError(f"chattering: {at_instant} events at t = {t_ev:.12g} s "
                                      f"({sorted({prob.event_owner[k] for k in ks})})")
                self.solve_algebraic(t, self.y)
            if t >= t_bound and t_bound < math.inf and mod.system_next_time(t, prob.p, self.m, self.d) <= t:
                log = np.zeros(max(len(prob.component_names), 1), dtype=np.int64)
                n = mod.system_at_time(t, self.y, prob.p, self.m, self.d, self.w, log)
                self.stats["time_events"] += n
                self.log(t, list(log[:n]), KIND_TIME, [-1] * n)
                self.solve_algebraic(t, self.y)
            self.y_work = self.y.copy()
            self.record_until(t, None, t)
        self.final_y = self.y.copy()
        return dict(self.stats)


def _crossings(g_old, g_new, direction):
    rising = (g_old < 0) & (g_new >= 0)
    falling = (g_old > 0) & (g_new <= 0)
    hit = np.where(direction > 0, rising, np.where(direction < 0, falling, rising | falling))
    return np.flatnonzero(hit)
