"""fit_polynomial against outside references: exact rational least squares
(computed here with fractions.Fraction), statsmodels OLS/WLS, numpy's
Polynomial.fit and scikit-learn's metrics."""

from __future__ import annotations

import json

import numpy as np
import pytest
import statsmodels.api as sm
from nist import exact_least_squares, lre_float
from numpy.polynomial import Polynomial
from sklearn.metrics import mean_squared_error, r2_score

from fitting import PolynomialFit, fit_polynomial

MIN_LRE = 11.0  # project contract
RNG_SEED = 20261201


def _scores(fit: PolynomialFit, ex) -> dict[str, float]:
    coef, se, sd, r2 = ex.as_float()
    k0 = 1 if fit.through_origin else 0
    out = {
        "coef": min(lre_float(a, b) for a, b in zip(fit.coefficients[k0:], ex.coefficients[k0:], strict=False)),
        "r2": lre_float(fit.r_squared, r2),
    }
    if ex.dof > 0:
        out["se"] = min(lre_float(a, b) for a, b in zip(fit.standard_errors[k0:], se[k0:], strict=False))
        out["sd"] = lre_float(fit.residual_sd, sd)
    return out


def _wampler_like(noise_sd: float, seed: int):
    # Invented test case in the style of the NIST Wampler sets: y = 1 + x + ... + x^5 on
    # x = 0..20 plus large integer noise, so the coefficients come out of heavy cancellation.
    rng = np.random.default_rng(seed)
    x = np.arange(21.0)
    y = np.array([sum(v**k for k in range(6)) for v in x]) + np.round(rng.normal(0, noise_sd, 21))
    return x, y


HARD_CASES = {
    # name: (x, y, degree, weights, through_origin); all invented
    "wampler-like noise 1e3": (*_wampler_like(1e3, 1), 5, None, False),
    "wampler-like noise 1e7": (*_wampler_like(1e7, 2), 5, None, False),
    "wampler-like noise 1e9": (*_wampler_like(1e9, 3), 5, None, False),
    "origin degree 1, x 60..70": (
        np.arange(60.0, 71.0),
        np.arange(60.0, 71.0) + np.round(np.random.default_rng(4).normal(130, 5, 11)),
        1,
        None,
        True,
    ),
    "origin degree 3, x 60..70": (
        np.arange(60.0, 71.0),
        np.arange(60.0, 71.0) ** 2 / 7 + np.round(np.random.default_rng(5).normal(0, 9, 11)),
        3,
        None,
        True,
    ),
    "weighted degree 5": (*_wampler_like(1e4, 6), 5, np.random.default_rng(6).uniform(0.2, 5.0, 21), False),
    "weighted origin degree 4": (*_wampler_like(1e4, 7), 4, np.random.default_rng(7).uniform(0.2, 5.0, 21), True),
    "x offset 1e4": (1e4 + np.arange(30.0), np.round(np.random.default_rng(8).normal(0, 1, 30), 3), 3, None, False),
    "x geometric 1..1e4, degree 10": (
        np.geomspace(1, 1e4, 40),
        np.log(np.geomspace(1, 1e4, 40)) + np.random.default_rng(9).normal(0, 0.01, 40),
        10,
        None,
        False,
    ),
    "x clumped, degree 5": (
        np.r_[np.random.default_rng(10).normal(0, 1e-5, 20), 1.0, 2.0, 3.0, 4.0, 5.0],
        np.random.default_rng(11).normal(size=25),
        5,
        None,
        False,
    ),
}


@pytest.mark.parametrize("name", sorted(HARD_CASES))
def test_against_exact_rational_least_squares(name):
    # Reference: exact rational normal equations (fractions.Fraction) on the very doubles the engine sees.
    x, y, degree, w, origin = HARD_CASES[name]
    ex = exact_least_squares(x, y, degree, weights=w, through_origin=origin)
    fit = fit_polynomial(x, y, degree, weights=w, through_origin=origin)
    scores = _scores(fit, ex)
    assert min(scores.values()) >= MIN_LRE, scores


@pytest.mark.parametrize("degree", [3, 6, 9, 12])
def test_exact_fit_recovered(degree):
    # Reference: exact rational least squares; data are an integer polynomial (invented), so RSS = 0.
    rng = np.random.default_rng(degree)
    xi = list(range(-5, degree + 6))
    ci = [int(v) for v in rng.integers(-3, 4, degree + 1)]
    ci[-1] = ci[-1] or 1
    yi = [sum(c * v**k for k, c in enumerate(ci)) for v in xi]
    assert all(abs(v) < 2**53 for v in yi)  # the data are exact doubles
    x, y, coefs = np.array(xi, float), np.array(yi, float), np.array(ci, float)
    ex = exact_least_squares(x, y, degree)
    assert ex.rss == 0
    fit = fit_polynomial(x, y, degree)
    for got, want in zip(fit.coefficients, coefs, strict=False):
        # a zero coefficient is scored by absolute error, as NIST does
        assert lre_float(got, want) >= MIN_LRE, (got, want)
    assert fit.r_squared == pytest.approx(1.0, abs=1e-14)


