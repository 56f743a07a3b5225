"""One polynomial least-squares fit, accurate to the last digits that matter.

How the fit is computed
-----------------------
1. x is mapped to t in [-1, 1] (see ``_basis.domain_map``) and the basis is
   T_0(t) .. T_d(t) (times z = x / scale for a fit through the origin). The
   basis rows are built once, in extended precision (np.longdouble, 80-bit on
   x86-64), and reused by every later step. Weights w multiply squared residuals.
2. A Householder QR of the weighted [A | y] in double precision (LAPACK
   dgeqrf, the only O(n d^2) step; Q is never formed) gives the starting
   solution and the condition number. The normal equations are never solved.
3. The Gram matrix A^T W A comes from 2d + 1 Chebyshev moments
   (T_i T_j = (T_{i+j} + T_{|i-j|}) / 2; the moments above d reuse the stored
   rows through T_{d+j} = 2 T_d T_j - T_{d-j}), O(n d), in longdouble. Its
   Cholesky factor R (or the QR's R when it has none) preconditions the
   iterative refinement, with residuals in longdouble:
   c <- c + (R^T R)^-1 A^T W r.
   Each step is two O(n d) passes; the loop stops as soon as the predicted
   error of the next step is below rounding (one step on a well-conditioned
   design) or when it reaches the rounding floor. The RSS at the final
   coefficients follows from the last residual without another pass.
4. Small fits (rows x coefficients <= ``POLISH_LIMIT``) get further refinement
   steps whose residual, gradient and Gram matrix are computed in 50-digit
   decimals, and a decimal refinement of the inverse Gram matrix. This removes
   the longdouble rounding of large residuals, which alone would cap heavily
   noisy sets such as NIST's Wampler5 at about 11.5 digits.
5. Chebyshev coefficients and their covariance are converted to the power basis
   of the original x in 80-digit decimals and rounded once.

This reaches at least 13 correct digits (LRE) on the NIST StRD polynomial sets
the test-suite holds (limited by the rounding of their decimal data to
doubles) and all 15 printed digits on exactly representable sets such as
Wampler1, Wampler3-5 and NoInt1-2.

Notes
-----
* Double-precision data limit what any method can recover. For designs whose
  mapped Chebyshev basis has a condition number above about 1e9 the refinement
  may not settle; the fit then keeps its best solution and says so in
  ``warnings``: the last digits of coefficients and standard errors are then
  not to be trusted.
* ``degree`` may not exceed the number of distinct x values minus one.
* Large fits take about 1.5-2x the time of numpy's ``Polynomial.fit`` (see
  benchmarks/bench_fit.py); most of it is longdouble arithmetic, which has no
  vector instructions.
"""

from __future__ import annotations

import contextlib
import decimal
import math
import warnings as _warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy.linalg import lapack as _lapack
from scipy.linalg import solve_triangular

from . import _basis
from ._errors import FitError, RankWarning

LD = np.longdouble
MODEL_FORMAT = "degreescope.polynomial-model"
MODEL_VERSION = 1

__all__ = ["PolynomialFit", "fit_polynomial", "validate_xyw", "t_quantile"]


def t_quantile(level: float, dof: int) -> float:
    """Two-sided Student's t quantile for a central interval of ``level`` with ``dof`` degrees of freedom.

    scipy.special.stdtrit is the inverse of the t distribution's CDF (the same
    function scipy.stats.t.ppf uses), without importing scipy.stats, which costs
    more than half a second at start-up.
    """
    from scipy.special import stdtrit

    return float(stdtrit(dof, 0.5 + float(level) / 2.0))


# ----------------------------------------------------------------------------
# input checks shared by fits and sweeps


Y_MAGNITUDE_LIMIT = 1e150  # |y| beyond this (or below its inverse) overflows (underflows) y**2 sums


