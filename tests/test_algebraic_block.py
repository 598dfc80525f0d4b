"""The algebraic block's products (``radau_algebraic_setup``) against numpy.linalg (LAPACK).

The explicit method predicts and corrects the algebraic rows with J_zz^-1 and J_zz^-1 J_zx, formed
by one Gauss-Jordan elimination with row pivoting (Golub & Van Loan, Matrix Computations, 3.1).
Reference: ``numpy.linalg.inv`` and ``numpy.linalg.solve`` on the same blocks.
"""
import numpy as np
import numba as nb
import pytest

from emsim.solvers import radau_kernel as rk


@nb.njit
def _setup(jac, lu_a, alg, n_alg, n):
    return rk.radau_algebraic_setup(jac, lu_a, alg, n_alg, n)


def _blocks(jac, alg, n_alg):
    z, x = alg[:n_alg], alg[n_alg:]
    return jac[np.ix_(z, z)], jac[np.ix_(z, x)]


@pytest.mark.parametrize("n, n_alg, seed", [(8, 3, 1), (6, 1, 2), (10, 6, 3), (5, 5, 4), (4, 0, 5)])
def test_products_equal_lapack(n, n_alg, seed):
    rng = np.random.default_rng(seed)
    jac = rng.normal(size=(n, n))
    alg = rng.permutation(n).astype(np.int64)
    if n_alg >= 2:
        # a zero on the block's diagonal: the elimination must pivot
        jac[alg[0], alg[0]] = 0.0
    lu_a = np.full((n, 2 * n), np.nan)
    assert _setup(jac, lu_a, alg, n_alg, n) == 0
    if n_alg == 0:
        return
    jzz, jzx = _blocks(jac, alg, n_alg)
    cond = np.linalg.cond(jzz)
    # backward-stable elimination: errors of a few eps x condition number (Golub & Van Loan 3.3)
    tol = 50 * np.finfo(float).eps * cond
    np.testing.assert_allclose(lu_a[:n_alg, n:n + n_alg], np.linalg.inv(jzz), rtol=0,
                               atol=tol * np.max(np.abs(np.linalg.inv(jzz))))
    ref = np.linalg.solve(jzz, jzx)
    if ref.size:
        np.testing.assert_allclose(lu_a[:n_alg, n + n_alg:2 * n], ref, rtol=0,
                                   atol=tol * max(1.0, np.max(np.abs(ref))))


def test_singular_block_names_its_column():
    # J_zz with a zero column (the 2nd algebraic row's variable appears in no constraint): step 2
    n, n_alg = 5, 3
    rng = np.random.default_rng(7)
    jac = rng.normal(size=(n, n))
    alg = np.array([3, 0, 4, 1, 2], np.int64)
    jac[alg[:n_alg], alg[1]] = 0.0
    assert _setup(jac, np.zeros((n, 2 * n)), alg, n_alg, n) == 2
