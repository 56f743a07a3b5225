"""Verdict stability's redraws on small folds: every fold's test error from one factorisation of all rows.

Verdict stability (``_evidence.verdict_stability``) applies the verdict's rule to hundreds of
redrawn partitions. Reducing every fold of every redraw to its own factor, as a sweep does,
costs about a millisecond a redraw in small-matrix overhead; on a 30-row file the 200 default
redraws took two seconds. When the folds are small (at most ``HAT_FOLD_ROWS`` rows), this
module gets the same test errors from one thin QR of all the rows instead, for every fold of
every redraw at once, in a few array operations.

The identity
------------
Let sqrt(W)[A | y] = Q R be the thin QR of all n rows, with the Chebyshev columns of every
degree up to the highest in degree order and y last (so that the first p = d + 1 columns of Q
span the design of degree d, and y = Q R[:, K]). The residuals of the degree-d fit to all rows
are e = Q[:, p:] R[p:, K]. Leaving out the rows of a fold F and refitting on the others gives,
on the rows of F, the residuals

    z = (I − H_F)⁻¹ e_F,    H_F = Q_F,p Q_F,pᵀ   (the fold's block of the hat matrix),

the leave-group-out form of the deleted residual (Cook and Weisberg, Residuals and Influence in
Regression, 1982 [memory]; it follows from the Sherman–Morrison–Woodbury formula). The fold's
test sum of squares is ‖z‖², which is what ``sweep_from_blocks`` computes as ‖R_F [−c; 1]‖²
from the training factor; tests/test_verdict_stability.py holds the two routes to the same
verdicts on every redraw. I − H_F is the Gram matrix of the training rows in the coordinates
of Q, so it is singular exactly when the training rows cannot carry the degree: a Cholesky
pivot of it at or below ``RANK_TOL`` marks the degree as failed in that redraw, as a rank-
deficient training factor does in the sweep (a degree the whole data cannot carry fails in
every redraw).

Each fold costs O(m²·d) for m rows, so larger folds keep the sweep's route (``_evidence``).
"""

from __future__ import annotations

import numpy as np

from . import _basis
from ._sweep import recommend_from_test_errors

__all__ = [
    "HAT_FOLD_ROWS",
    "RANK_TOL",
    "ERROR_REL",
    "FullFactor",
    "full_factor",
    "fold_rows",
    "fold_errors",
    "redraw_verdicts",
    "training_errors",
    "PIVOT_WEAK",
]

#: folds of at most this many rows take the one-factorisation route
HAT_FOLD_ROWS = 24
#: a pivot of I − H_F at or below RANK_TOL × rows × eps counts as a training set that cannot carry the degree
RANK_TOL = 1e3
#: relative part of the error bound on a test RMSE; common practice, no source
ERROR_REL = 1e-9
#: below this pivot of I − H_F a fold's error is taken from a QR of its training rows instead
PIVOT_WEAK = 1e-9
#: fold × row² entries per batch of array work (memory stays near 30 MB)
_BATCH_ENTRIES = 1_000_000


class FullFactor:
    """The thin QR of all rows, read for the fold computations (a zero row at index n pads the folds)."""

    def __init__(self, a, q, e, w, failed, p, y_scale: float):
        self.a = a  # (n + 1, K + 1): the weighted rows [A | y]
        self.qt = np.ascontiguousarray(q.T)  # (K, n + 1): the design's columns of Q, one per row
        self.et = np.ascontiguousarray(e.T)  # (n_degrees, n + 1): the full fit's residuals of each degree
        self.w = w  # (n + 1,): the weights (1 without weights), 0 on the padding row
        self.failed = failed  # (n_degrees,): the whole data cannot carry the degree
        self.p = p  # (n_degrees,): coefficients of each degree
        self.y_scale = y_scale  # the size of the residuals' rounding over eps (``_residual_scale``)
        self.rank_tol = RANK_TOL * self.n * np.finfo(np.float64).eps

    @property
    def n(self) -> int:
        return self.qt.shape[1] - 1

    @property
    def ncols(self) -> int:
        return self.qt.shape[0]


