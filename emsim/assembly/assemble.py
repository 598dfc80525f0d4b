"""Assembly: validate -> lump rigid groups -> lay out y -> generate and compile -> consistent start."""
from __future__ import annotations


import numpy as np

from .. import __version__
from ..errors import AssemblyError, EmsimError, PluginError
from ..model.declarations import DOMAINS
from ..model.system import System
from ..units import to_si
from .codegen import generate
from .compile import load_with_callbacks
from .diagnose import nonfinite_culprit
from .layout import lay_out
from .problem import Problem
from .structure import Structure, analyse


def assemble(system: System, *, t0: float = 0.0) -> Problem:
    """Turn a :class:`~emsim.System` into a compiled :class:`Problem` with consistent initial values.

    Raises
    ------
    AssemblyError
        Structural faults (open ports, over- or under-determined nodes, rigid loops, signal loops).
    PluginError
        A component's kernel does not compile or returns NaN at the initial state.
    """
    st = analyse(system)
    lay = lay_out(st)
    _apply_initial(st, lay)
    source, names, units, fingerprint = generate(st, lay)
    try:
        module = load_with_callbacks("system", source, extra_key=fingerprint, mass=lay.mass, n_quad=lay.n_quad)
    except EmsimError:
        raise
    except Exception as exc:  # the exported callbacks compile at import: numba typing/lowering errors
        text = str(exc)
        raise PluginError(f"{_culprit(text, st)} failed to compile in nopython mode (kernels must use the "
                          "numba subset: float arrays, math/numpy scalar functions, no Python objects):\n"
                          f"{_first_lines(text)}") from exc
    prob = Problem(
        module=module, t0=float(t0), y0=lay.y0.copy(), p=lay.p.copy(),
        m0=np.zeros(max(lay.m_size, 1), dtype=np.int64), d0=lay.d0.copy() if lay.d0.size else np.zeros(1),
        n_work=max(lay.n_work, 1), mass=lay.mass.copy(), n_main=lay.n_main, n_quad=lay.n_quad,
        n_events=lay.n_events, n_record=len(names), event_direction=lay.event_direction,
        nominal=lay.nominal.copy(), state_names=lay.state_names, row_owner=lay.row_owner,
        event_owner=lay.event_owner, component_names=[c.name for c in st.components],
        record_names=names, record_units=units, description=describe(st), fresh_slot=lay.work["FRESH"])
    prob.structure = st
    prob.layout = lay
    _first_evaluation(prob, st)
    w = np.zeros(prob.n_work)
    consistent_algebraic(prob, prob.t0, prob.y0, prob.m0, prob.d0, w)
    module.system_start(prob.t0, prob.y0, prob.p, prob.m0, prob.d0, w)
    consistent_algebraic(prob, prob.t0, prob.y0, prob.m0, prob.d0, w)
    return prob


def _apply_initial(st: Structure, lay) -> None:
    for ref, raw in st.system.initial_across.items():
        node = st.node_by_name(ref)
        across, unit = DOMAINS[node.domain][0], DOMAINS[node.domain][1]
        value = to_si(raw, unit, owner=f"system '{st.system.name}'", name=f"initial {across} of {ref}")
        if node.domain == "rotational":
            g = st.groups[node.group]
            scale = 1.0
            for k, sgn in g.scale[node.index]:
                c = st.couplings[k]
                ratio = st.components[c.comp].scalar(c.ratio)
                scale = scale * ratio if sgn > 0 else scale / ratio
            lay.y0[lay.group_row[g.index]] = value / scale
        else:
            lay.y0[lay.node_row[node.index]] = value


def _first_evaluation(prob: Problem, st: Structure) -> None:
    """Compile by calling once; name the component whose kernel fails to compile."""
    w = np.zeros(prob.n_work)
    dy = np.zeros(prob.n_main)
    try:
        prob.module.system_rhs(prob.t0, prob.y0, prob.p, prob.m0, prob.d0, w, dy)
        prob.module.system_record(prob.t0, prob.y0, prob.p, prob.m0, prob.d0, w, np.zeros(prob.n_record))
        prob.module.system_quad(prob.t0, prob.y0, prob.p, prob.m0, prob.d0, w, np.zeros(prob.n_quad))
        if prob.n_events:
            prob.module.system_events(prob.t0, prob.y0, prob.p, prob.m0, prob.d0, w, np.zeros(prob.n_events))
    except EmsimError:
        raise
    except Exception as exc:  # numba typing/lowering errors
        text = str(exc)
        culprit = _culprit(text, st)
        raise PluginError(f"{culprit} failed to compile in nopython mode (kernels must use the numba subset: "
                          f"float arrays, math/numpy scalar functions, no Python objects):\n"
                          f"{_first_lines(text)}") from exc


def _culprit(text: str, st: Structure) -> str:
    """Name the component class and kernel that numba rejects, by compiling each kernel alone."""
    import numba

    seen = []
    for comp in st.components:
        cls = type(comp)
        if cls in seen:
            continue
        seen.append(cls)
        users = [c.name for c in st.components if type(c) is cls]
        for kernel, args in _probe_arguments(comp).items():
            fn = getattr(cls, kernel)
            if fn is None:
                continue
            try:
                with np.errstate(all="ignore"):
                    numba.njit(fn)(*args)
            except numba.core.errors.NumbaError:
                return f"component class {cls.__module__}.{cls.__qualname__} (used by {users}), kernel '{kernel}',"
            except Exception:  # a run-time error on dummy values is not a compile failure
                pass
    return "the generated system"


