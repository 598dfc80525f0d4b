"""Python driver of the compiled integrators: Radau IIA (:class:`Radau5`) and Dormand-Prince 5(4)
(:class:`DormandPrince5`), two methods of one compiled step loop.

The whole step loop runs in numba (:func:`emsim.solvers.radau_kernel.radau_integrate`),
compiled and cached once for all systems: it receives the generated system
functions of a problem as C callbacks (see :mod:`emsim.solvers.abi`). This driver owns every array the
kernel keeps between calls, calls the kernel until ``t_end``, hands the output
rows and the event log to the sink in batches and turns failure codes into
:class:`emsim.errors.SolverError`.

``radau_integrate`` signature and arguments (all arrays are modified in place
where noted)::

    status = radau_integrate(
        rhs_fn, events_fn, on_event_fn, next_time_fn, at_time_fn, start_fn, record_fn,
        jacobian_fn, stages_fn, rhs_quad_fn, explicit_stages_fn,
                      # the problem's callbacks, abi.callbacks(problem.module), in abi.ORDER
        t_end,        # float: integrate up to and including this time
        y,            # float64[n_main + n_quad]   state, in/out
        p,            # float64[:]                 parameters
        m,            # int64[:]                   modes, in/out
        d,            # float64[:]                 discrete states, in/out
        w,            # float64[:]                 work array of the generated code
        mass,         # float64[n_main]            diagonal of M (1 differential, 0 algebraic)
        atol,         # float64[n_main + n_quad]   absolute tolerance per state
        nominal,      # float64[n_main]            magnitude for finite-difference increments
        event_dir,    # int64[n_events]            +1 rising, -1 falling, 0 both
        n_main,       # int: rows in the Newton system
        opt,          # float64[8]: rtol, event_tol, max_step, out_t0, out_dt,
                      #             fixed step (0 = adaptive), h0 (0 = automatic),
                      #             Newton stopping tolerance (0 = automatic)
        iopt,         # int64[7]:  max_events_at_instant, max_steps (0 = no limit),
                      #            call system_start on the first call (1) or not (0),
                      #            check event functions at the stage points too (1) or not (0),
                      #            method: 0 Radau IIA, 1 Dormand-Prince 5(4),
                      #            index in w of the currency flag (-1 none; see abi.py),
                      #            explicit stages in one callback (1) or one per stage (0)
        buf,          # float64[rows, n_record or len(cols)]  output rows, filled from ti[1]
        buf_t,        # float64[rows]              their times
        cols,         # int64[k]                   record columns kept in buf (empty: all of them)
        log_t, log_comp, log_kind, log_index,   # event log: time, component, kind (1 time,
                      #             2 state), state-event index (-1 for time events)
        comp_scratch, # int64[>= components]       list system_at_time writes into
        tf,           # float64[16] persistent: t, next h, h of LU, controller memory, ...
        ti,           # int64[16]   persistent: next row index k_out, rows filled, log
                      #             entries filled, flags (started, J valid, LU valid, ...)
        jac,          # float64[n_main, n_main]    Jacobian (persistent)
        lu_r,         # float64[n_main, n_main]    LU of (gamma/h) M - J (persistent)
        lu_c,         # complex128[n_main, n_main] LU of ((alpha - i beta)/h) M - J (persistent)
        lu_a,         # float64[n_main, 2*n_main]  J_zz^-1 and J_zz^-1 J_zx of J's algebraic block (persistent)
        piv,          # int64[3, n_main]           pivots of the real and complex factorisations (row 2 unused)
        f0,           # float64[n_main]            f(t, y) at the current state (persistent)
        g_old,        # float64[n_events]          event functions at the current state
        qd,           # float64[4, n_main+n_quad]  dense output of the last step
        fq0,          # float64[max(n_quad, 1)]    quadrature integrands at the current state
                      #                            (Dormand-Prince only; persistent)
        y_fail,       # float64[n_main + n_quad]   state where a non-finite value appeared
        stats,        # int64[10]: steps, rejected, rhs evaluations, Jacobians, LU
                      #   factorisations, Newton iterations, time events, state events,
                      #   event-function evaluations, quadrature evaluations
        scratch)      # tuple from radau_scratch(n_main, n_tot, n_events, n_modes): work
                      #   arrays allocated once by the driver (contents not kept)

The kernel works on borrowed views of all these arrays (no reference
counting in the step loop), so the driver must keep every one of them alive
until the call returns (it does: they are attributes of the run).

On the first call (``ti[3] == 0``) the kernel calls ``system_start`` only when
``iopt[2] == 1``, then makes the algebraic rows consistent, evaluates the event
functions and asks for the first time event. The driver sets ``iopt[2] = 1``
only for a problem with ``problem.start_applied = False``: the producer of a
:class:`Problem` normally applies ``system_start`` to ``y0``/``m0``/``d0``
itself (assembly does, in ``assemble()``), and calling it twice would sample
controllers twice at ``t0``.

Status: 0 ``t_end`` reached; 1 output buffer full (or the next step's rows
would not fit); 2 event log nearly full; -1 step size too small; -2 Newton
iteration failed repeatedly (or algebraic rows could not be made consistent);
-3 NaN/inf from the system functions; -4 chattering; -5 ``max_steps`` reached.
On 1 and 2 the driver empties the buffers (resets ``ti[1]``, ``ti[2]``) and
calls again; nothing is re-evaluated on such a restart.
"""
from __future__ import annotations