def full_factor(t: np.ndarray, ys: np.ndarray, w: np.ndarray | None, degs: list[int]) -> FullFactor | None:
    """The factor of all rows for ``degs`` (t mapped x, ys scaled y).

    None (take the sweep's route) when there are too few rows, or when a degree's conditioning on all
    rows lies within a factor 10⁴ of the sweep's rank threshold.
    """
    n, ncols = t.size, degs[-1] + 1
    if n < ncols + 1:
        return None
    rows = np.empty((ncols + 1, n))
    _basis.chebyshev_rows(t, ncols, out=rows[:ncols])
    rows[ncols] = ys
    if w is not None:
        rows *= np.sqrt(w)
    q, r = np.linalg.qr(rows.T)
    p = np.asarray(degs, dtype=np.int64) + 1
    # e_p = sum over columns j >= p of q_j R[j, K]: components along orthonormal directions, no cancellation
    tails = np.cumsum((q * r[:, ncols])[:, ::-1], axis=1)[:, ::-1]
    dg = np.abs(np.diag(r))[:ncols]
    lo, hi = np.minimum.accumulate(dg), np.maximum.accumulate(dg)
    eps = np.finfo(np.float64).eps
    ratio = lo[p - 1] / (RANK_TOL * np.maximum(n, p) * eps * hi[p - 1])  # the sweep's rank test is ratio <= 1
    if np.any((ratio > 1e-4) & (ratio < 1e4)):
        return None  # near the sweep's rank threshold: which training sets fail depends on rounding
    pad = np.zeros((1, ncols))
    return FullFactor(
        a=np.vstack([rows.T, np.zeros((1, ncols + 1))]),
        q=np.vstack([q[:, :ncols], pad]),
        e=np.vstack([tails[:, p], np.zeros((1, p.size))]),
        w=np.append(np.ones(n) if w is None else w, 0.0),
        failed=ratio <= 1.0,
        p=p,
        y_scale=_residual_scale(ys, w),
    )


def _residual_scale(ys: np.ndarray, w: np.ndarray | None) -> float:
    """‖sqrt(w)·y‖ / sqrt(min w): bounds |R[j, K]| (so the residuals' rounding is eps times this per column of Q),
    in the units of a test RMSE."""
    if w is None:
        return float(np.sqrt(ys @ ys))
    return float(np.sqrt((w * ys) @ ys / np.min(w)))


def fold_rows(labels: np.ndarray, folds: int, n: int) -> np.ndarray:
    """Row indices of every fold, (partitions, folds, m) ascending, padded with n: ``labels`` is (partitions, n)."""
    order = np.argsort(labels, axis=1, kind="stable")
    lab = np.take_along_axis(labels, order, axis=1)
    parts = labels.shape[0]
    counts = np.bincount((labels + folds * np.arange(parts)[:, None]).ravel(), minlength=parts * folds)
    counts = counts.reshape(parts, folds)
    starts = np.cumsum(counts, axis=1) - counts
    pos = np.arange(n)[None, :] - np.take_along_axis(starts, lab, axis=1)
    out = np.full((parts, folds, int(counts.max())), n, dtype=np.int64)
    out[np.arange(parts)[:, None], lab, pos] = order
    return out


