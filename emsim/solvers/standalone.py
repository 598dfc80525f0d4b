"""Plain test problems through the same generated-module path as assembled systems.

:func:`compile_standalone` takes right-hand sides and event functions written
as plain Python functions in the numba subset, generates a small module that
defines the ``system_*`` functions of the :class:`~emsim.assembly.problem.Problem`
contract around them, exports them as callbacks (:func:`emsim.solvers.abi.export_source`) and
loads it with :func:`emsim.assembly.compile.load_with_callbacks`. The integrator
compiled this way is byte for byte the one assembled systems use.

How the user functions are found
    Each function must be defined at the top level of an importable module
    (not ``__main__``, not a closure). The generated module puts the folder
    that contains the module's top-level package (or the module file itself)
    on ``sys.path`` if it is missing, then imports the module by name with
    :func:`importlib.import_module` and takes the function by name. A test file
    ``tests/problems.py`` is therefore imported as ``problems`` with ``tests/``
    on the path, whether or not pytest put it there. Plain functions are wrapped
    with ``numba.njit(cache=True)``; functions that already are numba
    dispatchers are used as they are. The text of every user module is part of
    the cache key, so editing a problem recompiles.

Accepted signatures (chosen by the number of parameters)
    ``rhs(t, y, dy)`` or ``rhs(t, y, p, m, d, dy)``: ``dy[:n_main]`` = y' on
    differential rows, residual on algebraic rows;
    ``quad(t, y, dq)`` or ``quad(t, y, p, m, d, dq)``;
    ``events(t, y, g)`` or ``events(t, y, p, m, d, g)``;
    ``on_event(k, t, y)`` or ``on_event(k, t, y, p, m, d)`` (changes y, m, d in place);
    ``time_events = (next_time, at_time)`` with ``next_time(t)`` or
    ``next_time(t, p, m, d)`` returning the next instant strictly after ``t``
    (inf if none) and ``at_time(t, y)`` or ``at_time(t, y, p, m, d)``;
    ``record(t, y, row)`` or ``record(t, y, p, m, d, row)`` (default: the state).
"""
from __future__ import annotations

import inspect
import sys
from pathlib import Path

import numpy as np

from ..assembly.compile import load_with_callbacks
from ..assembly.problem import Problem


def _locate(fn, role):
    """(module name, folder for sys.path, function name, module file text) of a user function."""
    target = getattr(fn, "py_func", fn)
    modname = getattr(target, "__module__", None)
    name = getattr(target, "__name__", None)
    if not modname or modname == "__main__":
        raise TypeError(f"standalone {role}: {name!r} must live in an importable module, not {modname!r}")
    if getattr(target, "__qualname__", name) != name:
        raise TypeError(f"standalone {role}: {target.__qualname__!r} must be a top-level function")
    module = sys.modules.get(modname)
    if module is None or getattr(module, name, None) is None:
        raise TypeError(f"standalone {role}: {modname}.{name} cannot be found by name")
    path = Path(inspect.getfile(target)).resolve()
    root = path.parent
    if path.name == "__init__.py":
        root = root.parent
    for _ in modname.split(".")[1:]:
        root = root.parent
    return modname, str(root), name, path.read_text()


def _nparams(fn):
    return len(inspect.signature(getattr(fn, "py_func", fn)).parameters)


def _call(alias, fn, short, full, role):
    """Call text for a user function with either its short or its full signature."""
    n = _nparams(fn)
    if n == len(short):
        return f"{alias}({', '.join(short)})"
    if n == len(full):
        return f"{alias}({', '.join(full)})"
    raise TypeError(f"standalone {role}: expected parameters ({', '.join(short)}) or ({', '.join(full)}), "
                    f"got {n}")