import math

import numpy as np

from ..assembly.diagnose import nonfinite_culprit
from ..errors import SolverError
from . import abi
from .base import Solver, record_columns
from .radau_kernel import radau_integrate, radau_scratch

STATUS_TEXT = {
    -1: "step size too small",
    -2: "Newton iteration failed repeatedly",
    -3: "non-finite value (NaN or inf) from the system equations",
    -4: "chattering: too many events without time advancing",
    -5: "maximum number of steps reached",
}

STAT_NAMES = ("steps", "rejected", "rhs_evals", "jacobians", "factorizations",
              "newton_iterations", "time_events", "state_events", "event_fn_evals", "quad_evals")


class Radau5(Solver):
    """Radau IIA, order 5 (Hairer & Wanner, Solving ODEs II, IV.8), compiled step loop.

    Keyword-only options
    --------------------
    rtol : relative tolerance (also sets the Newton stopping tolerance).
    atol_scale : per-state absolute tolerance is ``atol_scale * problem.nominal``;
        None means the same as ``rtol``.
    h0 : initial step; None chooses one from the size of y and y'.
    max_step : largest step.
    fixed_step : if given, every step has this size (clipped only to land on
        events and ``t_end``) and no error test is made (for convergence studies).
    batch_rows : rows per batch handed to the sink.
    event_log_size : event-log entries per batch (a full log returns to Python once to empty
        it: 16384 holds the time events of a 1 kHz controller for 16 s).
    max_events_at_instant : more events than this inside a window of
        ``1000 * event_tol * max(1, |t|)`` is reported as chattering.
    event_tol : relative tolerance of located state-event times.
    max_steps : stop with an error after this many steps (0: no limit).
    newton_tol : stopping tolerance of the Newton iteration, relative to the error
        weights (Hairer & Wanner's ``fnewt``); None means
        ``max(10 eps / rtol, min(0.03, sqrt(rtol)))``.
    event_stage_checks : also evaluate the event functions at the first two
        stage points of every step (default False: only at the step end, the
        step start being known). With the checks, a function that crosses zero
        and comes back inside one step is still seen when a stage point falls
        between the crossings, at two more event-function evaluations per step;
        without them such a double crossing needs a ``max_step`` to be seen.
    """

    name = "radau5"
    method_code = 0   # iopt[4] of the kernel
    #: Dormand-Prince only: the stages of a step through the module's ``explicit_stages``
    #: callback (True) or one callback per stage (False: same results, kept for A/B measurements)
    one_call_stages = True

    def __init__(self, *, rtol=1e-6, atol_scale=None, h0=None, max_step=math.inf, fixed_step=None,
                 batch_rows=4096, event_log_size=16384, max_events_at_instant=50, event_tol=1e-12,
                 max_steps=0, event_stage_checks=False, newton_tol=None):
        if not (0.0 < rtol < 1.0):
            raise ValueError(f"{type(self).__name__}: rtol must lie in (0, 1), got {rtol!r}")
        if atol_scale is not None and not (atol_scale > 0.0 and math.isfinite(atol_scale)):
            raise ValueError(f"{type(self).__name__}: atol_scale must be positive and finite, got {atol_scale!r}")
        if h0 is not None and not (h0 > 0.0 and math.isfinite(h0)):
            raise ValueError(f"{type(self).__name__}: h0 must be positive and finite, got {h0!r}")
        if not max_step > 0.0:
            raise ValueError(f"{type(self).__name__}: max_step must be positive, got {max_step!r}")
        if fixed_step is not None and not (fixed_step > 0.0 and math.isfinite(fixed_step)):
            raise ValueError(f"{type(self).__name__}: fixed_step must be positive and finite, got {fixed_step!r}")
        if int(batch_rows) < 1 or int(event_log_size) < 1 or int(max_events_at_instant) < 1:
            raise ValueError(f"{type(self).__name__}: batch_rows, event_log_size and max_events_at_instant must be >= 1")
        if not (0.0 < event_tol < 1e-3):
            raise ValueError(f"{type(self).__name__}: event_tol must lie in (0, 1e-3), got {event_tol!r}")
        self.rtol = float(rtol)
        self.atol_scale = float(rtol if atol_scale is None else atol_scale)
        self.h0 = None if h0 is None else float(h0)
        self.max_step = float(max_step)
        self.fixed_step = None if fixed_step is None else float(fixed_step)
        self.batch_rows = int(batch_rows)
        self.event_log_size = int(event_log_size)
        self.max_events_at_instant = int(max_events_at_instant)
        self.event_tol = float(event_tol)
        self.max_steps = int(max_steps)
        self.event_stage_checks = bool(event_stage_checks)
        if newton_tol is not None and not (0.0 < newton_tol < 1.0):
            raise ValueError(f"{type(self).__name__}: newton_tol must lie in (0, 1), got {newton_tol!r}")
        self.newton_tol = None if newton_tol is None else float(newton_tol)

    def settings(self) -> dict:
        return {
            "method": "Radau IIA order 5 (Hairer & Wanner, Solving ODEs II, IV.8)",
            "rtol": self.rtol, "atol_scale": self.atol_scale, "h0": self.h0,
            "max_step": self.max_step, "fixed_step": self.fixed_step,
            "batch_rows": self.batch_rows, "event_log_size": self.event_log_size,
            "max_events_at_instant": self.max_events_at_instant, "event_tol": self.event_tol,
            "max_steps": self.max_steps, "event_stage_checks": self.event_stage_checks,
            "newton_tol": self.newton_tol,
        }

    def start(self, problem, *, out_dt: float, out_t0: float | None = None, columns=None) -> "RadauRun":
        """Prepare an integration that :meth:`RadauRun.advance` can continue piece by piece."""
        return RadauRun(self, problem, out_dt=out_dt, out_t0=out_t0, columns=columns)

    def run(self, problem, t_end: float, *, out_dt: float, sink, columns=None) -> dict:
        run = self.start(problem, out_dt=out_dt, columns=columns)
        run.advance(t_end, sink)
        return run.stats()


