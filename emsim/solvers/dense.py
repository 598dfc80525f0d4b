"""Small dense linear algebra for the compiled integrator (numba, arrays only).

Every function works on the leading ``n`` rows/columns of the arrays it is
given, so the integrator can keep fixed-size work arrays and never allocate in
its step loop. The LU routines are written once and numba compiles a real and a
complex specialisation from the same source (the integrator factors one real
and one complex iteration matrix per step size).

All functions are ``njit(cache=True)``; the integrator kernel, which is
compiled once per system inside a generated module, imports them from here.
"""
from __future__ import annotations

import math

from numba import njit


@njit(cache=True, inline="always")
def pivot_size(x):
    """``|Re x| + |Im x|``: the size by which a pivot is chosen (LAPACK's ``cabs1``, used by
    ``izamax`` in ``zgetrf``; E. Anderson et al., LAPACK Users' Guide). ``|x|`` for a real ``x``."""
    return abs(x.real) + abs(x.imag)


@njit(cache=True, inline="always")
def lu_factor(a, piv, n):
    """LU factorisation with partial (row) pivoting of ``a[:n, :n]``, in place.

    On return the strict lower triangle holds the multipliers (unit diagonal
    implied), the strict upper triangle holds U, the diagonal holds the
    *reciprocals* of U's diagonal (so :func:`lu_solve` multiplies instead of
    dividing: a division, complex ones above all, costs many multiplications
    and sits on the critical path of the substitution) and ``piv[k]`` is the
    row swapped with row ``k`` at elimination step ``k``. Works for float64
    and complex128.

    Pivots are chosen by ``|Re| + |Im|`` (:func:`pivot_size`), as LAPACK's complex routines do:
    for a real matrix that is ``|a|``; for a complex one it spares a ``hypot`` per entry.

    Returns 0 on success, else ``1 + k`` for the first column ``k`` whose pivot
    is exactly zero (the factorisation still completes; solving is meaningless).
    """
    info = 0
    for k in range(n):
        p = k
        amax = pivot_size(a[k, k])
        for i in range(k + 1, n):
            v = pivot_size(a[i, k])
            if v > amax:
                amax = v
                p = i
        piv[k] = p
        if amax == 0.0:
            if info == 0:
                info = k + 1
            continue
        if p != k:
            for j in range(n):
                tmp = a[k, j]
                a[k, j] = a[p, j]
                a[p, j] = tmp
        inv = 1.0 / a[k, k]
        for i in range(k + 1, n):
            lik = a[i, k] * inv
            a[i, k] = lik
            if lik != 0.0:
                for j in range(k + 1, n):
                    a[i, j] -= lik * a[k, j]
        a[k, k] = inv
    return info


@njit(cache=True, inline="always")
def lu_solve(lu, piv, b, n):
    """Solve ``A x = b`` in place in ``b[:n]`` with the factors from :func:`lu_factor`.

    Column-oriented substitution: once ``x[j]`` is known it is subtracted from
    every remaining entry. The row-oriented form accumulates each entry in one
    serial chain of multiply-adds; here the updates of different entries are
    independent, so the processor overlaps them (the solves were a quarter of
    a small drive's run time). Forward substitution does the same operations in
    the same order as the row form.
    """
    for k in range(n):
        p = piv[k]
        if p != k:
            tmp = b[k]
            b[k] = b[p]
            b[p] = tmp
    for j in range(n - 1):
        bj = b[j]
        for i in range(j + 1, n):
            b[i] -= lu[i, j] * bj
    for j in range(n - 1, -1, -1):
        bj = b[j] * lu[j, j]
        b[j] = bj
        for i in range(j):
            b[i] -= lu[i, j] * bj


@njit(cache=True, inline="always")
def wrms(v, scale, n):
    """Weighted root-mean-square norm ``sqrt(mean((v[:n] / scale[:n])**2))``; 0 for n == 0."""
    if n == 0:
        return 0.0
    s = 0.0
    for i in range(n):
        q = v[i] / scale[i]
        s += q * q
    return math.sqrt(s / n)


@njit(cache=True, inline="always")
def all_finite(v, n):
    """True when every one of ``v[:n]`` is finite (no NaN, no inf)."""
    for i in range(n):
        if not math.isfinite(v[i]):
            return False
    return True


@njit(cache=True, inline="always")
def first_nonfinite(v, n):
    """Index of the first non-finite entry of ``v[:n]``, or -1."""
    for i in range(n):
        if not math.isfinite(v[i]):
            return i
    return -1
