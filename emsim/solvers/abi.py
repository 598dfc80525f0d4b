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

from collections.abc import Sequence

from numba import types

from .stage_source import explicit_stages_source

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
    # stages i_first..6 of one Dormand-Prince step in one call, each algebraic row predicted along the
    # stage move and checked (emsim/solvers/stage_source.py); returns the first stage it did not
    # finish, or 7
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
    "explicit_stages": "t, h, rtol, y, p, m, d, w, kst, kq, ys, err, alg, lu_a, atol, i_first, want_quad, dz",
}

# ``system_stages`` and ``system_rhs_quad`` are the same for every module: written here once, in terms
# of the module's own system_rhs and system_quad_at_rhs (system_quad without its own rhs evaluation),
# both inlined (numba IR inlining): called, each cost ~40 ns beyond its body, more than the rhs itself
_STAGES_SOURCE = """
_abi_inline_rhs = _abi_numba.njit(inline="always", error_model="numpy")(system_rhs.py_func)
_abi_inline_quad = _abi_numba.njit(inline="always", error_model="numpy")(system_quad_at_rhs.py_func)


@_abi_numba.njit(cache=True, error_model="numpy")
def system_stages(ts, y, z, ys, p, m, d, w, f, fq, want_quad):
    n = f.shape[1]
    for j in range(n, y.shape[0]):
        ys[j] = y[j]
    for s in range(3):
        for j in range(n):
            ys[j] = y[j] + z[s, j]
        _abi_inline_rhs(ts[s], ys, p, m, d, w, f[s])
        if want_quad != 0:
            _abi_inline_quad(ts[s], ys, p, m, d, w, fq[s])


@_abi_numba.njit(cache=True, error_model="numpy")
def system_rhs_quad(t, y, p, m, d, w, dy, dq):
    _abi_inline_rhs(t, y, p, m, d, w, dy)
    _abi_inline_quad(t, y, p, m, d, w, dq)

"""


# once per run, and a component's start kernel may allocate
_WITH_RUNTIME = ("start",)


def export_source(mass: Sequence[float], n_quad: int, lean: bool = True) -> str:
    """Lines a generated module appends to export its ``system_*`` functions as callbacks.

    ``mass`` (the diagonal of M over the main rows, 0 on algebraic rows) and ``n_quad`` (the
    number of quadrature rows) are the row layout ``system_explicit_stages`` is written out for
    (:mod:`emsim.solvers.stage_source`); the other functions are the same for every module.

    ``lean``: compile the callbacks that run every step without numba's
    reference counting (``_nrt=False``; it is inherited by every jitted function
    they call, component kernels included). They only touch arrays their
    caller owns, so counting references is dead work: a runtime call per array
    argument and per slice. A kernel that allocates an array needs the runtime
    and does not compile lean: :func:`emsim.assembly.compile.load_with_callbacks`
    then loads the module again with ``lean=False``.
    """
    lines = ["", "from emsim.solvers.abi import SIGNATURES as _abi_signatures",
             "from emsim.solvers.abi import plain_copy as _abi_plain_copy",
             "import numba as _abi_numba", _STAGES_SOURCE,
             explicit_stages_source(mass, n_quad, prefix="_abi_")]
    for name in ARGS:
        flags = ", _nrt=False" if lean and name not in _WITH_RUNTIME else ""
        # the callback compiles system_<name>'s own body (a copy under another name): a wrapper
        # calling system_<name> cost one more call, ~40 ns for the rhs (28 -> 70 ns per callback)
        lines.append(f"cb_{name} = _abi_numba.cfunc(_abi_signatures[{name!r}], cache=True{flags})"
                     f"(_abi_plain_copy(system_{name}, '_abi_{name}'))")
    return "\n".join(lines) + "\n"


def plain_copy(dispatcher, name: str):
    """The plain Python function behind a jitted ``dispatcher``, as a new function called ``name``.

    numba's cache files a compiled function under its qualified name and first line; a callback
    compiled from the dispatcher's own function would share the dispatcher's cache index. The copy
    shares the code and globals under its own name, so the two are cached apart.
    """
    import types as _types
    fn = dispatcher.py_func
    copy = _types.FunctionType(fn.__code__, fn.__globals__, name, fn.__defaults__, fn.__closure__)
    copy.__qualname__ = name
    return copy


def callbacks(module) -> tuple:
    """The exported callbacks of a generated module, in :data:`ORDER`."""
    return tuple(getattr(module, f"cb_{name}") for name in ORDER)