class DormandPrince5(Radau5):
    """Dormand-Prince 5(4), explicit, for non-stiff systems, in the same compiled step loop.

    J. R. Dormand and P. J. Prince, "A family of embedded Runge-Kutta formulae",
    J. Comput. Appl. Math. 6 (1980) 19-26; implementation as in Hairer, Norsett &
    Wanner, *Solving Ordinary Differential Equations I*, II.4-II.5 (error of the
    embedded 4th-order solution, PI step-size control, 4th-order dense output, the
    last stage reused as the next step's first).

    Same options, events, outputs, energy audit and diagnostics as :class:`Radau5`
    (``newton_tol`` does not apply). Algebraic rows (ideal sources, bridges, rigid
    couplings) are solved for at every stage with the differential rows fixed, by the
    simplified Newton iteration that makes the initial state consistent, so each stage
    derivative lies on the constraint; between step ends they are interpolated linearly.

    Explicit means no Newton iteration on the whole system: the Jacobian serves only the
    algebraic rows' small solve (evaluated when their prediction misses, at most once per
    step), so a step costs less than a Radau step; but the step size is bounded by stability,
    about 3.3 / |lambda| for the fastest eigenvalue lambda of the system. For a stiff
    system (an armature of tens of microhenries, a stiff coupling) use :class:`Radau5`:
    this method then still gets the right answer, with very many small steps.
    """

    name = "dopri5"
    method_code = 1

    def __init__(self, **options):
        if "newton_tol" in options:
            raise TypeError("DormandPrince5: newton_tol does not apply to an explicit method")
        super().__init__(**options)

    def settings(self) -> dict:
        out = super().settings()
        out.pop("newton_tol")
        out["method"] = ("Dormand-Prince 5(4) (Dormand & Prince 1980; Hairer, Norsett & Wanner, "
                         "Solving ODEs I, II.5)")
        return out


