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

Extreme magnitudes: x and y beyond 2**±100 are divided by exact powers of two
before step 1 (``pow2_exponent``), so no sum of squares leaves double precision,
and every reported number is multiplied back exactly. Only what doubles cannot
hold is refused: non-finite values and an x range whose width overflows.
Covariance entries that a double cannot hold are given as infinite or zero, with
a warning.

Weights are inverse variances: a weights column (recorded as weighting "column")
or a named rule (``fitting.WEIGHTINGS``), whose weight at a new x gives the
prediction band there (s² / w(x0)).

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

import decimal
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from . import _basis
from ._errors import FitError
from ._linalg import EPS_LD as _EPS_LD
from ._linalg import LD, _cholesky_ld, _solve_rtr, condition_of, qr_r, single_thread_blas, solve_upper, t_quantile
from ._weighting import COLUMN_RULE, check_weighting, weight_at, weights_for

MODEL_FORMAT = "degreescope.polynomial-model"
MODEL_VERSION = 2  # 2 adds "weighting" and "plain_rmse"; version 1 files still load

__all__ = [
    "PolynomialFit",
    "fit_polynomial",
    "validate_xyw",
    "domain_for_origin",
    "pow2_exponent",
    "MODEL_FORMAT",
    "MODEL_VERSION",
    # re-exported from _linalg for the modules that import them from here
    "qr_r",
    "condition_of",
    "single_thread_blas",
    "t_quantile",
]

# Fits with at most this many (rows x coefficients) get a last refinement step
# whose residual and gradient are computed in 50-digit decimals.
POLISH_LIMIT = 10_000
_POLISH_CTX = decimal.Context(prec=50)
# y is scaled by an exact power of two when its largest magnitude lies outside [2**-POW2_SAFE, 2**POW2_SAFE]
POW2_SAFE = 100
COLUMN_INTERVAL_NOTE = (
    "Prediction intervals assume a weight of 1 at a new x (the weights came from a column, "
    "which cannot say what the weight at a new x is)."
)


# ----------------------------------------------------------------------------
# input checks shared by fits and sweeps


def validate_xyw(
    x: ArrayLike, y: ArrayLike, weights: ArrayLike | None = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray | None]:
    """Return float64 copies of x, y, weights after checking them; raise FitError.

    Only what double precision cannot hold is refused: non-finite values, and an x
    range whose span overflows. Extreme y magnitudes are scaled internally (``pow2_exponent``).
    """
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
    w = None if weights is None else _validate_weights(weights, x.size)
    if np.unique(x).size < 2:
        raise FitError("x has fewer than two distinct values; a curve needs at least two. Choose another x column.")
    if not np.isfinite(float(x.max()) - float(x.min())):
        raise FitError(
            f"The x values span {float(x.min()):.3g} to {float(x.max()):.3g}, a range too wide for double precision "
            "(its width overflows); express x in larger units (rescale it) and fit again."
        )
    return x, y, w


def _validate_weights(weights: ArrayLike, n: int) -> np.ndarray:
    try:
        w = np.asarray(weights, dtype=np.float64).ravel()
    except (TypeError, ValueError):
        raise FitError("Weights must be numbers; pick a numeric weights column.") from None
    if w.size != n:
        raise FitError(f"Expected one weight per row; got {w.size} weights for {n} rows.")
    bad = ~(np.isfinite(w) & (w > 0))
    if bad.any():
        raise FitError(
            f"Weights must be positive and finite; {int(bad.sum())} of {w.size} are not "
            f"(first at row {int(np.argmax(bad)) + 1}). Fix or drop those rows."
        )
    return w


def pow2_exponent(values: np.ndarray) -> int:
    """k such that values / 2**k keeps sums of squares inside double precision (0 when no scaling is needed).

    Dividing by an exact power of two changes no digit, so the fit of the scaled values,
    multiplied back by 2**k, is the fit of the original values.
    """
    top = float(np.max(np.abs(values))) if np.size(values) else 0.0
    if top == 0.0 or 2.0**-POW2_SAFE <= top <= 2.0**POW2_SAFE:
        return 0
    return int(math.frexp(top)[1])