def test_large_n_path_against_exact():
    # Reference: exact rational least squares. 3000 rows take the fast longdouble path without the
    # small-data decimal step; the contract's 11 digits must still hold on a well-posed problem.
    rng = np.random.default_rng(12)
    x = np.round(rng.uniform(0, 50, 3000), 2)
    y = np.round(2 - 0.3 * x + 0.01 * x**2 + rng.normal(0, 0.5, x.size), 3)
    ex = exact_least_squares(x, y, 4)
    assert min(_scores(fit_polynomial(x, y, 4), ex).values()) >= MIN_LRE


def _clumped(spread):
    # Invented: 30 x values packed into [0, spread] plus one at x = 1, so the mapped design is ill-conditioned.
    x = np.r_[np.linspace(0, spread, 30), 1.0]
    return x, np.sin(50 * x) + np.random.default_rng(13).normal(0, 1e-3, x.size)


@pytest.mark.parametrize("spread", [1e-2, 3e-3])
def test_ill_conditioned_designs_against_exact(spread):
    # Reference: exact rational least squares. Condition numbers ~7e6 and ~3e8 after mapping:
    # the standard error of B0 comes out of heavy cancellation in the covariance; an earlier
    # version of the engine gave it with 2 correct digits here.
    x, y = _clumped(spread)
    fit = fit_polynomial(x, y, 4)
    assert fit.condition_number > 1e6
    scores = _scores(fit, exact_least_squares(x, y, 4))
    assert min(scores.values()) >= MIN_LRE, scores
    assert not fit.warnings


def test_hopeless_conditioning_is_said():
    # Condition number ~7e9 after mapping: digits cannot be promised, and the fit must say so.
    x, y = _clumped(1e-3)
    fit = fit_polynomial(x, y, 4)
    assert fit.condition_number > 1e9
    assert any("did not settle" in m for m in fit.warnings)
    ex = exact_least_squares(x, y, 4)
    assert lre_float(fit.residual_sd, ex.as_float()[2]) >= 9  # the fitted curve itself is still sound


# ----------------------------------------------------------------------------
# statsmodels OLS / WLS: params, bse, and get_prediction().summary_frame(alpha=0.05)


def _design(x, degree, origin):
    return np.vander(x, degree + 1, increasing=True)[:, 1 if origin else 0 :]


STATSMODELS_CASES = [
    ("ols", False, False),
    ("ols through origin", False, True),
    ("wls", True, False),
    ("wls through origin", True, True),
]


