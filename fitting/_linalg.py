"""Small linear-algebra helpers shared by the fit, the sweep and the streaming sweep.

* ``qr_r``: R of a Householder QR (LAPACK dgeqrf; Q is never formed).
* ``solve_upper`` and ``solve_upper_transposed``: R u = b and Rᵀ u = b for an upper-triangular R.
* ``condition_of``: 2-norm condition number of a triangular factor.
* ``_solve_rtr`` and ``_cholesky_ld``: R^T R solves and a Cholesky factor in extended precision.
* ``single_thread_blas``: one BLAS thread while it lasts.
* ``t_quantile``: the two-sided Student t quantile (``_distributions``, no scipy).

scipy is not imported here: its import costs more than a small command-line run spends on
everything else. numpy's LAPACK does the work: dgeqrf through ``numpy.linalg.lapack_lite``,
in place on a Fortran-ordered matrix as scipy's ``overwrite_a`` did (``np.linalg.qr`` would
copy a tall matrix twice), and ``np.linalg.solve`` on a triangular matrix, which reduces to
the dtrsm that scipy's ``solve_triangular`` calls (no pivot moves, as every entry below the
diagonal is zero). tests/test_linalg.py checks that both give scipy's numbers.
"""

from __future__ import annotations

import contextlib

import numpy as np

from ._distributions import t_two_sided_quantile
from ._errors import FitError

try:
    from numpy.linalg import lapack_lite as _lapack_lite
except ImportError:  # pragma: no cover - numpy without its LAPACK wrapper: np.linalg.qr (copies the matrix)
    _lapack_lite = None

LD = np.longdouble
EPS_LD = float(np.finfo(LD).eps)

__all__ = [
    "qr_r",
    "solve_upper",
    "solve_upper_transposed",
    "condition_of",
    "single_thread_blas",
    "t_quantile",
    "LD",
    "EPS_LD",
]


def t_quantile(level: float, dof: int) -> float:
    """Two-sided Student's t quantile for a central interval of ``level`` with ``dof`` degrees of freedom.

    The quantile 1/2 + level/2 of t (what scipy.special.stdtrit(dof, 0.5 + level / 2) gives;
    ``_distributions`` computes it without importing scipy).
    """
    return t_two_sided_quantile(level, dof)


_THREADPOOLS = None


def single_thread_blas():
    """Context manager limiting BLAS to one thread (no-op without threadpoolctl).

    The engine's LAPACK calls are tall-skinny (at most 21 columns) or tiny.
    Threads gain little on them, and on a loaded machine a multi-threaded BLAS
    call whose helper thread is descheduled waits a whole time slice at each
    synchronisation: a 10-fold sweep was measured 30x slower that way. The
    limit is process-wide while it lasts and is restored afterwards.
    """
    global _THREADPOOLS
    if _THREADPOOLS is None:
        try:
            from threadpoolctl import ThreadpoolController

            _THREADPOOLS = ThreadpoolController()
        except Exception:  # pragma: no cover - threadpoolctl ships with scikit-learn
            _THREADPOOLS = False
    if _THREADPOOLS is False:
        return contextlib.nullcontext()
    return _THREADPOOLS.limit(limits=1, user_api="blas")


def _solve_rtr(r: np.ndarray, g: np.ndarray) -> np.ndarray:
    """Solve R^T R u = g in longdouble with a (double) upper-triangular R; g may be 2-D."""
    r_ld = r.astype(LD)
    u = np.array(g, dtype=LD)
    p = r_ld.shape[0]
    # forward: R^T v = g
    for i in range(p):
        u[i] = (u[i] - r_ld[:i, i] @ u[:i]) / r_ld[i, i]
    # backward: R u = v
    for i in range(p - 1, -1, -1):
        u[i] = (u[i] - r_ld[i, i + 1 :] @ u[i + 1 :]) / r_ld[i, i]
    return u


def _cholesky_ld(g: np.ndarray) -> np.ndarray | None:
    """Upper-triangular R with R^T R = g in longdouble, or None if g is not safely positive definite."""
    p = g.shape[0]
    r = np.zeros((p, p), dtype=LD)
    for j in range(p):
        s = g[j, j] - r[:j, j] @ r[:j, j]
        if not s > 64 * LD(EPS_LD) * g[j, j]:
            return None
        r[j, j] = np.sqrt(s)
        if j + 1 < p:
            r[j, j + 1 :] = (g[j, j + 1 :] - r[:j, j] @ r[:j, j + 1 :]) / r[j, j]
    return r


def qr_r(a: np.ndarray) -> np.ndarray:
    """R of a Householder QR of ``a`` (m, k), padded with zero rows to (k, k) when m < k.

    LAPACK dgeqrf; Q is never formed. Overwrites ``a`` when it is already a Fortran-ordered
    float64 array (pass a temporary).
    """
    m, k = a.shape
    if m == 0:
        return np.zeros((k, k))
    if _lapack_lite is None:  # pragma: no cover
        r = np.linalg.qr(np.asarray(a, dtype=np.float64), mode="r")
    else:
        r = _qr_r_in_place(np.asfortranarray(a, dtype=np.float64))
    if r.shape[0] < k:
        pad = np.zeros((k, k))
        pad[: r.shape[0]] = r
        r = pad
    return r


def _qr_r_in_place(buf: np.ndarray) -> np.ndarray:
    """dgeqrf on a Fortran-ordered float64 matrix, in place (its transpose is the C-ordered array LAPACK reads)."""
    m, k = buf.shape
    tau, work = np.empty(min(m, k)), np.empty(1)
    _lapack_lite.dgeqrf(m, k, buf.T, m, tau, work, -1, 0)  # workspace query: the blocked algorithm's size
    work = np.empty(max(int(work[0]), k, 1))
    info = _lapack_lite.dgeqrf(m, k, buf.T, m, tau, work, work.size, 0)["info"]
    if info != 0:  # pragma: no cover - LAPACK argument error
        raise FitError(f"The QR factorisation failed (LAPACK info {info}); please report this data set.")
    return np.triu(buf[: min(m, k)])


def solve_upper(r: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve R u = b for an upper-triangular R; b a vector or a matrix. inf or NaN where R is singular (no error).

    A vector by back substitution with dot products, a matrix through LAPACK; tests/test_linalg.py
    checks both against scipy's solve_triangular (the same numbers, on this platform bit for bit).
    """
    if np.ndim(b) == 2:
        try:
            return np.linalg.solve(r, b)
        except np.linalg.LinAlgError:  # an exact zero on the diagonal, or an overflow: substitute instead
            pass
    u = np.array(b, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for i in range(r.shape[0] - 1, -1, -1):
            u[i] = (u[i] - r[i, i + 1 :] @ u[i + 1 :]) / r[i, i]
    return u


def solve_upper_transposed(r: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Solve Rᵀ u = b for an upper-triangular R by forward substitution; b may be 2-D."""
    u = np.array(b, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        for i in range(r.shape[0]):
            if i:
                u[i] -= r[:i, i] @ u[:i]
            u[i] /= r[i, i]
    return u


def condition_of(r: np.ndarray) -> float:
    """2-norm condition number of a triangular factor (inf when singular)."""
    if r.size == 0:
        return 1.0
    sv = np.linalg.svd(r, compute_uv=False)
    return float(sv[0] / sv[-1]) if sv[-1] > 0 else float("inf")
