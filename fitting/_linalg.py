"""Small linear-algebra helpers shared by the fit, the sweep and the streaming sweep.

* ``qr_r``: R of a Householder QR (LAPACK dgeqrf; Q is never formed).
* ``condition_of``: 2-norm condition number of a triangular factor.
* ``_solve_rtr`` and ``_cholesky_ld``: R^T R solves and a Cholesky factor in extended precision.
* ``single_thread_blas``: one BLAS thread while it lasts.
* ``t_quantile``: the two-sided Student t quantile without importing scipy.stats.
"""

from __future__ import annotations

import contextlib

import numpy as np
from scipy.linalg import lapack as _lapack

from ._errors import FitError

LD = np.longdouble
EPS_LD = float(np.finfo(LD).eps)

__all__ = ["qr_r", "condition_of", "single_thread_blas", "t_quantile", "LD", "EPS_LD"]


def t_quantile(level: float, dof: int) -> float:
    """Two-sided Student's t quantile for a central interval of ``level`` with ``dof`` degrees of freedom.

    scipy.special.stdtrit is the inverse of the t distribution's CDF (the same
    function scipy.stats.t.ppf uses), without importing scipy.stats, which costs
    more than half a second at start-up.
    """
    from scipy.special import stdtrit

    return float(stdtrit(dof, 0.5 + float(level) / 2.0))


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

    Calls LAPACK dgeqrf directly and may overwrite ``a`` when it is already a
    Fortran-ordered float64 array (pass a temporary). Q is never formed.
    """
    a = np.asfortranarray(a, dtype=np.float64)
    m, k = a.shape
    if m == 0:
        return np.zeros((k, k))
    qr, _tau, _work, info = _lapack.dgeqrf(a, overwrite_a=1)
    if info != 0:  # pragma: no cover - LAPACK argument error
        raise FitError(f"The QR factorisation failed (LAPACK info {info}); please report this data set.")
    r = np.triu(qr[: min(m, k)])
    if r.shape[0] < k:
        pad = np.zeros((k, k))
        pad[: r.shape[0]] = r
        r = pad
    return r


def condition_of(r: np.ndarray) -> float:
    """2-norm condition number of a triangular factor (inf when singular)."""
    if r.size == 0:
        return 1.0
    sv = np.linalg.svd(r, compute_uv=False)
    return float(sv[0] / sv[-1]) if sv[-1] > 0 else float("inf")
