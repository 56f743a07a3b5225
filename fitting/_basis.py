"""Basis functions: the domain map, Chebyshev design matrices and the exact
conversion to power-basis coefficients in the original x units.

Every fit works on t = (x - offset) / scale, which maps the data's x range onto
[-1, 1] (the same idea as numpy.polynomial's domain and window). On [-1, 1] the
Chebyshev polynomials T_0 .. T_d are close to orthogonal on most designs, so the
least-squares problem stays well conditioned far past the degree at which the
raw powers x**k lose all precision.

The power-basis coefficients that users read are derived from the Chebyshev
coefficients by a linear transformation carried in 80-digit decimals, so the
conversion adds no rounding error that matters; only the final rounding to a
double counts.
"""

from __future__ import annotations

import decimal
from functools import lru_cache
from math import comb

import numpy as np

LD = np.longdouble


def domain_map(lo: float, hi: float) -> tuple[float, float]:
    """Return (offset, scale) with t = (x - offset) / scale mapping [lo, hi] to [-1, 1]."""
    lo, hi = float(lo), float(hi)
    offset = 0.5 * (lo + hi)
    scale = 0.5 * (hi - lo)
    if not np.isfinite(scale) or scale <= 0:
        scale = 1.0
    return offset, scale


def to_window(x, offset: float, scale: float, dtype=np.float64) -> np.ndarray:
    """Map x to t = (x - offset) / scale in the requested precision."""
    x = np.asarray(x, dtype=dtype)
    return (x - dtype(offset)) / dtype(scale)


def chebyshev_rows(t: np.ndarray, ncols: int, out: np.ndarray | None = None) -> np.ndarray:
    """Basis as rows: out[k] = T_k(t), shape (ncols, n), by the three-term recurrence.

    Rows are contiguous, which keeps the recurrence fast; ``out.T`` is the
    (n, ncols) design matrix in Fortran order, as LAPACK wants it. Works in
    the dtype of ``t`` (float64 or longdouble).
    """
    t = np.asarray(t)
    if out is None:
        out = np.empty((ncols, t.shape[0]), dtype=t.dtype)
    if ncols > 0:
        out[0] = 1
    if ncols > 1:
        out[1] = t
    if ncols > 2:
        two_t = 2 * t  # exact: 2 (t T) and (2 t) T round identically
        for k in range(2, ncols):
            np.multiply(two_t, out[k - 1], out=out[k])
            out[k] -= out[k - 2]
    return out


def chebyshev_vander(t: np.ndarray, ncols: int) -> np.ndarray:
    """Design matrix (n, ncols) with columns T_0(t) .. T_{ncols-1}(t)."""
    return chebyshev_rows(np.atleast_1d(t), ncols).T


def chebyshev_moments_from_rows(rows: np.ndarray, count: int, weights: np.ndarray | None = None) -> np.ndarray:
    """Moments S_k = sum_i w_i T_k(t_i), k < count <= 2m - 1, from stored rows T_0 .. T_{m-1}.

    Uses T_{m-1+j} = 2 T_{m-1} T_j - T_{m-1-j} (from T_a T_b = (T_{a+b} + T_{|a-b|}) / 2),
    so the higher moments cost one extra pass (a product with w T_{m-1})
    instead of ``count - m`` recurrence passes. ``rows`` is (m, n).
    """
    m = rows.shape[0]
    if count > 2 * m - 1:
        raise ValueError("count must be at most 2 * rows - 1")
    out = np.zeros(count, dtype=rows.dtype)
    k0 = min(m, count)
    if k0 == 0:
        return out
    out[:k0] = np.einsum("jn->j", rows[:k0]) if weights is None else np.einsum("jn,n->j", rows[:k0], weights)
    if count > m:
        last = rows[m - 1] if weights is None else rows[m - 1] * weights
        extra = np.einsum("jn,n->j", rows[1 : count - m + 1], last)
        for j in range(1, count - m + 1):
            out[m - 1 + j] = 2 * extra[j - 1] - out[m - 1 - j]
    return out


def chebyshev_values(t: np.ndarray, coef: np.ndarray) -> np.ndarray:
    """Evaluate sum_k coef[k] T_k(t) by Clenshaw's recurrence (stable)."""
    t = np.asarray(t)
    coef = np.asarray(coef)
    if coef.size == 0:
        return np.zeros_like(t)
    b1 = np.zeros_like(t)
    b2 = np.zeros_like(t)
    two_t = 2 * t
    for ck in coef[:0:-1]:
        b1, b2 = ck + two_t * b1 - b2, b1
    return coef[0] + t * b1 - b2


_CTX = decimal.Context(prec=80)


