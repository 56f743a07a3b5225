"""Extreme magnitudes: data far beyond 1e±150 are fitted and swept, not refused.

The engine divides y by an exact power of two before any sum of squares and multiplies
every reported number back. Reference: the same data in ordinary units, fitted by the
engine itself (x and y here are the ordinary data times exact powers of two, so the
expected numbers follow by exact scaling), and that ordinary-units fit is checked against
numpy.polynomial.Polynomial.fit (an outside reference). Data invented: 40 clean rows of a
quadratic with a small deterministic wobble.
"""

from __future__ import annotations

import numpy as np
import pytest
from numpy.polynomial import Polynomial

from fitting import FitError, fit_polynomial, sweep_degrees

REL = 1e-12


def _ordinary():
    x = np.linspace(1.0, 3.0, 40)
    y = 1.0 + 2.0 * x + 0.5 * x**2 + 0.01 * np.sin(9.0 * x)
    return x, y


# (power of two for x, for y): 2**498 ~ 1.6e150, 2**664 ~ 1.2e200
CASES = [pytest.param(498, 664, id="x~1e150,y~1e200"), pytest.param(-498, -664, id="x~1e-150,y~1e-200")]


def _close(got, want, rel=REL):
    np.testing.assert_allclose(got, want, rtol=rel, atol=0)


def test_the_ordinary_units_reference_agrees_with_numpy():
    x, y = _ordinary()
    fit = fit_polynomial(x, y, 2)
    ref = Polynomial.fit(x, y, 2).convert().coef  # numpy.polynomial, the outside reference
    _close(fit.coefficients, ref, rel=1e-10)


@pytest.mark.parametrize("a, b", CASES)
def test_fit_equals_the_ordinary_fit_after_rescaling(a, b):
    x0, y0 = _ordinary()
    x, y = np.ldexp(x0, a), np.ldexp(y0, b)
    assert 1e140 < abs(x[0]) < 1e160 or 1e-160 < abs(x[0]) < 1e-140
    ref = fit_polynomial(x0, y0, 2)
    fit = fit_polynomial(x, y, 2)
    k = np.arange(3)
    _close(fit.coefficients, np.ldexp(ref.coefficients, b - a * k))
    _close(fit.standard_errors, np.ldexp(ref.standard_errors, b - a * k))
    _close(fit.residual_sd, np.ldexp(ref.residual_sd, b))
    _close(fit.rmse, np.ldexp(ref.rmse, b))
    _close(fit.plain_rmse, np.ldexp(ref.plain_rmse, b))
    assert fit.r_squared == pytest.approx(ref.r_squared, rel=REL)
    # covariance: entry (i, j) scales by 2**(2b - a(i + j)); entries a double cannot hold are flagged
    with np.errstate(over="ignore", under="ignore"):
        want = np.ldexp(ref.covariance, 2 * b - a * (k[:, None] + k[None, :]))
    fits_in_double = np.isfinite(want) & (np.abs(want) >= np.finfo(float).tiny)
    assert fits_in_double.any() and not fits_in_double.all()  # this design has both kinds
    _close(fit.covariance[fits_in_double], want[fits_in_double])
    assert any("beyond what double precision holds" in w for w in fit.warnings)
    xq0 = np.array([1.0, 1.7, 2.9, 3.4])
    for kind in ("confidence", "prediction"):
        lo, hi = fit.band(np.ldexp(xq0, a), kind)
        rlo, rhi = ref.band(xq0, kind)
        _close(lo, np.ldexp(rlo, b))
        _close(hi, np.ldexp(rhi, b))
    _close(fit.predict(np.ldexp(xq0, a)), np.ldexp(ref.predict(xq0), b))


@pytest.mark.parametrize("a, b", CASES)
def test_sweep_equals_the_ordinary_sweep_after_rescaling(a, b):
    x0, y0 = _ordinary()
    x, y = np.ldexp(x0, a), np.ldexp(y0, b)
    ref = sweep_degrees(x0, y0, degrees=range(0, 6), folds=5)
    got = sweep_degrees(x, y, degrees=range(0, 6), folds=5)
    for name in ("train_rmse", "test_rmse", "test_rmse_se"):
        _close(getattr(got, name), np.ldexp(getattr(ref, name), b))
    _close(got.test_r2, ref.test_r2)
    # AIC and BIC shift by n log(2**2b): the RSS is in y's units
    _close(got.aic, ref.aic + x0.size * 2 * b * np.log(2.0), rel=1e-10)
    assert (got.recommended_degree, got.overfitting_from) == (ref.recommended_degree, ref.overfitting_from)
    xq0 = np.array([1.2, 2.5])
    _close(got.curve(2, np.ldexp(xq0, a)), np.ldexp(ref.curve(2, xq0), b))
    lo, hi = got.band(2, np.ldexp(xq0, a), "prediction")
    rlo, rhi = ref.band(2, xq0, "prediction")
    _close(lo, np.ldexp(rlo, b))
    _close(hi, np.ldexp(rhi, b))


def test_y_at_the_edge_of_double_precision_is_fitted():
    x0, y0 = _ordinary()
    y = np.ldexp(y0 / y0.max(), 1023)  # the largest value is 2**1023, half the largest double's binade
    fit = fit_polynomial(x0, y, 2)
    ref = fit_polynomial(x0, y0 / y0.max(), 2)
    _close(fit.coefficients, np.ldexp(ref.coefficients, 1023))


def test_an_x_span_that_overflows_is_refused_with_its_reason():
    with pytest.raises(FitError, match="too wide for double precision"):
        fit_polynomial([-1.5e308, 0.0, 1.5e308], [1.0, 2.0, 3.0], 1)