def compile_standalone(rhs, y0, *, n_main=None, mass=None, events=None, directions=None, on_event=None,
                       time_events=None, n_quad=0, quad=None, record=None, n_record=None,
                       p=(), m0=(0,), d0=(0.0,), t0=0.0, nominal=None, state_names=None,
                       row_owner=None, name=None) -> Problem:
    """Build a :class:`Problem` whose module wraps plain functions (see the module docstring)."""
    y0 = np.asarray(y0, dtype=np.float64).copy()
    n_quad = int(n_quad)
    n_main = int(len(y0) - n_quad if n_main is None else n_main)
    if n_main + n_quad != len(y0):
        raise ValueError(f"standalone: n_main + n_quad = {n_main + n_quad} but len(y0) = {len(y0)}")
    if quad is None and n_quad > 0:
        raise ValueError("standalone: n_quad > 0 needs quad")
    if events is not None and directions is None:
        raise ValueError("standalone: events needs directions (one of -1, 0, +1 per event function; "
                         "() for none)")
    directions = np.asarray(() if directions is None else directions, dtype=np.int64)
    n_events = int(len(directions)) if events is not None else 0
    mass = np.ones(n_main) if mass is None else np.asarray(mass, dtype=np.float64).copy()
    if record is not None and n_record is None:
        raise ValueError("standalone: record needs n_record")
    n_record = len(y0) if record is None else int(n_record)

    funcs = {"rhs": rhs, "quad": quad, "events": events, "on_event": on_event, "record": record}
    if time_events is not None:
        funcs["next_time"], funcs["at_time"] = time_events
    lines = [
        "# Generated standalone system: the user functions below wrapped in the system_* contract.",
        "import importlib as k_importlib",
        "import sys as k_sys",
        "import numpy as k_np",
        "from numba import njit as k_njit",
        "",
    ]
    keys = []
    for role, fn in funcs.items():
        if fn is None:
            continue
        modname, folder, fname, text = _locate(fn, role)
        keys.append(text)
        lines += [
            f"if {folder!r} not in k_sys.path:",
            f"    k_sys.path.insert(0, {folder!r})",
            f"k_user_{role} = getattr(k_importlib.import_module({modname!r}), {fname!r})",
            f"if not hasattr(k_user_{role}, 'py_func'):",
            f"    k_user_{role} = k_njit(cache=True)(k_user_{role})",
            "",
        ]
    pmd = ["p", "m", "d"]

    def body(role, short, full, ret=None, default="pass"):
        fn = funcs.get(role)
        if fn is None:
            return [f"    {default}"]
        call = _call(f"k_user_{role}", fn, short, full, role)
        if ret is None:
            return [f"    {call}"]
        return [f"    {call}", f"    return {ret}"]

    def block(sig, body_lines):
        return ["@k_njit(cache=True)", f"def {sig}:", *body_lines, ""]

    lines += block("system_rhs(t, y, p, m, d, w, dy)",
                   body("rhs", ["t", "y", "dy"], ["t", "y", *pmd, "dy"]))
    lines += block("system_quad(t, y, p, m, d, w, dq)",
                   body("quad", ["t", "y", "dq"], ["t", "y", *pmd, "dq"]))
    lines += ["system_quad_at_rhs = system_quad  # the user's quad evaluates what it needs itself", ""]
    lines += block("system_events(t, y, p, m, d, w, g)",
                   body("events", ["t", "y", "g"], ["t", "y", *pmd, "g"]))
    lines += block("system_on_event(k, t, y, p, m, d, w)",
                   body("on_event", ["k", "t", "y"], ["k", "t", "y", *pmd], ret="0", default="return 0"))
    if "next_time" in funcs:
        nt = _call("k_user_next_time", funcs["next_time"], ["t"], ["t", *pmd], "next_time")
        lines += block("system_next_time(t, p, m, d)", [f"    return {nt}"])
        at = _call("k_user_at_time", funcs["at_time"], ["t", "y"], ["t", "y", *pmd], "at_time")
        lines += block("system_at_time(t, y, p, m, d, w, log)", [f"    {at}", "    log[0] = 0", "    return 1"])
    else:
        lines += block("system_next_time(t, p, m, d)", ["    return k_np.inf"])
        lines += block("system_at_time(t, y, p, m, d, w, log)", ["    return 0"])
    lines += block("system_start(t, y, p, m, d, w)", ["    pass"])
    lines += block("system_jacobian(t, y, p, m, d, w, jac)", ["    return 0"])
    if record is None:
        lines += block("system_record(t, y, p, m, d, w, row)",
                       ["    for i in range(row.shape[0]):", "        row[i] = y[i]"])
    else:
        lines += block("system_record(t, y, p, m, d, w, row)",
                       body("record", ["t", "y", "row"], ["t", "y", *pmd, "row"]))
    source = "\n".join(lines) + "\n"
    label = name or getattr(getattr(rhs, "py_func", rhs), "__name__", "system")
    module = load_with_callbacks(f"standalone_{label}", source, extra_key="\0".join(keys), mass=mass,
                                 n_quad=n_quad)

    names = list(state_names) if state_names is not None else [f"y{i}" for i in range(len(y0))]
    owner = label
    owners = list(row_owner) if row_owner is not None else [owner] * len(y0)
    if len(owners) != len(y0):
        raise ValueError(f"standalone: {len(owners)} row owners for {len(y0)} states")
    return Problem(
        module=module, t0=float(t0), y0=y0, p=np.asarray(p, dtype=np.float64).copy(),
        m0=np.asarray(m0, dtype=np.int64).copy(), d0=np.asarray(d0, dtype=np.float64).copy(),
        n_work=1, mass=mass, n_main=n_main, n_quad=n_quad, n_events=n_events, n_record=n_record,
        event_direction=directions, nominal=np.ones(len(y0)) if nominal is None
        else np.asarray(nominal, dtype=np.float64).copy(),
        state_names=names, row_owner=owners,
        event_owner=[f"{owner}.event{k}" for k in range(n_events)],
        component_names=[owner], record_names=names[:n_record] if record is None else [],
        record_units=[], description={"name": label},
    )


def solve_standalone(problem: Problem, t_end: float, *, out_dt: float, method: str = "radau5", **options):
    """Run :class:`~emsim.solvers.compiled.Radau5` (``method="radau5"``) or
    :class:`~emsim.solvers.compiled.DormandPrince5` (``"dopri5"``) in memory.

    Returns ``(t, rows, events, stats)`` where ``events`` is the tuple
    ``(t, component, kind, index)`` of the event log.
    """
    from ..results.memory import MemoryRecorder
    from .compiled import DormandPrince5, Radau5

    classes = {"radau5": Radau5, "dopri5": DormandPrince5}
    if method not in classes:
        raise ValueError(f"solve_standalone: method must be one of {sorted(classes)}, got {method!r}")
    sink = MemoryRecorder()
    stats = classes[method](**options).run(problem, t_end, out_dt=out_dt, sink=sink)
    t, rows = sink.arrays()
    return t, rows, sink.event_arrays(), stats
