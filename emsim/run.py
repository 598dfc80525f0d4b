"""The run function: compose a system, a solver and a recorder; return results and the energy audit."""
from __future__ import annotations

import os
import time
from dataclasses import dataclass, field

import numpy as np

from . import __version__
from .assembly.assemble import assemble
from .assembly.problem import Problem
from .errors import ParameterError, SolverError
from .model.system import System
from .results.memory import MemoryRecorder
from .units import ureg

EVENT_KINDS = {1: "time", 2: "state"}


@dataclass
class RunResult:
    """What a run returns.

    Attributes
    ----------
    time : ndarray
        Output instants, s (empty when the run wrote to a file; read it with ``emsim.open_results``).
    signals : dict
        Signal name -> ndarray, for in-memory runs.
    units : dict
        Signal name -> SI unit string.
    energy : dict
        The first-law audit, J: supplied, loss, delivered, stored_change, residual, relative_residual.
    stats : dict
        Solver statistics.
    events : dict
        ``time``, ``component`` (names, a string array), ``kind`` ("time"/"state", a string array),
        ``index`` arrays.
    path : str or None
        The results file, when one was written.
    wall_time : float
        Seconds spent integrating (assembly and compilation excluded).
    """

    time: np.ndarray
    signals: dict
    units: dict
    energy: dict
    stats: dict
    events: dict
    path: str | None = None
    wall_time: float = 0.0
    final_state: dict = field(default_factory=dict)

    def __getitem__(self, name: str) -> np.ndarray:
        try:
            return self.signals[name]
        except KeyError:
            import difflib
            close = difflib.get_close_matches(name, list(self.signals), n=5, cutoff=0.4)
            raise KeyError(f"no signal {name!r} in this run" + (f"; close: {close}" if close else "")) from None

    def quantity(self, name: str):
        """The signal as a pint Quantity in its SI unit."""
        return ureg.Quantity(self[name], self.units[name] or "dimensionless")


class _Audit:
    """Forwards batches to the real sink and keeps the first and last rows for the energy audit."""

    def __init__(self, sink, names):
        self.sink = sink
        self.first = None
        self.last = None
        self.idx = {k: names.index(k) for k in
                    ("energy.supplied", "energy.loss", "energy.delivered", "energy.stored")}

    def rows(self, t, data):
        if len(t) == 0:
            return
        if self.first is None:
            self.first = data[0].copy()
        self.last = data[-1].copy()
        self.sink.rows(t, data)

    def events(self, t, component, kind, index):
        if len(t):
            self.sink.events(t, component, kind, index)

    def summary(self) -> dict:
        if self.first is None:
            return {}
        g = lambda row, key: float(row[self.idx[key]])
        supplied = g(self.last, "energy.supplied") - g(self.first, "energy.supplied")
        loss = g(self.last, "energy.loss") - g(self.first, "energy.loss")
        delivered = g(self.last, "energy.delivered") - g(self.first, "energy.delivered")
        stored = g(self.last, "energy.stored") - g(self.first, "energy.stored")
        residual = supplied - loss - delivered - stored
        # scale by the largest energy in play, including what is stored (a conservative system has no flows)
        scale = max(abs(supplied), abs(loss) + abs(delivered) + abs(stored),
                    abs(g(self.first, "energy.stored")), abs(g(self.last, "energy.stored")), 1e-30)
        return {"supplied": supplied, "loss": loss, "delivered": delivered, "stored_change": stored,
                "residual": residual, "relative_residual": abs(residual) / scale}


def default_solver():
    """The compiled Radau IIA integrator when available, else the scipy reference backend."""
    try:
        from .solvers.compiled import Radau5
        return Radau5()
    except ImportError:  # pragma: no cover - only while the compiled solver is absent
        from .solvers.reference import ScipyReference
        return ScipyReference()


#: Recorded in every run whatever ``record`` asks for: the first-law audit reads them.
AUDIT_SIGNALS = ("energy.supplied", "energy.loss", "energy.delivered", "energy.stored")


def _record_columns(record, names: list[str]) -> list[int] | None:
    """Indices of the record names that ``record`` asks for (names or shell-style patterns), or None."""
    if record is None:
        return None
    import fnmatch
    asked = [record] if isinstance(record, str) else list(record)
    chosen = set(names.index(k) for k in AUDIT_SIGNALS)
    for entry in asked:
        if not isinstance(entry, str):
            raise ParameterError(f"simulate: record entries must be signal names or patterns (str); got {entry!r}")
        hits = [i for i, name in enumerate(names) if fnmatch.fnmatchcase(name, entry)]
        if not hits:
            import difflib
            close = difflib.get_close_matches(entry, names, n=5, cutoff=0.4)
            raise ParameterError(f"simulate: record entry {entry!r} matches no signal of this system"
                                 + (f"; close: {close}" if close else "; a pattern like 'motor.*' selects a "
                                    "component's signals"))
        chosen.update(hits)
    return sorted(chosen)