def fold_errors(fac: FullFactor, idx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(test sum of squares, smallest Cholesky pivot) of every fold and degree, each (folds, n_degrees).

    ``idx`` is (folds, m). The fold's hat block H_F grows by one column of Q at a time (its lower
    triangle: it is symmetric), and each degree's system is solved when H_F holds that degree's
    columns. The arrays are laid out (row, row, fold) so that every step works on contiguous vectors.
    """
    m, nb, nd = idx.shape[1], idx.shape[0], fac.p.size
    qt = fac.qt[:, idx.T]  # (K, m, B)
    et = fac.et[:, idx.T]  # (n_degrees, m, B)
    h = np.zeros((m, m, nb))
    sse, pivot = np.empty((nd, nb)), np.empty((nd, nb))
    di = 0
    for c in range(int(fac.p[-1])):
        qc = qt[c]
        for i in range(m):
            h[i, : i + 1] += qc[i] * qc[: i + 1]
        while di < nd and fac.p[di] == c + 1:
            z, pivot[di] = _cholesky_solve(h, et[di], fac.rank_tol)
            sse[di] = np.einsum("mb,mb->b", z, z)
            di += 1
    return sse.T, pivot.T


def _cholesky_solve(h: np.ndarray, b: np.ndarray, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """Solve (I − h) z = b by Cholesky, h (m, m, N) read in its lower triangle, b (m, N); and the smallest pivot.

    A pivot at or below ``tol`` (I − h singular: the training rows cannot carry the degree) is replaced by 1
    so that the arithmetic stays finite; the caller reads the pivot and discards that z.
    """
    m = h.shape[0]
    low = np.zeros_like(h)
    smallest = np.full(h.shape[2], np.inf)
    for k in range(m):
        piv = 1.0 - h[k, k] - np.einsum("jn,jn->n", low[k, :k], low[k, :k])
        np.minimum(smallest, piv, out=smallest)
        diag = np.sqrt(np.where(piv > tol, piv, 1.0))
        low[k, k] = diag
        if k + 1 < m:
            low[k + 1 :, k] = (-h[k + 1 :, k] - np.einsum("ijn,jn->in", low[k + 1 :, :k], low[k, :k])) / diag
    v = np.empty_like(b)
    for k in range(m):  # L v = b
        v[k] = (b[k] - np.einsum("jn,jn->n", low[k, :k], v[:k])) / low[k, k]
    z = np.empty_like(b)
    for k in range(m - 1, -1, -1):  # Lᵀ z = v
        z[k] = (v[k] - np.einsum("jn,jn->n", low[k + 1 :, k], z[k + 1 :])) / low[k, k]
    return z, smallest


def redraw_verdicts(fac: FullFactor, labels: np.ndarray, folds: int, degs: list[int], scheme: str, y_exp: int):
    """(verdict, clear) of each redraw; ``labels`` is (redraws, repeats, n): a fold label per row for each repeat.

    Test errors come from ``fold_errors``; where a fold's pivot for a degree is below ``PIVOT_WEAK`` (the
    held-out rows nearly out of the training rows' reach, so that the one factorisation cannot resolve
    the error) that fold is refitted on its training rows (``training_errors``). A verdict is clear when
    it stands for any test errors within their bounds, whether or not the degrees on the sweep's rank
    threshold fail; the caller
    recomputes the others by the sweep's route, so that near ties (exact data, where every error is
    rounding) are decided by the same arithmetic as the sweep.
    """
    draws, repeats, n = labels.shape
    nspl = repeats * folds
    idx = fold_rows(labels.reshape(draws * repeats, n), folds, n).reshape(draws, nspl, -1)
    m = idx.shape[2]
    per_draw = max(1, _BATCH_ENTRIES // (nspl * max(m * m, fac.ncols * 4)))
    verdicts, clear = [], []
    for start in range(0, draws, per_draw):
        chunk = idx[start : start + per_draw]
        rmse, err, failed, doubtful = _chunk_errors(fac, chunk.reshape(-1, m))
        shape = (chunk.shape[0], nspl, len(degs))
        failed = failed.reshape(shape).any(axis=1) | fac.failed[None, :]  # (draws, n_degrees)
        rmse = np.swapaxes(rmse.reshape(shape), 1, 2).copy()  # (draws, n_degrees, splits), the sweep's order
        rmse[failed] = np.nan
        maybe = doubtful.reshape(shape).any(axis=1)  # the sweep may fail these degrees in this redraw, or not
        v, ok = recommend_from_test_errors(degs, rmse, scheme, y_exp, err.reshape(shape).max(axis=1), maybe)
        verdicts.append(v)
        clear.append(ok)
    return np.concatenate(verdicts), np.concatenate(clear)


def _chunk_errors(fac: FullFactor, flat: np.ndarray):
    """(RMSE, error bound, failed, doubtful) per fold and degree; doubtful: on the sweep's rank threshold."""
    sse, pivot = fold_errors(fac, flat)
    wsum = fac.w[flat].sum(axis=1)
    eps = np.finfo(np.float64).eps
    with np.errstate(invalid="ignore", divide="ignore"):
        rmse = np.sqrt(sse / wsum[:, None])
        # the residuals' rounding (eps · y_scale per column of Q) through (I − H_F)⁻¹, norm <= 1 / pivot
        err = ERROR_REL * rmse + 1e3 * eps * fac.ncols * fac.y_scale / np.maximum(pivot, 0.0)
    failed = np.zeros(rmse.shape, dtype=bool)
    doubtful = np.zeros(rmse.shape, dtype=bool)
    weak = (pivot < PIVOT_WEAK) & ~fac.failed[None, :]
    rows = np.flatnonzero(weak.any(axis=1))
    if rows.size:
        r2, e2, f2, d2 = training_errors(fac, flat[rows])
        sub = weak[rows]
        rmse[rows] = np.where(sub, r2, rmse[rows])
        err[rows] = np.where(sub, e2, err[rows])
        failed[rows] = sub & f2
        doubtful[rows] = sub & d2
    return rmse, err, failed, doubtful


