"""The binary interface between a generated system module and the compiled integrator.

Each generated module defines the ``system_*`` functions as ordinary jitted
functions and exports them as C callbacks (``numba.cfunc``) with the fixed
signatures below. The integrator takes those callbacks as first-class function
arguments, so it is compiled and cached ONCE for every system (its argument
types are these signatures, not the particular functions), while each new
system structure compiles only its own small functions.

The work array's currency flag: ``w[problem.fresh_slot]`` is 0.0 except while the
integrator calls ``at_time`` or ``record`` at exactly the inputs (t, y, m, d) of the
last function that evaluated the system's rhs into ``w``; it then sets the flag to 1.0
for that call only, and those two skip their own rhs evaluation. A module whose
problem has ``fresh_slot = -1`` never sees the flag.
"""
from __future__ import annotations

from numba import types

_f8 = types.float64
_i8 = types.int64
_A = types.Array(types.float64, 1, "C")
_I = types.Array(types.int64, 1, "C")
_A2 = types.Array(types.float64, 2, "C")

#: Order in which the callbacks are passed to ``radau_integrate``.
ORDER = ("rhs", "events", "on_event", "next_time", "at_time", "start", "record", "jacobian", "stages",
         "rhs_quad", "explicit_stages")

SIGNATURES = {
    "rhs": types.void(_f8, _A, _A, _I, _A, _A, _A),
    "events": types.void(_f8, _A, _A, _I, _A, _A, _A),
    "on_event": types.int64(_i8, _f8, _A, _A, _I, _A, _A),
    "next_time": types.float64(_f8, _A, _I, _A),
    "at_time": types.int64(_f8, _A, _A, _I, _A, _A, _I),
    "start": types.void(_f8, _A, _A, _I, _A, _A),
    "record": types.void(_f8, _A, _A, _I, _A, _A, _A),
    # fills the n_main x n_main Jacobian and returns 1, or returns 0: use finite differences
    "jacobian": types.int64(_f8, _A, _A, _I, _A, _A, _A2),
    # the three stage evaluations of one Newton iteration in one call: for s = 0, 1, 2 the rhs
    # f[s] = f(ts[s], y + z[s]) on the main rows and, if want_quad, the quadrature integrands
    # fq[s] at the same point (ys: scratch of y's length)
    "stages": types.void(_A, _A, _A2, _A, _A, _I, _A, _A, _A2, _A2, _i8),
    # system_rhs into dy and the quadrature integrands dq at the same (t, y), in one call (the
    # explicit method's stages and consistency solves: one callback instead of two per stage)
    "rhs_quad": types.void(_f8, _A, _A, _I, _A, _A, _A, _A),
    # stages 1..6 of one Dormand-Prince step in one call, each algebraic row predicted along the
    # stage move and checked (see system_explicit_stages); returns the first stage it did not finish
    "explicit_stages": types.int64(_f8, _f8, _f8, _A, _A, _I, _A, _A, _A2, _A2, _A, _A, _I, _A2, _A, _i8, _i8, _A),
}


ARGS = {
    "rhs": "t, y, p, m, d, w, dy",
    "events": "t, y, p, m, d, w, g",
    "on_event": "k, t, y, p, m, d, w",
    "next_time": "t, p, m, d",
    "at_time": "t, y, p, m, d, w, log",
    "start": "t, y, p, m, d, w",
    "record": "t, y, p, m, d, w, row",
    "jacobian": "t, y, p, m, d, w, jac",
    "stages": "ts, y, z, ys, p, m, d, w, f, fq, want_quad",
    "rhs_quad": "t, y, p, m, d, w, dy, dq",
    "explicit_stages": "t, h, rtol, y, p, m, d, w, kst, kq, ys, err, alg, lu_a, atol, n_alg, want_quad, dz",
}