def as_decimal(value) -> decimal.Decimal:
    """Value of a float64 or longdouble scalar as an 80-digit Decimal (exact for doubles)."""
    if isinstance(value, decimal.Decimal):
        return value
    if isinstance(value, np.longdouble):
        num, den = value.as_integer_ratio()
        return _CTX.divide(decimal.Decimal(int(num)), decimal.Decimal(int(den)))
    return decimal.Decimal(float(value))


def _cheb_to_power_t(ncols: int) -> list[list[int]]:
    """Integer matrix M with T_j(t) = sum_i M[i][j] t**i (rows: powers, cols: T_j)."""
    cols: list[list[int]] = []
    for j in range(ncols):
        if j == 0:
            col = [1] + [0] * (ncols - 1)
        elif j == 1:
            col = [0, 1] + [0] * (ncols - 2)
        else:
            a, b = cols[j - 1], cols[j - 2]
            col = [(2 * a[i - 1] if i >= 1 else 0) - b[i] for i in range(ncols)]
        cols.append(col)
    return [[cols[j][i] for j in range(ncols)] for i in range(ncols)]


@lru_cache(maxsize=128)
def power_conversion(
    ncols: int, offset: float, scale: float, through_origin: bool = False
) -> tuple[tuple[decimal.Decimal, ...], ...]:
    """Matrix C with power coefficients (original x) = C @ basis coefficients, in 80-digit decimals.

    Ordinary fits use the basis T_j(t). Through-origin fits use z * T_j(t) with
    z = x / scale (so the model has no constant term); their output has
    ``ncols + 1`` rows, the first (constant) row being zero. 80 significant
    digits make the conversion exact for every practical purpose: its rounding
    is some 60 orders of magnitude below double precision.
    """
    ctx = _CTX
    off = decimal.Decimal(float(offset))
    inv_sc = ctx.divide(decimal.Decimal(1), decimal.Decimal(float(scale)))
    m = _cheb_to_power_t(ncols)
    inv_sc_pow = [decimal.Decimal(1)]
    neg_off_pow = [decimal.Decimal(1)]
    for _ in range(ncols):
        inv_sc_pow.append(ctx.multiply(inv_sc_pow[-1], inv_sc))
        neg_off_pow.append(ctx.multiply(neg_off_pow[-1], -off))
    # p[k][i]: coefficient of x**k in t**i = ((x - off) * inv_sc)**i
    p = [[decimal.Decimal(0)] * ncols for _ in range(ncols)]
    for i in range(ncols):
        for k in range(i + 1):
            p[k][i] = ctx.multiply(ctx.multiply(decimal.Decimal(comb(i, k)), neg_off_pow[i - k]), inv_sc_pow[i])
    conv = [
        [
            _dot(ctx, [p[k][i] for i in range(j + 1)], [decimal.Decimal(m[i][j]) for i in range(j + 1)])
            for j in range(ncols)
        ]
        for k in range(ncols)
    ]
    if through_origin:
        conv = [[decimal.Decimal(0)] * ncols] + [[ctx.multiply(v, inv_sc) for v in row] for row in conv]
    return tuple(tuple(row) for row in conv)


def _dot(ctx, a, b) -> decimal.Decimal:
    total = decimal.Decimal(0)
    for u, v in zip(a, b, strict=False):
        total = ctx.add(total, ctx.multiply(u, v))
    return total


def _nonzero(row) -> list[int]:
    return [j for j, v in enumerate(row) if v != 0]


def convert_vector(conv, vec) -> np.ndarray:
    """Power coefficients C @ vec, rounded once to float64."""
    dv = [as_decimal(v) for v in vec]
    out = []
    for row in conv:
        nz = _nonzero(row)
        out.append(float(_dot(_CTX, [row[j] for j in nz], [dv[j] for j in nz])))
    return np.array(out, dtype=np.float64)


def convert_covariance(conv, sym: np.ndarray) -> np.ndarray:
    """C @ S @ C.T for a symmetric S, accumulated in 80-digit decimals, rounded once.

    C is triangular (a power x**k only takes basis terms of degree >= k), so
    only its nonzero entries are multiplied.
    """
    n = sym.shape[0]
    ds = [[as_decimal(sym[i, j]) for j in range(n)] for i in range(n)]
    nzs = [_nonzero(row) for row in conv]
    # cs[i][j] = sum_k C[i][k] S[k][j]
    cs = [
        [_dot(_CTX, [row[k] for k in nz], [ds[k][j] for k in nz]) for j in range(n)]
        for row, nz in zip(conv, nzs, strict=False)
    ]
    out = np.empty((len(conv), len(conv)))
    for i in range(len(conv)):
        for j in range(i, len(conv)):
            nz = nzs[j]
            out[i, j] = out[j, i] = float(_dot(_CTX, [cs[i][k] for k in nz], [conv[j][k] for k in nz]))
    return out