def _times(a, b):
    if a is None:
        return b
    if b is None:
        return a
    return a * b


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

    ``weighting`` is "none", a named rule (see ``fitting.WEIGHTINGS``) or "column"
    (weights came from a column). ``plain_rmse`` is the unweighted RMSE of the
    residuals in y's units; for an unweighted fit it equals ``rmse``.
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
    basis_inverse_gram: np.ndarray  # (A^T W A)^-1 in the Chebyshev basis, unscaled by residual variance
    warnings: tuple[str, ...] = field(default=())
    x_name: str | None = None
    y_name: str | None = None
    x_unit: str | None = None
    y_unit: str | None = None
    weighting: str = "none"
    plain_rmse: float = float("nan")

    # -- evaluation ---------------------------------------------------------
    def _basis_rows(self, x: ArrayLike) -> np.ndarray:
        x = np.asarray(x, dtype=np.float64)
        t = _basis.to_window(x, self.offset, self.scale)
        ncols = self.basis_coefficients.size
        a = _basis.chebyshev_vander(np.atleast_1d(t), ncols)
        if self.through_origin:
            a = a * (np.atleast_1d(x) / self.scale)[:, None]
        return a

    def predict(self, x: ArrayLike) -> np.ndarray:
        """Fitted values at x (array-like), evaluated in the stable form."""
        x = np.asarray(x, dtype=np.float64)
        t = _basis.to_window(x, self.offset, self.scale)
        yhat = _basis.chebyshev_values(t, self.basis_coefficients)
        if self.through_origin:
            yhat = yhat * (x / self.scale)
        return yhat

    def outside_domain(self, x: ArrayLike) -> np.ndarray:
        """True where x lies outside the x range the model was fitted on."""
        x = np.asarray(x, dtype=np.float64)
        lo, hi = self.domain
        return (x < lo) | (x > hi)

    def standard_error_of_fit(self, x: ArrayLike) -> np.ndarray:
        """Standard error of the fitted mean at x."""
        a = self._basis_rows(x)
        quad = np.einsum("ij,jk,ik->i", a, self.basis_inverse_gram, a)
        return self.residual_sd * np.sqrt(np.maximum(quad, 0.0))

    def weight_at(self, x: ArrayLike) -> np.ndarray:
        """The weight of a new reading at x: the fit's named rule there (1 for "none" and "column")."""
        x = np.asarray(x, dtype=np.float64)
        return weight_at(self.weighting, x, self.predict(x))

    def band(self, x: ArrayLike, kind: str = "confidence", level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
        """Lower and upper limits of the confidence band (for the mean) or the
        prediction band (for a new single observation) at ``level``.

        A weighted fit's prediction band uses the variance s² / w(x0) of a new reading,
        with w from the fit's weighting rule (at the fitted response for the 1/y rules).
        With a weights column the weight at a new x is unknown and taken as 1 (the fit's
        warnings say so).
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
            # hypot: no square leaves double precision, whatever the magnitude of y
            se = np.hypot(se, self.residual_sd / np.sqrt(weight_at(self.weighting, x, yhat)))
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
        """The JSON-safe model file that ``degreescope predict`` reads.

        Version 2 adds "weighting" and "plain_rmse". Read-back needs the residual SD,
        dof, the stable form (basis, offset, scale, coefficients and inverse Gram
        matrix) and the calibrated x range ("domain"), all of which it holds.
        """
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
            "plain_rmse": _num(self.plain_rmse),
            "dof": self.dof,
            "rows_used": self.n,
            "weighted": self.weighted,
            "weighting": self.weighting,
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
        """Rebuild a fit from ``to_dict()`` output (version 1 or 2); raise FitError on a malformed model."""
        try:
            _check_model_header(data)
            _check_model_text(data)
            parts = _model_parts(data)
            return cls(**parts)
        except FitError:
            raise
        except (KeyError, TypeError, ValueError, IndexError, OverflowError, AttributeError) as exc:
            raise FitError(
                f"The model file is incomplete or malformed ({exc!s}); re-save it with degreescope."
            ) from None


def _check_model_header(data: dict[str, Any]) -> None:
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


def _model_parts(data: dict[str, Any]) -> dict[str, Any]:
    """The checked constructor arguments of a model file."""
    sf = data["stable_form"]
    coef = np.asarray(data["coefficients"], dtype=np.float64)
    igram = np.asarray(sf["inverse_gram"], dtype=np.float64)
    bcoef = np.asarray(sf["coefficients"], dtype=np.float64)
    degree = int(data["degree"])
    through_origin = bool(data.get("through_origin", False))
    q = degree if through_origin else degree + 1  # through the origin: no constant column
    if igram.shape != (q, q) or coef.shape != (degree + 1,) or bcoef.shape != (q,):
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
    weighted = bool(data.get("weighted", False))
    rmse = _unnum(data.get("rmse"))
    return dict(
        degree=degree,
        through_origin=through_origin,
        coefficients=coef,
        standard_errors=np.array([_unnum(v) for v in data["standard_errors"]], dtype=np.float64),
        covariance=np.array([[_unnum(v) for v in row] for row in data["covariance"]], dtype=np.float64),
        residual_sd=_unnum(data["residual_sd"]),
        r_squared=_unnum(data["r_squared"]),
        adjusted_r_squared=_unnum(data.get("adjusted_r_squared")),
        rmse=rmse,
        dof=dof,
        n=n,
        condition_number=_unnum(data.get("condition_number")),
        domain=domain,
        rss=float("nan"),
        weighted=weighted,
        offset=offset,
        scale=scale,
        basis_coefficients=bcoef,
        basis_inverse_gram=igram,
        warnings=tuple(data.get("warnings", [])),
        x_name=data.get("x_name"),
        y_name=data.get("y_name"),
        x_unit=data.get("x_unit"),
        y_unit=data.get("y_unit"),
        weighting=_model_weighting(data, weighted),
        plain_rmse=_unnum(data.get("plain_rmse")) if "plain_rmse" in data else (float("nan") if weighted else rmse),
    )


def _model_weighting(data: dict[str, Any], weighted: bool) -> str:
    """The weighting of a model file; version 1 files knew only whether they were weighted."""
    rule = data.get("weighting")
    if rule is None:
        return COLUMN_RULE if weighted else "none"
    if rule == COLUMN_RULE:
        return rule
    if not isinstance(rule, str):
        raise FitError("The model file's 'weighting' must be text; re-save it with degreescope.")
    return check_weighting(rule)


def _check_model_text(data: dict[str, Any]) -> None:
    warnings = data.get("warnings", [])
    if not isinstance(warnings, list) or not all(isinstance(w, str) for w in warnings):
        raise FitError("The model file's 'warnings' must be a list of sentences; re-save it with degreescope.")
    for key in ("x_name", "y_name", "x_unit", "y_unit"):
        if data.get(key) is not None and not isinstance(data[key], str):
            raise FitError(f"The model file's {key!r} must be text; re-save it with degreescope.")


def _num(v: float) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None


def _unnum(v) -> float:
    return float("nan") if v is None else float(v)


# ----------------------------------------------------------------------------
# the fit


@dataclass
class _Design:
    """The data of one fit in extended precision: basis rows, y, weights and the Gram matrix."""

    x: np.ndarray
    y: np.ndarray  # scaled by 2**-y_exp
    w: np.ndarray | None
    through_origin: bool
    offset: float
    scale: float
    ncols: int
    rows_ld: np.ndarray  # (ncols, n), unscaled T_j(t_i)
    y_ld: np.ndarray
    w_ld: np.ndarray | None
    v_ld: np.ndarray | None  # x / scale through the origin, else None
    gram: np.ndarray
    y_exp: int = 0
    x_exp: int = 0  # x above is x / 2**x_exp, and offset and scale are in those units

    @property
    def n(self) -> int:
        return self.x.size

    def residuals(self, c_ld: np.ndarray) -> np.ndarray:
        fitted = np.einsum("j,jn->n", c_ld, self.rows_ld)
        return self.y_ld - (fitted if self.v_ld is None else self.v_ld * fitted)


@dataclass
class _Start:
    coef: np.ndarray
    cond: float
    factor: np.ndarray  # preconditioner R (R^T R ~ Gram matrix)
    contraction: float


def fit_polynomial(
    x: ArrayLike,
    y: ArrayLike,
    degree: int,
    *,
    weights: ArrayLike | None = None,
    weighting: str | None = None,
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
        Weights w_i multiply the squared residuals (use 1 / variance). The fit records
        the weighting "column".
    weighting : str, default=None
        A named rule instead of a weights column: "none", "1/x", "1/x2", "1/y", "1/y2"
        (see ``fitting.WEIGHTINGS``). Its weight at a new x gives the prediction band there.
    through_origin : bool, default=False
        Fit y = b1 x + ... + bd x**d with no constant; R² is then the uncentered one.

    y of any magnitude a double holds is fitted: it is scaled internally by an exact
    power of two and every reported number is scaled back exactly.

    Raises
    ------
    FitError
        For invalid inputs, both ``weights`` and ``weighting``, or a degree the data cannot carry.
    """
    x, y, w, rule = _fit_inputs(x, y, weights, weighting)
    degree, ncols = _check_degree(x, degree, through_origin)
    design = _extended_basis(x, y, w, ncols, through_origin)
    notes: list[str] = []
    start = _qr_start(design, degree)
    c_ld, rss_ld, exact = _refine(design, start, degree, notes)
    inv, inv_dec = _inverse_gram(design.gram, start.factor, None if exact is None else exact[2])
    stats = _fit_statistics(design, c_ld, rss_ld, degree, notes)
    coef_pow, cov_pow = _to_power_basis(design, c_ld, exact, inv, inv_dec, stats["sigma2_ld"], degree)
    if start.cond > 1e10:
        notes.append(
            f"The fit at degree {degree} is ill-conditioned (condition number {start.cond:.3g} after mapping x to "
            "[-1, 1]); small changes in the data move the coefficients a lot."
        )
    if rule == COLUMN_RULE:
        notes.append(COLUMN_INTERVAL_NOTE)
    parts = dict(degree=degree, cond=start.cond, c_ld=c_ld, inv=inv, rule=rule, notes=notes)
    names = dict(x_name=x_name, y_name=y_name, x_unit=x_unit, y_unit=y_unit)
    return _assemble(design, parts, stats, coef_pow, cov_pow, names)


def _fit_inputs(x, y, weights, weighting):
    """Checked x, y, weights and the weighting's name ("none", a rule or "column")."""
    if weights is not None and weighting is not None:
        raise FitError("Give either a weights column or a named weighting, not both; drop one of them and fit again.")
    x, y, w = validate_xyw(x, y, weights)
    if w is not None:
        return x, y, w, COLUMN_RULE
    rule = check_weighting(weighting)
    return x, y, weights_for(rule, x, y), rule


def _check_degree(x: np.ndarray, degree, through_origin: bool) -> tuple[int, int]:
    """The degree as an int and the number of basis columns; raise FitError if the data cannot carry it."""
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
    return degree, ncols


def _extended_basis(x, y, w, ncols: int, through_origin: bool) -> _Design:
    """Basis rows and normal-equation sums in extended precision (O(n d)), y scaled by a power of two.

    Model: y ~ v(x) * sum_j c_j T_j(t), weight w; v = x / scale through the origin, else 1.
    """
    x_exp, y_exp = pow2_exponent(x), pow2_exponent(y)
    x = np.ldexp(x, -x_exp) if x_exp else x
    ys = np.ldexp(y, -y_exp) if y_exp else y
    lo, hi = float(x.min()), float(x.max())
    offset, scale = domain_for_origin(lo, hi) if through_origin else _basis.domain_map(lo, hi)
    x_ld = x.astype(LD)
    rows_ld = _basis.chebyshev_rows((x_ld - LD(offset)) / LD(scale), ncols)
    w_ld = None if w is None else w.astype(LD)
    v_ld = x_ld / LD(scale) if through_origin else None
    m_ld = _times(_times(w_ld, v_ld), v_ld)  # moment weight w * v**2
    gram = _gram_from_moments(_basis.chebyshev_moments_from_rows(rows_ld, 2 * ncols - 1, m_ld), ncols)
    return _Design(
        x=x,
        y=ys,
        w=w,
        through_origin=through_origin,
        offset=offset,
        scale=scale,
        ncols=ncols,
        rows_ld=rows_ld,
        y_ld=ys.astype(LD),
        w_ld=w_ld,
        v_ld=v_ld,
        gram=gram,
        y_exp=y_exp,
        x_exp=x_exp,
    )


def _qr_start(d: _Design, degree: int) -> _Start:
    """Householder QR of the weighted [A | y] in double precision: starting solution and condition number.

    The only O(n d^2) step; the normal equations are never solved.
    """
    ncols = d.ncols
    rows = np.empty((ncols + 1, d.n))
    rows[:ncols] = d.rows_ld
    if d.through_origin:
        rows[:ncols] *= d.x / d.scale
    rows[ncols] = d.y
    if d.w is not None:
        rows *= np.sqrt(d.w)
    with single_thread_blas():
        r_aug = qr_r(rows.T)
    del rows
    r_qr = r_aug[:ncols, :ncols]
    cond = condition_of(r_qr)
    if not np.isfinite(cond) or cond > 1.0 / (max(d.n, ncols) * np.finfo(np.float64).eps):
        msg = (
            f"The design at degree {degree} is numerically rank deficient (condition number {cond:.3g}); "
            "the coefficients are not determined by the data. Use a lower degree."
        )
        # an error only: a caller that catches it should not also find a warning on stderr
        raise FitError(msg)
    coef = solve_upper(r_qr, r_aug[:ncols, ncols]).astype(LD)
    # Preconditioner for the corrections: the extended-precision factor of the Gram matrix, when it
    # exists, contracts the error by cond² eps_ld per step instead of cond² eps with the double R.
    r_ld = _cholesky_ld(d.gram)
    if r_ld is not None:
        return _Start(coef, cond, r_ld, cond * cond * _EPS_LD * 4 * ncols)
    return _Start(coef, cond, r_qr, cond * cond * np.finfo(np.float64).eps * 4 * ncols)


def _refine(d: _Design, start: _Start, degree: int, notes: list[str]):
    """Iterative refinement with residuals in extended precision, then decimals on small fits.

    c <- c + (R^T R)^-1 A^T W (y - A c); each step is two O(n d) passes. The loop stops
    as soon as the predicted error of the next step (contraction times this step) is
    below rounding, so a well-conditioned fit needs one step.
    Returns (coefficients in longdouble, RSS, exact) with exact = (decimal coefficients,
    decimal RSS, decimal Gram matrix) when the decimal polish settled, else None.
    """
    c_ld, rss_ld, settled = _refine_ld(d, start)
    exact = None
    if d.n * d.ncols <= POLISH_LIMIT:
        w = None if d.w is None else d.w
        polished = _polish_decimal(
            d.x, d.y, w, d.offset, d.scale, d.through_origin, c_ld, start.factor, d.gram,
            contraction=start.contraction, max_steps=4 if settled else 12,
        )  # fmt: skip
        if polished[3]:  # keep the decimal result only when it settled
            exact = polished[:3]
            settled = True
            rss_ld = LD(str(polished[1]))
    if not settled:
        notes.append(
            f"The extended-precision refinement did not settle at degree {degree} (condition number "
            f"{start.cond:.3g}); the last digits of the coefficients and their standard errors may be inexact."
        )
    return c_ld, rss_ld, exact


def _refine_ld(d: _Design, start: _Start):
    """The longdouble refinement loop: (coefficients, RSS, settled)."""
    c_ld = np.asarray(start.coef, dtype=LD)
    converged = False
    rss_ld = LD(0)
    prev_step = None
    size = step = LD(0)
    for _ in range(8):
        res = d.residuals(c_ld)
        wres = res if d.w_ld is None else d.w_ld * res
        grad = np.einsum("jn,n->j", d.rows_ld, wres if d.v_ld is None else d.v_ld * wres)
        dc = _solve_rtr(start.factor, grad)
        rss_at_c = res @ wres
        c_ld = c_ld + dc
        # RSS at the updated coefficients without another pass over the data
        rss_ld = rss_at_c - 2 * (dc @ grad) + dc @ (d.gram @ dc)
        size = np.max(np.abs(c_ld))
        step = np.max(np.abs(dc))
        tiny = 4 * _EPS_LD * size
        if size == 0 or step <= tiny or (start.contraction < 0.5 and start.contraction * step <= tiny):
            converged = True
            break
        if prev_step is not None and step > 0.5 * prev_step:
            break  # no more progress: the rounding floor of longdouble residuals is reached
        prev_step = step
    # a floor at a relative step below 1e-12 still leaves the coefficients good to ~12 digits
    settled = converged or (size > 0 and step <= 1e-12 * size)
    return c_ld, max(rss_ld, LD(0)), settled


def _inverse_gram(gram: np.ndarray, factor: np.ndarray, gram_dec):
    """Inverse of the Gram matrix (from moments), refined; plus its decimal refinement when available."""
    ncols = gram.shape[0]
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
    return inv, inv_dec


def _fit_statistics(d: _Design, c_ld, rss_ld, degree: int, notes: list[str]) -> dict[str, Any]:
    """Residual SD, R², adjusted R², RMSE and the unweighted RMSE, in the scaled y units."""
    n, dof = d.n, d.n - d.ncols
    sigma2_ld = rss_ld / LD(dof) if dof > 0 else LD("nan")
    wsum = LD(n) if d.w_ld is None else np.sum(d.w_ld)
    yy = d.y_ld
    dev = yy if d.through_origin else yy - (np.sum(yy if d.w_ld is None else d.w_ld * yy) / wsum)
    tss_ld = dev @ dev if d.w_ld is None else (d.w_ld * dev) @ dev
    r2 = adj = float("nan")
    if tss_ld > 0:
        r2 = float(LD(1) - rss_ld / tss_ld)
        denom_n = n if d.through_origin else n - 1
        adj = float(LD(1) - (LD(1) - LD(r2)) * LD(denom_n) / LD(dof)) if dof > 0 else float("nan")
    else:
        notes.append("y does not vary, so R² is undefined.")
    rmse = float(np.sqrt(rss_ld / wsum))
    if d.w_ld is None:
        plain = rmse
    else:
        res = d.residuals(c_ld)
        plain = float(np.sqrt((res @ res) / LD(n)))
    if dof <= 0:
        notes.append(
            f"Degree {degree} passes through every point ({n} rows, {d.ncols} coefficients): "
            "there is no residual scatter left to estimate uncertainty from."
        )
    return dict(
        dof=dof,
        rss=float(rss_ld),
        sigma2_ld=sigma2_ld,
        residual_sd=float(np.sqrt(sigma2_ld)) if dof > 0 else float("nan"),
        r2=r2,
        adj=adj,
        rmse=rmse,
        plain_rmse=plain,
    )


def _to_power_basis(d: _Design, c_ld, exact, inv, inv_dec, sigma2_ld, degree: int):
    """Exact conversion of the coefficients and their covariance to the power basis (scaled y units)."""
    conv = _basis.power_conversion(d.ncols, d.offset, d.scale, d.through_origin)
    coef_pow = _basis.convert_vector(conv, c_ld if exact is None else exact[0])
    dof = d.n - d.ncols
    if dof <= 0:
        return coef_pow, np.full((degree + 1, degree + 1), np.nan)
    if inv_dec is not None:
        with decimal.localcontext(_POLISH_CTX):
            return coef_pow, _basis.convert_covariance(conv, inv_dec * (exact[1] / dof))
    return coef_pow, _basis.convert_covariance(conv, inv * sigma2_ld)


def _assemble(d: _Design, parts, stats, coef_pow, cov_pow, names) -> PolynomialFit:
    """The PolynomialFit, with every scaled number multiplied back exactly.

    Coefficient j of the power basis scales by 2**(y_exp - j x_exp), covariance entry
    (i, j) by 2**(2 y_exp - (i + j) x_exp), every other y-unit number by 2**y_exp.
    """
    k = d.y_exp
    notes = parts["notes"]
    powers = np.arange(coef_pow.size)
    with np.errstate(over="ignore", under="ignore"):
        coef = np.ldexp(coef_pow, k - d.x_exp * powers)
        cov = np.ldexp(cov_pow, 2 * k - d.x_exp * (powers[:, None] + powers[None, :]))
        se_pow = np.ldexp(np.sqrt(np.maximum(np.diag(cov_pow), 0.0)), k - d.x_exp * powers)
        rss = float(np.ldexp(stats["rss"], 2 * k))
    lost = np.isfinite(cov_pow) & (cov_pow != 0) & ~((np.abs(cov) >= np.finfo(np.float64).tiny) & np.isfinite(cov))
    if lost.any():
        notes.append(
            "Some entries of the coefficients' covariance lie beyond what double precision holds (about 1e±308) "
            "and are given as infinite or zero; the standard errors and the intervals are computed without them."
        )
    if d.through_origin:
        se_pow[0] = 0.0
    return PolynomialFit(
        degree=parts["degree"],
        through_origin=d.through_origin,
        coefficients=coef,
        standard_errors=se_pow,
        covariance=cov,
        residual_sd=float(np.ldexp(stats["residual_sd"], k)),
        r_squared=stats["r2"],
        adjusted_r_squared=stats["adj"],
        rmse=float(np.ldexp(stats["rmse"], k)),
        dof=stats["dof"],
        n=d.n,
        condition_number=parts["cond"],
        domain=(float(np.ldexp(d.x.min(), d.x_exp)), float(np.ldexp(d.x.max(), d.x_exp))),
        rss=rss,
        weighted=d.w is not None,
        offset=float(np.ldexp(d.offset, d.x_exp)),
        scale=float(np.ldexp(d.scale, d.x_exp)),
        basis_coefficients=np.ldexp(parts["c_ld"].astype(np.float64), k),
        basis_inverse_gram=parts["inv"].astype(np.float64),
        warnings=tuple(notes),
        weighting=parts["rule"],
        plain_rmse=float(np.ldexp(stats["plain_rmse"], k)),
        **names,
    )


def domain_for_origin(lo: float, hi: float) -> tuple[float, float]:
    """Domain map for through-origin fits: t spans the data, z = x / scale stays O(1)."""
    offset, scale = _basis.domain_map(lo, hi)
    scale = max(scale, abs(lo), abs(hi)) if scale > 0 else 1.0
    return offset, scale