# ``system_stages`` and ``system_rhs_quad`` are the same for every module: written here once, in terms
# of the module's own system_rhs and system_quad_at_rhs (system_quad without its own rhs evaluation)
_STAGES_SOURCE = """
@_abi_numba.njit(cache=True, error_model="numpy")
def system_stages(ts, y, z, ys, p, m, d, w, f, fq, want_quad):
    n = f.shape[1]
    for j in range(n, y.shape[0]):
        ys[j] = y[j]
    for s in range(3):
        for j in range(n):
            ys[j] = y[j] + z[s, j]
        system_rhs(ts[s], ys, p, m, d, w, f[s])
        if want_quad != 0:
            system_quad_at_rhs(ts[s], ys, p, m, d, w, fq[s])


@_abi_numba.njit(cache=True, error_model="numpy")
def system_rhs_quad(t, y, p, m, d, w, dy, dq):
    system_rhs(t, y, p, m, d, w, dy)
    system_quad_at_rhs(t, y, p, m, d, w, dq)


@_abi_numba.njit(cache=True, error_model="numpy")
def system_explicit_stages(t, h, rtol, y, p, m, d, w, kst, kq, ys, err, alg, lu_a, atol, n_alg, want_quad, dz):
    # Stages 1..6 of a Dormand-Prince 5(4) step (kst[0], kq[0] and ys = y are the caller's) in one
    # call instead of six, with the loop's own stage point and constraint test (radau_kernel's
    # dopri_stage_point and radau_constraint_correction): the stage counts as done when one
    # correction of its algebraic rows would be below 1e-3 of the tolerance. Returns 7, or the first
    # stage i not done: its point is in ys, evaluated into kst[i], and the caller goes on from there
    # with its own consistency solve.
    n = kst.shape[1]
    n_quad = y.shape[0] - n
    for i in range(1, 7):
        _abi_stage_point(i, h, y, ys, kst, err, alg, n_alg, n, lu_a, True)
        t_i = t + _abi_DP_C[i] * h
        if want_quad != 0 and i != 1:    # stage 1's weights for the integrands are zero
            system_rhs_quad(t_i, ys, p, m, d, w, kst[i], kq[i])
        else:
            system_rhs(t_i, ys, p, m, d, w, kst[i])
        for j in range(n):
            if not _abi_math.isfinite(kst[i, j]):
                return i
        if n_alg > 0 and not _abi_correction(lu_a, kst[i], ys, atol, rtol, alg, n_alg, n, dz)[0] <= 1e-3:
            return i
        if want_quad != 0 and i != 1:
            for q in range(n_quad):
                if not _abi_math.isfinite(kq[i, q]):
                    return i
    return 7
"""


# once per run, and a component's start kernel may allocate
_WITH_RUNTIME = ("start",)


def _inlined_digest() -> str:
    """SHA-256 of the kernel helpers (and tableau) that the shared source inlines.

    A generated module is cached under the hash of its text, and numba caches its machine code by
    its own file: without this line in the text, a change of those helpers would leave every
    cached module running the old ones.
    """
    import hashlib
    import inspect

    from . import radau_kernel as rk
    text = "".join(inspect.getsource(f.py_func) for f in (rk.dopri_stage_point, rk.radau_constraint_correction))
    return hashlib.sha256((text + rk.radau_DP_A.tobytes().hex() + rk.radau_DP_C.tobytes().hex()).encode()).hexdigest()


def export_source(lean: bool = True) -> str:
    """Lines a generated module appends to export its ``system_*`` functions as callbacks.

    ``lean``: compile the callbacks that run every step without numba's
    reference counting (``_nrt=False``; it is inherited by every jitted function
    they call, component kernels included). They only touch arrays their
    caller owns, so counting references is dead work: a runtime call per array
    argument and per slice. A kernel that allocates an array needs the runtime
    and does not compile lean: :func:`emsim.assembly.compile.load_with_callbacks`
    then loads the module again with ``lean=False``.
    """
    lines = ["", "from emsim.solvers.abi import SIGNATURES as _abi_signatures",
             "import math as _abi_math", "import numba as _abi_numba",
             "from emsim.solvers.radau_kernel import radau_DP_C as _abi_DP_C",
             "from emsim.solvers.radau_kernel import dopri_stage_point as _abi_stage_point",
             "from emsim.solvers.radau_kernel import radau_constraint_correction as _abi_correction",
             f"# inlined from emsim.solvers.radau_kernel: {_inlined_digest()}",
             _STAGES_SOURCE]
    for name, args in ARGS.items():
        flags = ", _nrt=False" if lean and name not in _WITH_RUNTIME else ""
        # a thin Python-level wrapper: numba's cache needs a plain function, not a dispatcher
        lines += [f"def _abi_{name}({args}):",
                  f"    return system_{name}({args})",
                  f"cb_{name} = _abi_numba.cfunc(_abi_signatures[{name!r}], cache=True{flags})(_abi_{name})", ""]
    return "\n".join(lines) + "\n"


def callbacks(module) -> tuple:
    """The exported callbacks of a generated module, in :data:`ORDER`."""
    return tuple(getattr(module, f"cb_{name}") for name in ORDER)