def training_errors(fac: FullFactor, idx: np.ndarray):
    """(RMSE, error bound, failed, doubtful) of folds ``idx`` (B, m) from a QR of each fold's training rows.

    The sweep's arithmetic in outline: R of the training rows, the leading block of each degree solved
    (the right side cut after p entries, so one solve serves every degree), the fold's rows predicted.
    A degree fails by the sweep's rank test on that R; a fold whose test lies within a factor 100 of
    the threshold is doubtful. The error bound grows with the leading block's condition, estimated by
    the ratio of its largest and smallest diagonal entries.
    """
    n, ncols, nb = fac.n, fac.ncols, idx.shape[0]
    held = np.zeros((nb, n + 1), dtype=bool)
    held[np.arange(nb)[:, None], idx] = True
    held[:, n] = True
    n_train = n - held[:, :n].sum(axis=1)
    tr = np.argsort(held, axis=1, kind="stable")[:, : int(n_train.max())]  # training rows first, in order
    tr[np.arange(tr.shape[1])[None, :] >= n_train[:, None]] = n
    r = np.zeros((nb, ncols + 1, ncols + 1))
    r_top = np.linalg.qr(fac.a[tr], mode="r")
    r[:, : r_top.shape[1]] = r_top
    dg = np.abs(np.diagonal(r, axis1=1, axis2=2))[:, :ncols]
    lo, hi = np.minimum.accumulate(dg, axis=1)[:, fac.p - 1], np.maximum.accumulate(dg, axis=1)[:, fac.p - 1]
    eps = np.finfo(np.float64).eps
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = lo / (RANK_TOL * np.maximum(n_train[:, None], fac.p[None, :]) * eps * hi)
        cut = np.arange(ncols)[None, :, None] < fac.p[None, None, :]
        rt = r[:, :ncols, :ncols] + np.eye(ncols) * (np.abs(np.diagonal(r, axis1=1, axis2=2))[:, :ncols, None] == 0)
        coef = np.linalg.solve(rt, r[:, :ncols, ncols, None] * cut)  # (B, K, n_degrees)
        rows = fac.a[idx]
        res = rows[:, :, ncols, None] - rows[:, :, :ncols] @ coef
        rmse = np.sqrt(np.einsum("bmd,bmd->bd", res, res) / fac.w[idx].sum(axis=1)[:, None])
        err = rmse * (ERROR_REL + np.minimum(1.0, 1e4 * eps * ncols * hi / lo))
    failed = ~(ratio > 1.0)
    doubtful = ((ratio > 1e-2) & (ratio < 1e2)) | (~failed & ~np.isfinite(rmse))
    return rmse, err, failed, doubtful