def simulate(system: System | Problem, t_end, *, out_dt=None, output: str | os.PathLike | None = None,
             solver=None, metadata: dict | None = None, record=None) -> RunResult:
    """Run a system from its initial state to ``t_end``.

    Parameters
    ----------
    system : System or Problem
        The drive to simulate (a Problem from :func:`emsim.assemble` skips re-assembly).
    t_end : float or str
        End time, s (``"10 min"`` accepted).
    out_dt : float or str, optional
        Output interval, s (default: 1/500 of the run).
    output : path, optional
        HDF5 file to stream results to. Checked for writability before anything is simulated.
        Without it, results are kept in memory (fine for short runs).
    solver : Solver, optional
        Default: the compiled Radau IIA integrator.
    metadata : dict, optional
        Extra JSON-friendly entries stored in the file's metadata.
    record : str or sequence of str, optional
        The signals to keep, by name or shell-style pattern (``"motor.*"``, ``"load_side.speed"``);
        default: every state, port variable, signal, output, discrete state and mode. The four
        ``energy.*`` signals of the first-law audit are always kept. Fewer signals mean smaller
        files and less memory: every output row of a long run holds each recorded signal.

    Returns
    -------
    RunResult
    """
    from .units import to_si
    t_end = to_si(t_end, "s", owner="simulate", name="t_end")
    if output is not None:
        from .results import check_writable
        check_writable(output)
    problem = system if isinstance(system, Problem) else assemble(system)
    if not t_end > problem.t0:
        raise ParameterError(f"simulate: t_end = {t_end:g} s must be after the start time {problem.t0:g} s")
    out_dt = (t_end - problem.t0) / 500.0 if out_dt is None else to_si(out_dt, "s", owner="simulate", name="out_dt")
    if not out_dt > 0:
        raise ParameterError(f"simulate: out_dt must be positive; got {out_dt:g} s")
    solver = solver or default_solver()
    names, units = list(problem.record_names), list(problem.record_units)
    columns = _record_columns(record, names)
    if columns is not None:
        names, units = [names[i] for i in columns], [units[i] for i in columns]
    meta = {"system": problem.description, "solver": solver.settings(), "emsim_version": __version__,
            "t_end": t_end, "out_dt": out_dt, "state_names": problem.state_names, **(metadata or {})}
    if output is not None:
        from .results import ResultWriter
        sink = ResultWriter(output, names=names, units=units, metadata=meta,
                            event_kinds=EVENT_KINDS, component_names=problem.component_names,
                            event_names=problem.event_owner)
    else:
        sink = MemoryRecorder(names, units)
    audit = _Audit(sink, names)
    start = time.perf_counter()
    try:
        stats = solver.run(problem, t_end, out_dt=out_dt, sink=audit, columns=columns)
    except BaseException as exc:
        if output is not None:
            sink.close(ok=False, error=f"{type(exc).__name__}: {exc}")
        raise
    wall = time.perf_counter() - start
    energy = audit.summary()
    if output is not None:
        sink.set_summary(energy)
        sink.set_stats({k: v for k, v in stats.items() if isinstance(v, (int, float))})
        sink.close(ok=True)
        return RunResult(np.zeros(0), {}, dict(zip(names, units)), energy, stats, {}, str(output), wall)
    t, data = sink.arrays()
    ev = sink.event_arrays()
    # string arrays, not lists: a 1 kHz controller logs 10 000 events per 10 s, and lists of them cost
    # a sizeable share of a short run's wall time
    names_by_index = np.array(list(problem.component_names) + [""], dtype=str)  # -1 -> ""
    kinds_by_code = np.array(["", EVENT_KINDS[1], EVENT_KINDS[2]], dtype=str)
    events = {"time": ev[0], "component": names_by_index[np.asarray(ev[1], dtype=np.int64)],
              "kind": kinds_by_code[np.clip(np.asarray(ev[2], dtype=np.int64), 0, 2)], "index": ev[3]}
    signals = {n: data[:, i] for i, n in enumerate(names)}
    return RunResult(t, signals, dict(zip(names, units)), energy, stats, events, None, wall)