_kernel_entry = None


def _integrate(*args):
    """``radau_integrate(*args)``, from the second call on without numba's dispatch.

    Every call passes the same argument types (arrays this module builds, callbacks of the
    fixed ABI signatures, which numba asserts when it unboxes them), so the one compiled
    overload is called directly: dispatch would type the nine callbacks again on every
    call, about a quarter of a millisecond each time.
    """
    global _kernel_entry
    if _kernel_entry is not None:
        return _kernel_entry(*args)
    status = radau_integrate(*args)
    if len(radau_integrate.overloads) == 1:
        _kernel_entry = next(iter(radau_integrate.overloads.values())).entry_point
    return status


def _check(cond, problem, msg, who="Radau5"):
    if not cond:
        raise SolverError(f"{who}: invalid problem ({_problem_label(problem)}): {msg}")


def _problem_label(problem):
    desc = getattr(problem, "description", None) or {}
    return str(desc.get("name", getattr(problem.module, "__name__", "problem")))


class RadauRun:
    """One integration of one problem; owns the kernel's persistent arrays."""

    def __init__(self, solver: Radau5, problem, *, out_dt: float, out_t0: float | None = None, columns=None):
        self.solver = solver
        self.problem = problem
        mod = problem.module
        who = type(solver).__name__
        _check(all(hasattr(mod, f"cb_{n}") for n in abi.ORDER), problem,
               "its generated module does not export the system callbacks (append abi.export_source())", who=who)
        self.callbacks = abi.callbacks(mod)
        n_main, n_quad, n_ev = int(problem.n_main), int(problem.n_quad), int(problem.n_events)
        n_tot = n_main + n_quad
        _check(n_main >= 1 and n_quad >= 0 and n_ev >= 0, problem,
               f"sizes n_main={n_main}, n_quad={n_quad}, n_events={n_ev}", who=who)
        y0 = np.asarray(problem.y0, dtype=np.float64)
        _check(y0.shape == (n_tot,), problem, f"y0 has shape {y0.shape}, expected ({n_tot},)", who=who)
        bad = np.flatnonzero(~np.isfinite(y0))
        names = list(problem.state_names) or [f"y[{i}]" for i in range(n_tot)]
        _check(len(names) == n_tot, problem, f"{len(names)} state names for {n_tot} states", who=who)
        _check(bad.size == 0, problem,
               "non-finite initial state " + ", ".join(f"{names[i]}={y0[i]}" for i in bad[:10]), who=who)
        mass = np.asarray(problem.mass, dtype=np.float64)
        _check(mass.shape == (n_main,), problem, f"mass has shape {mass.shape}, expected ({n_main},)", who=who)
        _check(bool(np.all((mass == 0.0) | (mass == 1.0))), problem, "mass entries must be 0 or 1", who=who)
        nominal = np.asarray(problem.nominal, dtype=np.float64)
        _check(nominal.shape == (n_tot,), problem, f"nominal has shape {nominal.shape}, expected ({n_tot},)", who=who)
        badn = np.flatnonzero(~(np.isfinite(nominal) & (nominal > 0.0)))
        _check(badn.size == 0, problem,
               "nominal magnitudes must be positive and finite: "
               + ", ".join(f"{names[i]}={nominal[i]}" for i in badn[:10]), who=who)
        ev_dir = np.asarray(problem.event_direction, dtype=np.int64)
        _check(ev_dir.shape == (n_ev,), problem, f"event_direction has shape {ev_dir.shape}, expected ({n_ev},)", who=who)
        _check(bool(np.all(np.isin(ev_dir, (-1, 0, 1)))), problem, "event_direction entries must be -1, 0 or +1", who=who)
        p = np.ascontiguousarray(problem.p, dtype=np.float64).copy()
        _check(not np.isnan(p).any(), problem, "parameter vector p contains NaN", who=who)
        if not (out_dt > 0.0 and math.isfinite(out_dt)):
            raise SolverError(f"{who}: out_dt must be positive and finite, got {out_dt!r}")
        self.names = names
        self.n_main, self.n_quad, self.n_events = n_main, n_quad, n_ev
        self.y = y0.copy()
        self.p = p
        self.m = np.ascontiguousarray(problem.m0, dtype=np.int64).copy()
        self.d = np.ascontiguousarray(problem.d0, dtype=np.float64).copy()
        self.w = np.zeros(max(int(problem.n_work), 1))
        self.mass = mass.copy()
        self.atol = solver.atol_scale * nominal
        self.nominal = nominal[:n_main].copy()
        self.event_dir = ev_dir.copy()
        t0 = float(problem.t0)
        self.opt = np.array([solver.rtol, solver.event_tol, solver.max_step,
                             t0 if out_t0 is None else float(out_t0), float(out_dt),
                             solver.fixed_step or 0.0, solver.h0 or 0.0, solver.newton_tol or 0.0])
        call_start = 0 if getattr(problem, "start_applied", True) else 1
        fresh_slot = int(getattr(problem, "fresh_slot", -1))
        _check(-1 <= fresh_slot < max(int(problem.n_work), 1), problem,
               f"fresh_slot {fresh_slot} lies outside the work array (length {problem.n_work}; -1 for none)", who=who)
        # the module's explicit_stages is written out for one row layout (stage_source.py)
        layout = getattr(mod, "_abi_explicit_layout", None)
        expected = (tuple(int(i) for i in np.flatnonzero(mass == 0.0)), n_main, n_quad)
        _check(layout == expected, problem,
               f"its module's explicit stages were generated for algebraic rows, n_main, n_quad = {layout}, "
               f"but the problem has {expected} (mass or sizes changed after the module was built)", who=who)
        self.iopt = np.array([solver.max_events_at_instant, solver.max_steps, call_start,
                              int(solver.event_stage_checks), solver.method_code, fresh_slot,
                              int(solver.one_call_stages)], dtype=np.int64)
        n_rec = int(problem.n_record)
        cols = record_columns(columns, n_rec, f"{who} ({_problem_label(problem)})")
        self.cols = np.zeros(0, dtype=np.int64) if cols is None else cols   # empty: every value
        # uninitialised: the kernel writes every row it hands out (zeroing a few MB per run was a
        # measurable part of a short run's cost)
        self.buf = np.empty((solver.batch_rows, self.cols.size or n_rec))
        self.buf_t = np.empty(solver.batch_rows)
        n_cs = max(16, len(problem.component_names) + 1)
        n_log = max(solver.event_log_size, n_ev + n_cs + 1)
        self.log_t = np.zeros(n_log)
        self.log_comp = np.zeros(n_log, dtype=np.int64)
        self.log_kind = np.zeros(n_log, dtype=np.int64)
        self.log_index = np.zeros(n_log, dtype=np.int64)
        self.comp_scratch = np.zeros(n_cs, dtype=np.int64)
        self.tf = np.zeros(16)
        self.tf[0] = t0
        self.ti = np.zeros(16, dtype=np.int64)
        self.jac = np.zeros((n_main, n_main))
        self.lu_r = np.zeros((n_main, n_main))
        self.lu_c = np.zeros((n_main, n_main), dtype=np.complex128)
        self.lu_a = np.zeros((n_main, 2 * n_main))   # see radau_algebraic_setup
        self.piv = np.zeros((3, n_main), dtype=np.int64)
        self.f0 = np.zeros(n_main)
        self.g_old = np.zeros(n_ev)
        self.qd = np.zeros((4, n_tot))   # row 3 stays 0 for Radau (cubic)
        self.fq0 = np.zeros(max(n_quad, 1))
        self.y_fail = np.zeros(n_tot)
        self.stats_array = np.zeros(10, dtype=np.int64)
        self.scratch = radau_scratch(n_main, n_tot, n_ev, self.m.shape[0], n_rec)

    @property
    def t(self) -> float:
        return float(self.tf[0])

    def stats(self) -> dict:
        return {name: int(v) for name, v in zip(STAT_NAMES, self.stats_array)}

    def advance(self, t_end: float, sink) -> dict:
        """Integrate to ``t_end`` (inclusive), feeding ``sink``; return the statistics so far."""
        t_end = float(t_end)
        if not math.isfinite(t_end) or t_end < self.t:
            raise SolverError(f"{type(self.solver).__name__}: t_end = {t_end!r} lies before the current time {self.t!r}")
        while True:
            self.ti[1] = 0
            self.ti[2] = 0
            status = _integrate(
                *self.callbacks, t_end, self.y, self.p, self.m, self.d, self.w, self.mass, self.atol, self.nominal,
                self.event_dir, self.n_main, self.opt, self.iopt, self.buf, self.buf_t, self.cols,
                self.log_t, self.log_comp, self.log_kind, self.log_index, self.comp_scratch,
                self.tf, self.ti, self.jac, self.lu_r, self.lu_c, self.lu_a, self.piv, self.f0,
                self.g_old, self.qd, self.fq0, self.y_fail, self.stats_array, self.scratch)
            nr, nl = int(self.ti[1]), int(self.ti[2])
            if nr:
                # handed over (solver contract 3): the next batch gets fresh, still untouched, memory
                sink.rows(self.buf_t[:nr], self.buf[:nr])
                self.buf, self.buf_t = np.empty_like(self.buf), np.empty_like(self.buf_t)
            if nl:
                sink.events(self.log_t[:nl], self.log_comp[:nl], self.log_kind[:nl], self.log_index[:nl])
                self.log_t, self.log_comp = np.empty_like(self.log_t), np.empty_like(self.log_comp)
                self.log_kind, self.log_index = np.empty_like(self.log_kind), np.empty_like(self.log_index)
            if status == 0:
                return self.stats()
            if status in (1, 2):
                continue
            raise self._failure(int(status))

    # ---- failure reports ----
    def _state_text(self, y):
        return ", ".join(f"{n}={v:.6g}" for n, v in zip(self.names, y))

    def _owner(self, row):
        owners = list(self.problem.row_owner)
        return owners[row] if 0 <= row < len(owners) else "?"

    def _failure(self, status: int) -> SolverError:
        pr = self.problem
        t = float(self.tf[0])
        h = float(self.tf[11])
        kind = STATUS_TEXT.get(status, f"unknown status {status}")
        info = int(self.ti[11])
        head = f"{type(self.solver).__name__} failed ({_problem_label(pr)}): {kind} at t = {t:.12g} s"
        if status in (-1, -2):
            head += f" (last step size tried {h:.3g} s)"
        lines = [head]
        y_report = self.y
        if status == -3:
            t_bad = float(self.tf[10])
            y_report = self.y_fail
            row, where = self._find_nonfinite(t_bad, self.y_fail)
            culprit = None
            if where == "right-hand-side":
                try:
                    culprit = nonfinite_culprit(pr, t_bad, self.y_fail, self.m, self.d)
                except Exception:  # the report must not hide the original failure
                    culprit = None
            if culprit:
                lines.append(f"non-finite value from {culprit} at t = {t_bad:.12g} s")
            if row >= 0:
                lines.append(f"first non-finite {where} row {row} (state {self.names[row]}, "
                             f"equation of {self._owner(row)}) at t = {t_bad:.12g} s")
            lines.append("state where it appeared: " + self._state_text(self.y_fail))
        elif status in (-1, -2) and 0 <= info < len(self.names):
            lines.append(f"largest error / correction on state {self.names[info]} "
                         f"(equation of {self._owner(info)})")
        elif status == -4:
            owners = list(pr.event_owner)
            if 0 <= info < len(owners):
                lines.append(f"event {info} ({owners[info]}) re-triggers: more than "
                             f"{self.solver.max_events_at_instant} events within "
                             f"{1e3 * self.solver.event_tol * max(1.0, abs(t)):.3g} s")
            else:
                lines.append(f"more than {self.solver.max_events_at_instant} events at one instant")
        elif status == -5:
            lines.append(f"max_steps = {self.solver.max_steps}")
        if y_report is self.y:
            lines.append("state: " + self._state_text(self.y))
        err = SolverError("\n  ".join(lines))
        err.status = status
        err.time = t
        return err

    def _find_nonfinite(self, t, y):
        """Row of the first non-finite value: in y itself, else in system_rhs, else in system_quad."""
        bad = np.flatnonzero(~np.isfinite(y))
        if bad.size:
            return int(bad[0]), "state"
        mod = self.problem.module
        w = self.w.copy()
        dy = np.zeros(self.n_main)
        try:
            mod.system_rhs(t, y.copy(), self.p, self.m.copy(), self.d.copy(), w, dy)
        except Exception:  # the report must not hide the original failure
            return -1, ""
        bad = np.flatnonzero(~np.isfinite(dy))
        if bad.size:
            return int(bad[0]), "right-hand-side"
        if self.n_quad:
            dq = np.zeros(self.n_quad)
            try:
                mod.system_quad(t, y.copy(), self.p, self.m.copy(), self.d.copy(), w, dq)
            except Exception:
                return -1, ""
            bad = np.flatnonzero(~np.isfinite(dq))
            if bad.size:
                return self.n_main + int(bad[0]), "quadrature"
        return -1, ""