@pytest.mark.parametrize("label,weighted,origin", STATSMODELS_CASES)
def test_matches_statsmodels(label, weighted, origin):
    # Reference: statsmodels OLS / WLS (params, bse, mean_ci_*, obs_ci_*; rsquared is uncentered without a constant).
    rng = np.random.default_rng(14)
    x = np.sort(rng.uniform(0.5, 4.0, 60))  # invented data
    y = 1.5 - 0.8 * x + 0.3 * x**2 + rng.normal(0, 0.2, x.size)
    w = rng.uniform(0.5, 3.0, x.size) if weighted else None
    degree = 3
    X = _design(x, degree, origin)
    model = sm.WLS(y, X, weights=w) if weighted else sm.OLS(y, X)
    res = model.fit()
    fit = fit_polynomial(x, y, degree, weights=w, through_origin=origin)
    k0 = 1 if origin else 0
    np.testing.assert_allclose(fit.coefficients[k0:], res.params, rtol=1e-9)
    np.testing.assert_allclose(fit.standard_errors[k0:], res.bse, rtol=1e-9)
    assert fit.residual_sd == pytest.approx(np.sqrt(res.scale), rel=1e-10)
    assert fit.r_squared == pytest.approx(res.rsquared, rel=1e-10)
    assert fit.adjusted_r_squared == pytest.approx(res.rsquared_adj, rel=1e-10)
    assert fit.dof == int(res.df_resid)
    grid = np.linspace(0.0, 5.0, 23)  # inside and outside the data range
    kw = {"weights": np.ones(grid.size)} if weighted else {}
    frame = res.get_prediction(_design(grid, degree, origin), **kw).summary_frame(alpha=0.05)
    lo, hi = fit.band(grid, kind="confidence", level=0.95)
    np.testing.assert_allclose(lo, frame["mean_ci_lower"], rtol=1e-9, atol=1e-10)
    np.testing.assert_allclose(hi, frame["mean_ci_upper"], rtol=1e-9, atol=1e-10)
    lo, hi = fit.band(grid, kind="prediction", level=0.95)
    np.testing.assert_allclose(lo, frame["obs_ci_lower"], rtol=1e-9, atol=1e-10)
    np.testing.assert_allclose(hi, frame["obs_ci_upper"], rtol=1e-9, atol=1e-10)
    np.testing.assert_allclose(fit.predict(grid), frame["mean"], rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(fit.covariance[k0:, k0:], res.cov_params(), rtol=1e-8, atol=1e-14)


def test_band_level_matches_statsmodels_alpha():
    # Reference: statsmodels summary_frame(alpha=0.1) gives the 90 % intervals.
    rng = np.random.default_rng(15)
    x = rng.uniform(-2, 2, 40)
    y = np.exp(x) + rng.normal(0, 0.3, x.size)
    res = sm.OLS(y, _design(x, 2, False)).fit()
    fit = fit_polynomial(x, y, 2)
    grid = np.linspace(-2, 2, 9)
    frame = res.get_prediction(_design(grid, 2, False)).summary_frame(alpha=0.10)
    lo, hi = fit.band(grid, kind="prediction", level=0.90)
    np.testing.assert_allclose(lo, frame["obs_ci_lower"], rtol=1e-9)
    np.testing.assert_allclose(hi, frame["obs_ci_upper"], rtol=1e-9)


# ----------------------------------------------------------------------------
# numpy Polynomial.fit and scikit-learn metrics


@pytest.mark.parametrize("degree", [0, 1, 4, 9, 15])
def test_predictions_match_numpy_polynomial_fit(degree):
    # Reference: numpy.polynomial.Polynomial.fit (least squares on a mapped domain).
    rng = np.random.default_rng(16 + degree)
    x = rng.uniform(-30, 70, 500)  # invented data
    y = np.cos(x / 15) * 10 + rng.normal(0, 1, x.size)
    ref = Polynomial.fit(x, y, degree)
    fit = fit_polynomial(x, y, degree)
    grid = np.linspace(-30, 70, 101)
    np.testing.assert_allclose(fit.predict(grid), ref(grid), rtol=1e-9, atol=1e-9 * np.abs(y).max())


def test_r2_and_rmse_match_sklearn_metrics():
    # Reference: scikit-learn r2_score and mean_squared_error (with sample_weight for the weighted fit).
    rng = np.random.default_rng(17)
    x = rng.uniform(0, 10, 300)
    y = np.sqrt(x) + rng.normal(0, 0.1, x.size)
    w = rng.uniform(0.1, 2.0, x.size)
    for weights in (None, w):
        fit = fit_polynomial(x, y, 3, weights=weights)
        yhat = fit.predict(x)
        assert fit.r_squared == pytest.approx(r2_score(y, yhat, sample_weight=weights), rel=1e-12)
        assert fit.rmse == pytest.approx(np.sqrt(mean_squared_error(y, yhat, sample_weight=weights)), rel=1e-12)


def test_through_origin_r2_is_uncentered():
    # Reference: statsmodels OLS without a constant reports the uncentered R² = 1 - RSS / sum(y²).
    x = np.arange(60.0, 71.0)
    y = np.arange(130.0, 141.0)
    fit = fit_polynomial(x, y, 1, through_origin=True)
    res = sm.OLS(y, x[:, None]).fit()
    assert fit.r_squared == pytest.approx(res.rsquared, rel=1e-13)
    assert fit.r_squared == pytest.approx(1 - fit.rss / np.sum(y**2), rel=1e-13)


# ----------------------------------------------------------------------------
# model file round trip


@pytest.mark.parametrize("weighted,origin", [(False, False), (True, False), (False, True), (True, True)])
def test_model_file_round_trip_through_json(weighted, origin):
    # Round trip through JSON text: identical predictions and bands (common practice, no source).
    rng = np.random.default_rng(18)
    x = rng.uniform(1, 9, 80)
    y = np.log(x) + rng.normal(0, 0.05, x.size)
    w = rng.uniform(0.5, 2, x.size) if weighted else None
    fit = fit_polynomial(x, y, 4, weights=w, through_origin=origin, x_name="dose", y_name="response", x_unit="mg")
    text = json.dumps(fit.to_dict(), allow_nan=False)
    back = PolynomialFit.from_dict(json.loads(text))
    grid = np.linspace(0, 10, 57)
    np.testing.assert_array_equal(back.predict(grid), fit.predict(grid))
    for kind in ("confidence", "prediction"):
        for a, b in zip(back.band(grid, kind=kind, level=0.9), fit.band(grid, kind=kind, level=0.9), strict=False):
            np.testing.assert_array_equal(a, b)
    np.testing.assert_array_equal(back.coefficients, fit.coefficients)
    np.testing.assert_array_equal(back.standard_errors, fit.standard_errors)
    assert (back.degree, back.through_origin, back.dof, back.n, back.x_name, back.x_unit) == (
        4,
        origin,
        fit.dof,
        80,
        "dose",
        "mg",
    )
    assert back.residual_sd == fit.residual_sd and back.r_squared == fit.r_squared


def test_exact_fit_model_file_is_json_safe():
    # An interpolating fit has no residual scatter: NaN statistics must still give valid JSON.
    x = np.array([0.0, 1.0, 2.0])
    fit = fit_polynomial(x, x**2, 2)
    text = json.dumps(fit.to_dict(), allow_nan=False)
    back = PolynomialFit.from_dict(json.loads(text))
    np.testing.assert_array_equal(back.predict(x), fit.predict(x))
