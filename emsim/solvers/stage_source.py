"""Source of a module's ``explicit_stages`` callback, written out for its own row layout.

The callback does stages ``i_first``..6 of a Dormand-Prince 5(4) step in one call (contract:
``SIGNATURES["explicit_stages"]`` in :mod:`emsim.solvers.abi`). The integrator's own
per-stage path (:func:`emsim.solvers.radau_kernel.dopri_stage_point` and
:func:`~emsim.solvers.radau_kernel.radau_constraint_correction`) does the same arithmetic in
loops over the rows, through the ``alg`` index list, with the tableau read from arrays. Here the
generator knows which rows are algebraic and how many quadrature rows there are, so every index
and every tableau entry is a literal and every loop over rows is written out; the system's rhs
and energy integrands are inlined once, inside the loop over the stages. The operations and
their order are the per-stage path's, term by term (``tests/test_explicit_shortcuts.py`` holds
the two to the bit).

Measured on the 1 kHz benchmark drive (same process, alternating, identical rows): 0.67-0.75x
the run time of the shared loop form, of which inlining the rhs is about half.
"""
from __future__ import annotations

from collections.abc import Sequence

from .radau_kernel import radau_DP_A, radau_DP_C

#: Terms per statement in a written-out sum: a long left-deep ``a + b + ...`` tree would reach
#: CPython's recursion limit when the module is compiled, so long sums go on in further statements
#: (the same additions in the same order).
_TERMS_PER_LINE = 8


def _sum_lines(target: str, terms: list[str], indent: str) -> list[str]:
    """``target = 0.0 + t0 + t1 + ...`` as statements of at most ``_TERMS_PER_LINE`` terms."""
    lines = []
    head = "0.0"
    for k in range(0, max(len(terms), 1), _TERMS_PER_LINE):
        chunk = terms[k:k + _TERMS_PER_LINE]
        lines.append(f"{indent}{target} = {head}" + "".join(f" + {t}" for t in chunk))
        head = target
    return lines


def explicit_stages_source(mass: Sequence[float], n_quad: int, *, prefix: str = "_abi_") -> str:
    """Source defining ``system_explicit_stages`` for rows whose mass is ``mass``.

    Parameters
    ----------
    mass : sequence of float
        Diagonal of M over the main rows: 0 marks an algebraic row.
    n_quad : int
        Number of quadrature (energy) rows after the main rows.
    prefix : str
        Prefix of the names this text defines besides ``system_explicit_stages`` (it is appended
        to a generated module).

    Returns
    -------
    str
        Python source; it uses ``{prefix}inline_rhs`` and ``{prefix}inline_quad``, the module's
        ``system_rhs`` and ``system_quad_at_rhs`` marked for inlining (defined before it by
        :func:`emsim.solvers.abi.export_source`).
    """
    n = len(mass)
    alg = [i for i in range(n) if mass[i] == 0.0]
    diff = [i for i in range(n) if mass[i] != 0.0]
    n_alg = len(alg)
    rhs, quad, jit, math = (f"{prefix}{name}" for name in ("inline_rhs", "inline_quad", "numba", "math"))
    out = [
        f"import math as {math}",
        f"import numba as {jit}",
        f"# {rhs} and {quad}: system_rhs and system_quad_at_rhs inlined (abi._STAGES_SOURCE defines them)",
        f"{prefix}explicit_layout = ({tuple(alg)!r}, {n}, {int(n_quad)})  # algebraic rows, n_main, n_quad",
        "",
        "",
        f"@{jit}.njit(cache=True, error_model=\"numpy\")",
        "def system_explicit_stages(t, h, rtol, y, p, m, d, w, kst, kq, ys, err, alg, lu_a, atol, i_first, want_quad, dz):",
        f"    # Dormand-Prince stages i_first..6 written out for algebraic rows {alg} of {n} and {n_quad}",
        "    # quadrature rows (emsim.solvers.stage_source). Returns 7, or the first stage i whose algebraic",
        "    # rows one correction would still move by more than 1e-3 of the tolerance (or that is not",
        "    # finite): its point is in ys and its evaluation in kst[i], and the integrator goes on from there.",
        "    for i in range(i_first, 7):",
    ]
    for i in range(1, 7):
        out.append(f"        {'if' if i == 1 else 'elif'} i == {i}:")
        for j in diff:
            terms = [f"{float(radau_DP_A[i, l])!r} * kst[{l}, {j}]" for l in range(i)]
            out += _sum_lines("acc", terms, "            ")
            out += [f"            x = y[{j}] + h * acc",
                    f"            err[{j}] = x - ys[{j}]",
                    f"            ys[{j}] = x"]
        out.append(f"            t_i = t + {float(radau_DP_C[i])!r} * h")
    # algebraic rows moved along the stage move (J_zz dz = -J_zx dx, lu_a holds J_zz^-1 J_zx)
    for k, a in enumerate(alg):
        terms = [f"lu_a[{k}, {n + n_alg + jd}] * err[{j}]" for jd, j in enumerate(diff)]
        out += _sum_lines("acc", terms, "        ")
        out.append(f"        ys[{a}] -= acc")
    out.append("        f_i = kst[i]")
    if n_quad:
        out += ["        if want_quad != 0 and i != 1:    # stage 1's weights for the integrands are zero",
                f"            {rhs}(t_i, ys, p, m, d, w, f_i)",
                f"            {quad}(t_i, ys, p, m, d, w, kq[i])",
                "        else:",
                f"            {rhs}(t_i, ys, p, m, d, w, f_i)"]
    else:
        out.append(f"        {rhs}(t_i, ys, p, m, d, w, f_i)")
    out += [f"        if not (" + " and ".join(f"{math}.isfinite(f_i[{j}])" for j in range(n)) + "):",
            "            return i"]
    if n_alg:
        out.append("        norm = 0.0")
        for k, a in enumerate(alg):
            terms = [f"lu_a[{k}, {n + l}] * f_i[{alg[l]}]" for l in range(n_alg)]
            out += _sum_lines("c", terms, "        ")
            out += [f"        dz[{k}] = c",
                    f"        q = c / (atol[{a}] + rtol * abs(ys[{a}]))",
                    "        norm += q * q"]
        out += [f"        if not {math}.sqrt(norm / {n_alg}) <= 1e-3:",
                "            return i"]
    if n_quad:
        out += ["        if want_quad != 0 and i != 1:",
                "            q_i = kq[i]",
                "            if not (" + " and ".join(f"{math}.isfinite(q_i[{q}])" for q in range(n_quad)) + "):",
                "                return i"]
    out.append("    return 7")
    return "\n".join(out) + "\n"
