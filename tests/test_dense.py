"""The integrator's small dense LU routines against numpy.linalg.solve (LAPACK gesv)."""
from __future__ import annotations

import numpy as np
import pytest

from emsim.solvers import dense


@pytest.mark.parametrize("dtype", [np.float64, np.complex128])
@pytest.mark.parametrize("n", [1, 2, 5, 8, 13])
def test_lu_factor_and_solve_match_lapack(n, dtype):
    rng = np.random.default_rng(n)
    a = rng.standard_normal((n, n))
    if dtype is np.complex128:
        a = a + 1j * rng.standard_normal((n, n))
    b = rng.standard_normal(n).astype(dtype)
    # work arrays larger than n, as the integrator passes them: only the leading block is used
    work = np.full((n + 2, n + 2), 7.0, dtype=dtype)
    work[:n, :n] = a
    piv = np.zeros(n + 2, dtype=np.int64)
    assert dense.lu_factor(work, piv, n) == 0
    x = np.zeros(n + 2, dtype=dtype)
    x[:n] = b
    dense.lu_solve(work, piv, x, n)
    expected = np.linalg.solve(a, b)       # LAPACK gesv, the reference
    cond = np.linalg.cond(a)
    assert np.max(np.abs(x[:n] - expected)) <= 1e-13 * cond * max(1.0, np.max(np.abs(expected)))
    assert np.all(x[n:] == 0.0)            # entries beyond n untouched


@pytest.mark.parametrize("dtype", [np.float64, np.complex128])
def test_pivot_rows_are_lapacks(dtype):
    # LAPACK getrf picks the pivot of largest |a| (real) or |Re a| + |Im a| (complex, izamax's
    # cabs1): scipy.linalg.lu_factor returns getrf's row interchanges, which must be ours
    from scipy.linalg import lu_factor as lapack_lu_factor
    rng = np.random.default_rng(7)
    for n in (3, 8, 13):
        a = rng.standard_normal((n, n))
        if dtype is np.complex128:
            a = a + 1j * rng.standard_normal((n, n))
        piv = np.zeros(n, dtype=np.int64)
        dense.lu_factor(a.copy(), piv, n)
        np.testing.assert_array_equal(piv, lapack_lu_factor(a)[1])


def test_lu_factor_reports_the_first_zero_pivot_column():
    a = np.array([[1.0, 2.0, 3.0], [2.0, 4.0, 6.0], [0.0, 0.0, 0.0]])   # rank 1: column 1 pivot is zero
    piv = np.zeros(3, dtype=np.int64)
    assert dense.lu_factor(a.copy(), piv, 3) == 2


def test_kernel_records_the_digest_of_its_inlined_helpers():
    # numba caches the kernel by the text of radau_kernel.py alone; the digest keeps it in step with dense.py
    import hashlib
    from pathlib import Path

    from emsim.solvers import radau_kernel
    digest = hashlib.sha256(Path(dense.__file__).read_bytes()).hexdigest()
    assert radau_kernel.radau_DENSE_SHA256 == digest, (
        "emsim/solvers/dense.py changed: set radau_DENSE_SHA256 in radau_kernel.py to " + digest)