def _probe_arguments(comp) -> dict:
    """Dummy arguments of the right types and sizes for each kernel of ``comp``."""
    z = np.zeros
    x, a, f = z(len(comp.states)), z(len(comp.ports)), z(len(comp.ports))
    u, s, out = z(len(comp.inputs)), z(len(comp.signals)), z(len(comp.outputs))
    p = comp.parameter_vector()
    m, d = np.zeros(len(comp.modes), dtype=np.int64), z(len(comp.discrete))
    n = len(comp.states) + len(comp.ports)
    return {"equations": (0.0, x, a, u, p, m, d, z(len(comp.states)), f, s),
            "monitor": (0.0, x, a, f, u, p, m, d, out),
            # the class's events: an instance may drop its own (a motor without Coulomb friction)
            "event_values": (0.0, x, a, f, u, p, m, d, z(len(type(comp).events))),
            "on_event": (0, 0.0, x, a, f, u, p, m, d),
            "at_time": (0.0, x, a, f, u, p, m, d),
            "next_time": (0.0, p, m, d),
            "start": (0.0, x, a, f, u, p, m, d),
            "jacobian": (0.0, x, a, u, p, m, d, z((n, len(comp.states))), z((n, len(comp.ports))))}


def _first_lines(text: str, n: int = 12) -> str:
    return "\n".join(text.strip().splitlines()[:n])


def consistent_algebraic(prob: Problem, t: float, y: np.ndarray, m: np.ndarray, d: np.ndarray, w: np.ndarray,
                         *, tol: float = 1e-10, max_iter: int = 50) -> None:
    """Solve the algebraic rows for the algebraic variables, differential rows fixed (Newton, FD Jacobian).

    Raises AssemblyError naming the variables when the algebraic block is singular (a node that
    nothing determines, or one that is over-determined).
    """
    alg = np.flatnonzero(prob.mass == 0.0)
    dy = np.zeros(prob.n_main)
    rhs = prob.module.system_rhs
    rhs(t, y, prob.p, m, d, w, dy)
    _check_finite(prob, t, y, dy, m, d)
    if alg.size == 0:
        return
    for _ in range(max_iter):
        res = dy[alg].copy()
        jac = np.empty((alg.size, alg.size))
        for j, col in enumerate(alg):
            h = 1e-7 * max(abs(y[col]), prob.nominal[col])
            keep = y[col]
            y[col] = keep + h
            rhs(t, y, prob.p, m, d, w, dy)
            jac[:, j] = (dy[alg] - res) / h
            y[col] = keep
        scale = np.maximum(np.abs(jac).max(axis=1, initial=0.0), 1e-300)
        sv = np.linalg.svd(jac / scale[:, None], compute_uv=False) if jac.size else np.zeros(0)
        if sv.size and (sv[-1] <= 1e-11 * max(sv[0], 1e-300)):
            raise AssemblyError(_undetermined_message(prob, alg, jac / scale[:, None]))
        step = np.linalg.solve(jac, res)
        y[alg] -= step
        rhs(t, y, prob.p, m, d, w, dy)
        _check_finite(prob, t, y, dy, m, d)
        if np.all(np.abs(step) <= tol * np.maximum(np.abs(y[alg]), prob.nominal[alg])):
            return
    raise AssemblyError(f"algebraic variables {[prob.state_names[i] for i in alg]} did not converge at t = {t:g} s "
                        f"(largest residual {np.abs(dy[alg]).max():.3g} in "
                        f"'{prob.state_names[alg[int(np.argmax(np.abs(dy[alg])))]]}')")


def _undetermined_message(prob: Problem, alg: np.ndarray, jac: np.ndarray) -> str:
    u, s, vt = np.linalg.svd(jac)
    cols = np.flatnonzero(np.abs(vt[-1]) > 0.1 * np.abs(vt[-1]).max())
    rows = np.flatnonzero(np.abs(u[:, -1]) > 0.1 * np.abs(u[:, -1]).max())
    variables = sorted({prob.state_names[alg[i]] for i in cols})
    owners = sorted({prob.row_owner[alg[i]] for i in rows})
    return (f"cannot determine {variables}: the equations of {owners} do not fix them. "
            "A node without capacity needs a member that sets its across variable from it "
            "(a source, a resistance, a speed-dependent load), and no more than one member that imposes it; "
            "a shaft group without inertia needs a load whose torque depends on speed.")


def _check_finite(prob: Problem, t: float, y: np.ndarray, dy: np.ndarray, m=None, d=None) -> None:
    bad = np.flatnonzero(~np.isfinite(dy))
    if bad.size:
        first = int(bad[0])
        culprit = nonfinite_culprit(prob, t, y, prob.m0 if m is None else m, prob.d0 if d is None else d)
        where = culprit or prob.row_owner[first]
        raise PluginError(f"{where} returned a non-finite value (first seen in '{prob.state_names[first]}') "
                          f"at t = {t:g} s; state: " +
                          ", ".join(f"{n}={v:.6g}" for n, v in zip(prob.state_names, y)))


def describe(st: Structure) -> dict:
    """A plain, JSON-friendly description of the system for result metadata."""
    comps = []
    for comp in st.components:
        comps.append({
            "name": comp.name,
            "class": f"{type(comp).__module__}.{type(comp).__qualname__}",
            "parameters": {k: v for k, v in comp.values.items()},
            "tables": {k: v.tolist() for k, v in comp.table_values.items()},
            "initial": dict(comp.initial_values),
        })
    nodes = [{"name": n.name, "domain": n.domain, "ports": [st.ports[g].ref for g in n.members]}
             for n in st.nodes]
    groups = [{"name": g.name, "nodes": [st.nodes[n].name for n in g.nodes]} for g in st.groups]
    return {"name": st.system.name, "emsim_version": __version__, "components": comps, "nodes": nodes,
            "rigid_groups": groups, "signals": [list(x) for x in st.system.signal_links]}