def validate_xyw(x, y, weights=None) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Return float64 copies of x, y, weights after checking them; raise FitError."""
    try:
        x = np.asarray(x, dtype=np.float64).ravel()
        y = np.asarray(y, dtype=np.float64).ravel()
    except (TypeError, ValueError) as exc:
        raise FitError(f"x and y must be numbers ({exc}); pick numeric columns.") from None
    if x.shape != y.shape:
        raise FitError(f"Expected x and y to have the same length; got {x.size} and {y.size} values.")
    if x.size == 0:
        raise FitError("There are no data rows to fit; load a file with at least two rows of numbers.")
    if not (np.isfinite(x).all() and np.isfinite(y).all()):
        raise FitError("x and y must be finite numbers; remove rows with missing or infinite values first.")
    w = None
    if weights is not None:
        try:
            w = np.asarray(weights, dtype=np.float64).ravel()
        except (TypeError, ValueError):
            raise FitError("Weights must be numbers; pick a numeric weights column.") from None
        if w.shape != x.shape:
            raise FitError(f"Expected one weight per row; got {w.size} weights for {x.size} rows.")
        bad = ~(np.isfinite(w) & (w > 0))
        if bad.any():
            raise FitError(
                f"Weights must be positive and finite; {int(bad.sum())} of {w.size} are not "
                f"(first at row {int(np.argmax(bad)) + 1}). Fix or drop those rows."
            )
    if np.unique(x).size < 2:
        raise FitError("x has fewer than two distinct values; a curve needs at least two. Choose another x column.")
    if not np.isfinite(float(x.max()) - float(x.min())):
        raise FitError(
            f"The x values span {float(x.min()):.3g} to {float(x.max()):.3g}, a range too wide for double precision; "
            "express x in larger units (rescale it) and fit again."
        )
    ymax = float(np.max(np.abs(y)))
    if ymax > Y_MAGNITUDE_LIMIT or 0.0 < ymax < 1.0 / Y_MAGNITUDE_LIMIT:
        # sums of squared residuals would overflow to infinity or underflow to zero in double precision
        raise FitError(
            f"The y values reach {ymax:.3g} at most, {'above' if ymax > 1 else 'below'} what sums of squares in double "
            f"precision can hold (about 1e{'' if ymax > 1 else '-'}150); express y in "
            f"{'larger' if ymax > 1 else 'smaller'} units (rescale it) and fit again."
        )
    return x, y, w


# ----------------------------------------------------------------------------
# BLAS threads

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


# ----------------------------------------------------------------------------
# small extended-precision helpers


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


_EPS_LD = float(np.finfo(LD).eps)
# Fits with at most this many (rows x coefficients) get a last refinement step
# whose residual and gradient are computed in 50-digit decimals.
POLISH_LIMIT = 10_000
_POLISH_CTX = decimal.Context(prec=50)


def _times(a, b):
    if a is None:
        return b
    if b is None:
        return a
    return a * b


def _cholesky_ld(g: np.ndarray) -> np.ndarray | None:
    """Upper-triangular R with R^T R = g in longdouble, or None if g is not safely positive definite."""
    p = g.shape[0]
    r = np.zeros((p, p), dtype=LD)
    for j in range(p):
        s = g[j, j] - r[:j, j] @ r[:j, j]
        if not s > 64 * LD(_EPS_LD) * g[j, j]:
            return None
        r[j, j] = np.sqrt(s)
        if j + 1 < p:
            r[j, j + 1 :] = (g[j, j + 1 :] - r[:j, j] @ r[:j, j + 1 :]) / r[j, j]
    return r


def _polish_decimal(
    x, y, w, offset, scale, through_origin, c_ld, factor, gram, contraction: float = 1.0, max_steps: int = 4
):
    """Refinement steps with the residual and gradient in 50-digit decimals.

    Longdouble residuals carry rounding of about 1e-19 times |y|. When the
    residuals are large (heavy noise) and the power-basis coefficients come out
    of strong cancellation (x far from 0 relative to its range), that rounding
    alone limits the coefficients to some 11-12 digits; on ill-conditioned
    designs it also sets a floor for the longdouble refinement. These steps
    remove both on small data sets, where decimals are cheap.

    Returns (coefficients as Decimals, RSS as Decimal, Gram matrix as nested
    lists of Decimals, settled: bool).
    """
    D = decimal.Decimal
    p = c_ld.size
    with decimal.localcontext(_POLISH_CTX):
        # object arrays of Decimals: numpy runs the loops, Decimal does the arithmetic
        xd = np.array([D(v) for v in x.tolist()], dtype=object)
        yd = np.array([D(v) for v in y.tolist()], dtype=object)
        wd = None if w is None else np.array([D(v) for v in w.tolist()], dtype=object)
        t = (xd - D(float(offset))) / D(float(scale))
        v = xd / D(float(scale)) if through_origin else None
        mw = wd if v is None else (v * v if wd is None else wd * v * v)
        rows = [np.full(x.size, D(1), dtype=object), t]
        two_t = 2 * t
        for _ in range(2, 2 * p - 1):
            rows.append(two_t * rows[-1] - rows[-2])
        mom = [r.sum() if mw is None else (r * mw).sum() for r in rows[: 2 * p - 1]]
        rows = rows[:p]
        gram_dec = [[(mom[i + j] + mom[abs(i - j)]) / 2 for j in range(p)] for i in range(p)]
        coef = [_basis.as_decimal(c) for c in c_ld]
        settled = False
        rss_new = D(0)
        prev = None
        for _ in range(max_steps):
            f = rows[0] * coef[0]
            for k in range(1, p):
                f = f + rows[k] * coef[k]
            if v is not None:
                f = f * v
            r = yd - f
            wr = r if wd is None else wd * r
            rss = (wr * r).sum()
            if v is not None:
                wr = wr * v
            grad = [(rk * wr).sum() for rk in rows]
            g_ld = np.array([LD(str(gv)) for gv in grad], dtype=LD)
            dc = _solve_rtr(factor, g_ld)
            dcd = [_basis.as_decimal(c) for c in dc]
            coef = [ck + dk for ck, dk in zip(coef, dcd, strict=False)]
            gd = sum((a * b for a, b in zip(dcd, grad, strict=False)), D(0))
            quad = sum((dcd[i] * gram_dec[i][j] * dcd[j] for i in range(p) for j in range(p)), D(0))
            rss_new = rss - 2 * gd + quad
            size = max(abs(c) for c in coef)
            step = max(abs(d) for d in dcd)
            # stop when this step, or the predicted next one (contraction x step), is below 1e-25 relative
            if (
                size == 0
                or step <= D("1e-25") * size
                or (contraction < 0.5 and D(contraction) * step <= D("1e-25") * size)
            ):
                settled = True
                break
            if prev is not None and step > prev / 2:
                break
            prev = step
    if rss_new < 0:
        rss_new = D(0)
    return coef, rss_new, gram_dec, settled


def _refine_inverse_decimal(gram_dec, inv_ld: np.ndarray, factor: np.ndarray, steps: int = 2):
    """Refine an inverse of the decimal Gram matrix: X <- X + (R^T R)^-1 (I - G X), residual in decimals."""
    p = inv_ld.shape[0]
    with decimal.localcontext(_POLISH_CTX):
        x = [[_basis.as_decimal(inv_ld[i, j]) for j in range(p)] for i in range(p)]
        for _ in range(steps):
            e = np.empty((p, p), dtype=LD)
            for i in range(p):
                gi = gram_dec[i]
                for j in range(p):
                    acc = decimal.Decimal(int(i == j))
                    for k in range(p):
                        acc -= gi[k] * x[k][j]
                    e[i, j] = LD(str(acc))
            corr = _solve_rtr(factor, e)
            x = [[x[i][j] + _basis.as_decimal(corr[i, j]) for j in range(p)] for i in range(p)]
        out = np.empty((p, p), dtype=object)
        for i in range(p):
            for j in range(p):
                out[i, j] = (x[i][j] + x[j][i]) / 2
    return out


def _gram_from_moments(moments: np.ndarray, p: int) -> np.ndarray:
    """A^T A for a Chebyshev basis from moments S_k = sum w T_k (k = 0 .. 2p - 2)."""
    g = np.empty((p, p), dtype=moments.dtype)
    for i in range(p):
        for j in range(p):
            g[i, j] = (moments[i + j] + moments[abs(i - j)]) / 2
    return g


# ----------------------------------------------------------------------------
# the fit result


@dataclass(frozen=True, eq=False)
class PolynomialFit:
    """A fitted polynomial y = b0 + b1 x + ... + bd x**d (power basis, original units).

    Evaluation and intervals use the stable Chebyshev form internally; the
    power-basis numbers are for reading, reporting and hand-over.
    """

    degree: int
    through_origin: bool
    coefficients: np.ndarray
    standard_errors: np.ndarray
    covariance: np.ndarray
    residual_sd: float
    r_squared: float
    adjusted_r_squared: float
    rmse: float
    dof: int
    n: int
    condition_number: float
    domain: tuple[float, float]
    rss: float
    weighted: bool
    # internal, stable form
    offset: float
    scale: float
    basis_coefficients: np.ndarray
    basis_inverse_gram: np.ndarray  # (A^T A)^-1 in the Chebyshev basis, unscaled by residual variance
    warnings: tuple[str, ...] = field(default=())
    x_name: str | None = None
    y_name: str | None = None
    x_unit: str | None = None
    y_unit: str | None = None

    # -- evaluation ---------------------------------------------------------
    def _basis_rows(self, x) -> np.ndarray:
        x = np.asarray(x, dtype=np.float64)
        t = _basis.to_window(x, self.offset, self.scale)
        ncols = self.basis_coefficients.size
        a = _basis.chebyshev_vander(np.atleast_1d(t), ncols)
        if self.through_origin:
            a = a * (np.atleast_1d(x) / self.scale)[:, None]
        return a

    def predict(self, x) -> np.ndarray:
        """Fitted values at x (array-like), evaluated in the stable form."""
        x = np.asarray(x, dtype=np.float64)
        t = _basis.to_window(x, self.offset, self.scale)
        yhat = _basis.chebyshev_values(t, self.basis_coefficients)
        if self.through_origin:
            yhat = yhat * (x / self.scale)
        return yhat

    def outside_domain(self, x) -> np.ndarray:
        """True where x lies outside the x range the model was fitted on."""
        x = np.asarray(x, dtype=np.float64)
        lo, hi = self.domain
        return (x < lo) | (x > hi)

    def standard_error_of_fit(self, x) -> np.ndarray:
        a = self._basis_rows(x)
        quad = np.einsum("ij,jk,ik->i", a, self.basis_inverse_gram, a)
        return self.residual_sd * np.sqrt(np.maximum(quad, 0.0))

    def band(self, x, kind: str = "confidence", level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
        """Lower and upper limits of the confidence band (for the mean) or the
        prediction band (for a new single observation) at ``level``.

        With weights, the prediction band is for a new observation of weight 1.
        """
        if kind not in ("confidence", "prediction"):
            raise FitError(f'Interval kind must be "confidence" or "prediction", not {kind!r}.')
        if not (0.0 < float(level) < 1.0):
            raise FitError(f"Interval level must be between 0 and 1 (e.g. 0.95), not {level!r}.")
        x = np.asarray(x, dtype=np.float64)
        yhat = self.predict(x)
        if self.dof <= 0:
            nan = np.full_like(yhat, np.nan, dtype=np.float64)
            return nan, nan.copy()
        se = self.standard_error_of_fit(x)
        if kind == "prediction":
            se = np.sqrt(se**2 + self.residual_sd**2)
        q = t_quantile(level, self.dof)
        return yhat - q * se, yhat + q * se

    def equation(self, *, digits: int = 6, x: str = "x", y: str = "y") -> str:
        """The fitted equation as plain text, constant first."""
        parts: list[str] = []
        for k, c in enumerate(self.coefficients):
            if self.through_origin and k == 0:
                continue
            mag = f"{abs(c):.{digits}g}"
            term = mag if k == 0 else (f"{mag}·{x}" if k == 1 else f"{mag}·{x}^{k}")
            if not parts:
                parts.append(("−" if c < 0 else "") + term)
            else:
                parts.append(("− " if c < 0 else "+ ") + term)
        return f"{y} = " + (" ".join(parts) if parts else "0")

    # -- model file ---------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        """The JSON-safe model file that ``degreescope predict`` reads."""
        return {
            "format": MODEL_FORMAT,
            "version": MODEL_VERSION,
            "degree": self.degree,
            "through_origin": self.through_origin,
            "x_name": self.x_name,
            "y_name": self.y_name,
            "x_unit": self.x_unit,
            "y_unit": self.y_unit,
            "coefficients": [float(v) for v in self.coefficients],
            "standard_errors": [_num(v) for v in self.standard_errors],
            "covariance": [[_num(v) for v in row] for row in self.covariance],
            "residual_sd": _num(self.residual_sd),
            "r_squared": _num(self.r_squared),
            "adjusted_r_squared": _num(self.adjusted_r_squared),
            "rmse": _num(self.rmse),
            "dof": self.dof,
            "rows_used": self.n,
            "weighted": self.weighted,
            "condition_number": _num(self.condition_number),
            "domain": [float(self.domain[0]), float(self.domain[1])],
            "stable_form": {
                "basis": "chebyshev" + ("-times-x" if self.through_origin else ""),
                "offset": float(self.offset),
                "scale": float(self.scale),
                "coefficients": [float(v) for v in self.basis_coefficients],
                "inverse_gram": [[float(v) for v in row] for row in self.basis_inverse_gram],
            },
            "warnings": list(self.warnings),
        }

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> PolynomialFit:
        """Rebuild a fit from ``to_dict()`` output; raise FitError on a malformed model."""
        try:
            if data.get("format") != MODEL_FORMAT:
                raise FitError(
                    "This is not a degreescope model file (its 'format' field is missing or different); "
                    "save one with `degreescope fit ... --save-model`."
                )
            if int(data.get("version", 0)) > MODEL_VERSION:
                raise FitError(
                    f"This model file has version {data['version']}, newer than this degreescope reads "
                    f"({MODEL_VERSION}); upgrade degreescope."
                )
            sf = data["stable_form"]
            coef = np.asarray(data["coefficients"], dtype=np.float64)
            igram = np.asarray(sf["inverse_gram"], dtype=np.float64)
            bcoef = np.asarray(sf["coefficients"], dtype=np.float64)
            degree = int(data["degree"])
            p = degree + 1
            q = degree if bool(data.get("through_origin", False)) else p  # through the origin: no constant column
            if igram.shape != (q, q) or coef.shape != (p,) or bcoef.shape != (q,):
                raise FitError("The model file is inconsistent (array sizes do not match its degree); re-save it.")
            offset, scale = float(sf["offset"]), float(sf["scale"])
            domain = (float(data["domain"][0]), float(data["domain"][1]))
            dof, n = int(data["dof"]), int(data["rows_used"])
            if not (
                np.isfinite(bcoef).all()
                and np.isfinite(igram).all()
                and math.isfinite(offset)
                and math.isfinite(scale)
                and scale > 0
                and all(math.isfinite(v) for v in domain)
                and domain[0] < domain[1]
                and 0 <= dof < n
                and len(data["domain"]) == 2
                and not _unnum(data["residual_sd"]) < 0
            ):
                raise FitError(
                    "The model file holds values no fit produces (a missing or infinite coefficient, an empty x "
                    "range, or impossible row counts); re-save it with degreescope."
                )
            warnings = data.get("warnings", [])
            if not isinstance(warnings, list) or not all(isinstance(w, str) for w in warnings):
                raise FitError("The model file's 'warnings' must be a list of sentences; re-save it with degreescope.")
            for key in ("x_name", "y_name", "x_unit", "y_unit"):
                if data.get(key) is not None and not isinstance(data[key], str):
                    raise FitError(f"The model file's {key!r} must be text; re-save it with degreescope.")
            return cls(
                degree=degree,
                through_origin=bool(data.get("through_origin", False)),
                coefficients=coef,
                standard_errors=np.array([_unnum(v) for v in data["standard_errors"]], dtype=np.float64),
                covariance=np.array([[_unnum(v) for v in row] for row in data["covariance"]], dtype=np.float64),
                residual_sd=_unnum(data["residual_sd"]),
                r_squared=_unnum(data["r_squared"]),
                adjusted_r_squared=_unnum(data.get("adjusted_r_squared")),
                rmse=_unnum(data.get("rmse")),
                dof=dof,
                n=n,
                condition_number=_unnum(data.get("condition_number")),
                domain=domain,
                rss=float("nan"),
                weighted=bool(data.get("weighted", False)),
                offset=offset,
                scale=scale,
                basis_coefficients=bcoef,
                basis_inverse_gram=igram,
                warnings=tuple(warnings),
                x_name=data.get("x_name"),
                y_name=data.get("y_name"),
                x_unit=data.get("x_unit"),
                y_unit=data.get("y_unit"),
            )
        except FitError:
            raise
        except (KeyError, TypeError, ValueError, IndexError, OverflowError, AttributeError) as exc:
            raise FitError(
                f"The model file is incomplete or malformed ({exc!s}); re-save it with degreescope."
            ) from None


def _num(v: float) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None


def _unnum(v) -> float:
    return float("nan") if v is None else float(v)


# ----------------------------------------------------------------------------
# the fit


def fit_polynomial(
    x,
    y,
    degree: int,
    *,
    weights=None,
    through_origin: bool = False,
    x_name: str | None = None,
    y_name: str | None = None,
    x_unit: str | None = None,
    y_unit: str | None = None,
) -> PolynomialFit:
    """Least-squares polynomial of ``degree`` in x, optionally weighted or through the origin.

    Parameters
    ----------
    x, y : array-like of float, the same length.
    degree : int, >= 0 (>= 1 when ``through_origin``).
    weights : array-like of positive floats, default=None
        Weights w_i multiply the squared residuals (use 1 / variance).
    through_origin : bool, default=False
        Fit y = b1 x + ... + bd x**d with no constant; R² is then the uncentered one.

    Raises
    ------
    FitError
        For invalid inputs or a degree the data cannot carry.
    """
    x, y, w = validate_xyw(x, y, weights)
    try:
        degree = int(degree)
    except (TypeError, ValueError):
        raise FitError(f"Degree must be a whole number, not {degree!r}.") from None
    if degree < 0 or (through_origin and degree < 1):
        raise FitError(
            "Degree must be at least 1 for a fit through the origin." if through_origin else "Degree must be 0 or more."
        )
    n_distinct = np.unique(x).size
    ncols = degree if through_origin else degree + 1
    if n_distinct < ncols:
        raise FitError(
            f"Degree {degree} needs at least {ncols} distinct x values; the data have {n_distinct}. "
            f"Use degree {n_distinct - 1 + (1 if through_origin else 0)} or lower."
        )
    n = x.size
    notes: list[str] = []
    lo, hi = float(x.min()), float(x.max())
    if through_origin:
        offset, scale = domain_for_origin(lo, hi)
    else:
        offset, scale = _basis.domain_map(lo, hi)

    # --- basis rows and normal-equation sums in extended precision (O(n d)) --
    # Model: y ~ v(x) * sum_j c_j T_j(t), weight w; v = x / scale through the origin, else 1.
    x_ld = x.astype(LD)
    t_ld = (x_ld - LD(offset)) / LD(scale)
    rows_ld = _basis.chebyshev_rows(t_ld, ncols)  # (ncols, n), unscaled T_j(t_i)
    y_ld = y.astype(LD)
    w_ld = None if w is None else w.astype(LD)
    v_ld = x_ld / LD(scale) if through_origin else None
    u_ld = _times(w_ld, v_ld)  # gradient weight w * v
    m_ld = _times(u_ld, v_ld)  # moment weight w * v**2
    gram = _gram_from_moments(_basis.chebyshev_moments_from_rows(rows_ld, 2 * ncols - 1, m_ld), ncols)
    r_ld = _cholesky_ld(gram)

    # --- Householder QR of the weighted [A | y] in double precision ----------
    # The only O(n d^2) step. It gives the starting solution and the condition
    # number without squaring it; the normal equations are never solved.
    sw = None if w is None else np.sqrt(w)
    rows = np.empty((ncols + 1, n))
    rows[:ncols] = rows_ld
    if through_origin:
        rows[:ncols] *= x / scale
    rows[ncols] = y
    if sw is not None:
        rows *= sw
    with single_thread_blas():
        r_aug = qr_r(rows.T)
    del rows
    r_qr = r_aug[:ncols, :ncols]
    cond = condition_of(r_qr)
    coef = np.zeros(ncols, dtype=LD)
    if np.isfinite(cond) and cond <= 1.0 / (max(n, ncols) * np.finfo(np.float64).eps):
        coef = solve_triangular(r_qr, r_aug[:ncols, ncols]).astype(LD)
    # Preconditioner for the corrections: the extended-precision factor of the
    # Gram matrix, when it exists, contracts the error by cond² eps_ld per step
    # instead of cond² eps with the double-precision R.
    if r_ld is not None:
        factor = r_ld
        contraction = cond * cond * _EPS_LD * 4 * ncols
    else:
        factor = r_qr
        contraction = cond * cond * np.finfo(np.float64).eps * 4 * ncols
    if not np.isfinite(cond) or cond > 1.0 / (max(n, ncols) * np.finfo(np.float64).eps):
        msg = (
            f"The design at degree {degree} is numerically rank deficient (condition number {cond:.3g}); "
            "the coefficients are not determined by the data. Use a lower degree."
        )
        _warnings.warn(msg, RankWarning, stacklevel=2)
        raise FitError(msg)

    # --- iterative refinement with residuals in extended precision ----------
    # c <- c + (R^T R)^-1 A^T W (y - A c); each step is two O(n d) passes. The
    # loop stops as soon as the predicted error of the next step (contraction
    # times this step) is below rounding, so a well-conditioned fit needs one step.
    c_ld = np.asarray(coef, dtype=LD)
    converged = False
    rss_ld = LD(0)
    grad = np.zeros(ncols, dtype=LD)
    prev_step = None
    for _ in range(8):
        fitted = np.einsum("j,jn->n", c_ld, rows_ld)
        res = y_ld - (fitted if v_ld is None else v_ld * fitted)
        wres = res if w_ld is None else w_ld * res
        grad = np.einsum("jn,n->j", rows_ld, wres if v_ld is None else v_ld * wres)
        dc = _solve_rtr(factor, grad)
        rss_at_c = res @ wres
        c_ld = c_ld + dc
        # RSS at the updated coefficients without another pass over the data
        rss_ld = rss_at_c - 2 * (dc @ grad) + dc @ (gram @ dc)
        size = np.max(np.abs(c_ld))
        step = np.max(np.abs(dc))
        if size == 0 or step <= 4 * _EPS_LD * size or (contraction < 0.5 and contraction * step <= 4 * _EPS_LD * size):
            converged = True
            break
        if prev_step is not None and step > 0.5 * prev_step:
            break  # no more progress: the rounding floor of longdouble residuals is reached
        prev_step = step
    # a floor at a relative step below 1e-12 still leaves the coefficients good to ~12 digits
    settled = converged or (size > 0 and step <= 1e-12 * size)
    rss_ld = max(rss_ld, LD(0))
    coef_exact = gram_dec = rss_dec = None
    if n * ncols <= POLISH_LIMIT:
        polished = _polish_decimal(
            x,
            y,
            w,
            offset,
            scale,
            through_origin,
            c_ld,
            factor,
            gram,
            contraction=contraction,
            max_steps=4 if settled else 12,
        )
        if polished[3]:  # keep the decimal result only when it settled
            coef_exact, rss_dec, gram_dec, settled = polished
            rss_ld = LD(str(rss_dec))
    if not settled:
        notes.append(
            f"The extended-precision refinement did not settle at degree {degree} "
            f"(condition number {cond:.3g}); the last digits of the coefficients and their standard errors may be inexact."
        )
    del rows_ld

    # --- inverse of the Gram matrix (from moments), refined -----------------
    eye = np.eye(ncols, dtype=LD)
    inv = _solve_rtr(factor, eye)
    err = np.max(np.abs(eye - gram @ inv))
    for _ in range(6):
        corr = _solve_rtr(factor, eye - gram @ inv)
        trial = inv + corr
        trial_err = np.max(np.abs(eye - gram @ trial))
        if not trial_err < err:  # keep the best iterate; a correction that does not help ends the loop
            break
        inv, err = trial, trial_err
        if np.max(np.abs(corr)) <= 4 * np.finfo(LD).eps * np.max(np.abs(inv)):
            break
    inv = (inv + inv.T) / 2
    inv_dec = _refine_inverse_decimal(gram_dec, inv, factor) if gram_dec is not None else None

    # --- statistics ---------------------------------------------------------
    dof = n - ncols
    rss = float(rss_ld)
    sigma2_ld = rss_ld / LD(dof) if dof > 0 else LD("nan")
    residual_sd = float(np.sqrt(sigma2_ld)) if dof > 0 else float("nan")
    yy = y_ld
    wsum = LD(n) if w_ld is None else np.sum(w_ld)
    dev = yy if through_origin else yy - (np.sum(yy if w_ld is None else w_ld * yy) / wsum)
    tss_ld = dev @ dev if w_ld is None else (w_ld * dev) @ dev
    if tss_ld > 0:
        r2 = float(LD(1) - rss_ld / tss_ld)
        denom_n = n if through_origin else n - 1
        adj = float(LD(1) - (LD(1) - LD(r2)) * LD(denom_n) / LD(dof)) if dof > 0 else float("nan")
    else:
        r2 = float("nan")
        adj = float("nan")
        notes.append("y does not vary, so R² is undefined.")
    rmse = float(np.sqrt(rss_ld / wsum))
    if dof <= 0:
        notes.append(
            f"Degree {degree} passes through every point ({n} rows, {ncols} coefficients): "
            "there is no residual scatter left to estimate uncertainty from."
        )

    # --- exact conversion to the power basis --------------------------------
    conv = _basis.power_conversion(ncols, offset, scale, through_origin)
    coef_pow = _basis.convert_vector(conv, c_ld if coef_exact is None else coef_exact)
    if dof > 0:
        if inv_dec is not None:
            with decimal.localcontext(_POLISH_CTX):
                s2 = rss_dec / dof
                cov_pow = _basis.convert_covariance(conv, inv_dec * s2)
        else:
            cov_pow = _basis.convert_covariance(conv, inv * sigma2_ld)
    else:
        cov_pow = np.full((degree + 1, degree + 1), np.nan)
    se_pow = np.sqrt(np.maximum(np.diag(cov_pow), 0.0))
    if through_origin:
        se_pow[0] = 0.0
    if cond > 1e10:
        notes.append(
            f"The fit at degree {degree} is ill-conditioned (condition number {cond:.3g} after mapping x to [-1, 1]); "
            "small changes in the data move the coefficients a lot."
        )

    return PolynomialFit(
        degree=degree,
        through_origin=through_origin,
        coefficients=coef_pow,
        standard_errors=se_pow,
        covariance=cov_pow,
        residual_sd=residual_sd,
        r_squared=r2,
        adjusted_r_squared=adj,
        rmse=rmse,
        dof=dof,
        n=n,
        condition_number=cond,
        domain=(lo, hi),
        rss=rss,
        weighted=w is not None,
        offset=offset,
        scale=scale,
        basis_coefficients=c_ld.astype(np.float64),
        basis_inverse_gram=inv.astype(np.float64),
        warnings=tuple(notes),
        x_name=x_name,
        y_name=y_name,
        x_unit=x_unit,
        y_unit=y_unit,
    )


def domain_for_origin(lo: float, hi: float) -> tuple[float, float]:
    """Domain map for through-origin fits: t spans the data, z = x / scale stays O(1)."""
    offset, scale = _basis.domain_map(lo, hi)
    scale = max(scale, abs(lo), abs(hi)) if scale > 0 else 1.0
    return offset, scale
