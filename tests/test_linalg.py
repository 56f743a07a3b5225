"""The engine's triangular factor and solves through numpy (fitting/_linalg.py), against scipy.linalg.

Reference: scipy.linalg.lapack.dgeqrf and scipy.linalg.solve_triangular, which the engine called
before. numpy's LAPACK gives the same numbers on these shapes; the tests require them bit for bit
(on this platform) where the engine relies on it, and to rounding elsewhere.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import lapack, solve_triangular

from fitting._linalg import qr_r, solve_upper, solve_upper_transposed


def _scipy_r(a: np.ndarray) -> np.ndarray:
    qr, _tau, _work, info = lapack.dgeqrf(np.asfortranarray(a.copy()))
    assert info == 0
    r = np.triu(qr[: min(a.shape)])
    k = a.shape[1]
    pad = np.zeros((k, k))
    pad[: r.shape[0]] = r
    return pad


@pytest.mark.parametrize("shape", [(30, 22), (3, 22), (27, 22), (198, 22), (1000, 16), (5, 5), (1, 4)])
def test_qr_r_equals_lapack_dgeqrf(shape):
    # source: scipy.linalg.lapack.dgeqrf, the routine the engine called directly before
    rng = np.random.default_rng(sum(shape))
    for _ in range(4):
        a = rng.normal(size=shape) * rng.uniform(0.1, 10, size=shape[1])
        np.testing.assert_array_equal(qr_r(a), _scipy_r(a))


def test_a_fortran_ordered_matrix_is_factored_in_place():
    # source: scipy.linalg.lapack.dgeqrf; a tall Fortran-ordered float64 matrix is overwritten, not copied
    rng = np.random.default_rng(3)
    a = rng.normal(size=(4000, 12))
    ref = _scipy_r(a)
    work = np.asfortranarray(a.copy())
    np.testing.assert_array_equal(qr_r(work), ref)
    np.testing.assert_array_equal(np.triu(work[:12]), ref)  # R sits in the input's upper triangle
    np.testing.assert_array_equal(qr_r(a), ref)  # a C-ordered input is copied first and kept
    assert qr_r(np.zeros((0, 3))).shape == (3, 3)


def _triangles(rng, count):
    for k in range(1, count + 1):
        for _ in range(30):
            r = np.triu(rng.normal(size=(k, k)) * 10 ** rng.uniform(-8, 8, size=(1, k)))
            yield r + np.diag(10 ** rng.uniform(-10, 2, size=k))


def test_solve_upper_equals_solve_triangular():
    # source: scipy.linalg.solve_triangular, for a vector (back substitution) and for the identity (the inverse)
    rng = np.random.default_rng(5)
    for r in _triangles(rng, 22):
        k = r.shape[0]
        b = rng.normal(size=k) * 10 ** rng.uniform(-5, 5)
        np.testing.assert_array_equal(solve_upper(r, b), solve_triangular(r, b, check_finite=False))
        np.testing.assert_array_equal(solve_upper(r, np.eye(k)), solve_triangular(r, np.eye(k), check_finite=False))


def test_solve_upper_transposed_matches_solve_triangular():
    # source: scipy.linalg.solve_triangular(trans="T") to rounding: forward substitution adds in another order
    rng = np.random.default_rng(6)
    for r in _triangles(rng, 12):
        k = r.shape[0]
        b = rng.normal(size=(k, 7))
        ref = solve_triangular(r, b, trans="T", check_finite=False)
        cond = np.linalg.cond(r)
        np.testing.assert_allclose(solve_upper_transposed(r, b), ref, rtol=1e-13 * cond, atol=1e-300)


def test_a_singular_triangle_gives_inf_or_nan_not_an_error():
    r = np.array([[1.0, 2.0], [0.0, 0.0]])
    with np.errstate(all="ignore"):
        u = solve_upper(r, np.eye(2))
    assert not np.isfinite(u[1]).any()
    assert not np.isfinite(solve_upper(r, np.array([1.0, 1.0]))).all()
