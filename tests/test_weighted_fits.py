"""Weighting by a named rule inside the fit (fitting.fit_polynomial(..., weighting=...)).

References: statsmodels' WLS (coefficients and standard errors, with weights read as inverse
variances as statsmodels reads them) and the WLS prediction variance of a new reading at x0,
s²/w(x0) + g(x0)ᵀ Cov g(x0) (CALIBRATION.md section 4; computed here with numpy and scipy's t
quantile). Data invented: a calibration-like quadratic whose spread grows with x.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from fitting import WEIGHTINGS, FitError, PolynomialFit, fit_polynomial, weights_for


def _data(seed=5):
    rng = np.random.default_rng(seed)
    x = np.repeat(np.array([0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0]), 3)
    y = 0.02 + 0.8 * x + 0.003 * x**2
    return x, y * (1.0 + rng.normal(0.0, 0.03, x.size))


@pytest.mark.parametrize("rule", ["1/x", "1/x2", "1/y", "1/y2"])
def test_named_weighting_matches_statsmodels_wls(rule):
    x, y = _data()
    fit = fit_polynomial(x, y, 2, weighting=rule)
    w = weights_for(rule, x, y)
    res = sm.WLS(y, np.vander(x, 3, increasing=True), weights=w).fit()  # statsmodels, the reference
    np.testing.assert_allclose(fit.coefficients, res.params, rtol=1e-9)
    np.testing.assert_allclose(fit.standard_errors, res.bse, rtol=1e-8)
    assert fit.residual_sd == pytest.approx(np.sqrt(res.scale), rel=1e-9)
    assert fit.weighting == rule and fit.weighted
    # plain RMSE: the unweighted residuals in y's units
    assert fit.plain_rmse == pytest.approx(np.sqrt(np.mean(res.resid**2)), rel=1e-9)
    # the same fit from the weights column, apart from what it records
    col = fit_polynomial(x, y, 2, weights=w)
    np.testing.assert_allclose(col.coefficients, fit.coefficients, rtol=1e-12)
    assert col.weighting == "column"


@pytest.mark.parametrize("rule", ["1/x", "1/x2", "1/y2"])
def test_prediction_interval_at_a_new_x_uses_the_rules_weight_there(rule):
    x, y = _data()
    fit = fit_polynomial(x, y, 2, weighting=rule)
    res = sm.WLS(y, np.vander(x, 3, increasing=True), weights=weights_for(rule, x, y)).fit()
    x0 = np.array([0.7, 3.0, 30.0])
    g = np.vander(x0, 3, increasing=True)
    yhat = g @ res.params
    base = x0 if rule.startswith("1/x") else yhat  # the 1/y rules use the fitted response at x0
    w0 = 1.0 / np.abs(base) ** (2 if rule.endswith("2") else 1)
    var = res.scale / w0 + np.einsum("ij,jk,ik->i", g, res.cov_params(), g)
    q = stats.t.ppf(0.975, res.df_resid)
    lo, hi = fit.band(x0, "prediction", 0.95)
    np.testing.assert_allclose(lo, yhat - q * np.sqrt(var), rtol=1e-8)
    np.testing.assert_allclose(hi, yhat + q * np.sqrt(var), rtol=1e-8)
    # the confidence band has no reading variance in it: statsmodels' mean interval
    frame = res.get_prediction(g).summary_frame(alpha=0.05)
    clo, chi = fit.band(x0, "confidence", 0.95)
    np.testing.assert_allclose(clo, frame["mean_ci_lower"], rtol=1e-8)
    np.testing.assert_allclose(chi, frame["mean_ci_upper"], rtol=1e-8)


def test_a_weights_column_says_its_intervals_assume_weight_one():
    x, y = _data()
    fit = fit_polynomial(x, y, 2, weights=1.0 / x)
    assert any("assume a weight of 1 at a new x" in w for w in fit.warnings)
    se = fit.standard_error_of_fit([3.0])
    lo, hi = fit.band([3.0], "prediction")
    q = stats.t.ppf(0.975, fit.dof)
    assert (hi - lo)[0] / 2 == pytest.approx(q * np.hypot(se[0], fit.residual_sd), rel=1e-12)


def test_unweighted_plain_rmse_equals_rmse_and_rules_are_named():
    x, y = _data()
    fit = fit_polynomial(x, y, 2)
    assert fit.weighting == "none" and fit.plain_rmse == fit.rmse
    assert set(WEIGHTINGS) == {"none", "1/x", "1/x2", "1/y", "1/y2"}
    with pytest.raises(FitError, match="not both"):
        fit_polynomial(x, y, 2, weights=1.0 / x, weighting="1/x")
    with pytest.raises(FitError, match="Unknown weighting"):
        fit_polynomial(x, y, 2, weighting="1/z")
    with pytest.raises(FitError, match="undefined where x = 0"):
        fit_polynomial(np.append(x, 0.0), np.append(y, 0.01), 2, weighting="1/x")


def test_model_file_version_2_round_trips_the_weighting():
    x, y = _data()
    fit = fit_polynomial(x, y, 2, weighting="1/x2")
    data = fit.to_dict()
    assert data["version"] == 2 and data["weighting"] == "1/x2"
    assert data["plain_rmse"] == pytest.approx(fit.plain_rmse)
    back = PolynomialFit.from_dict(data)
    assert back.weighting == "1/x2" and back.plain_rmse == fit.plain_rmse
    x0 = np.array([0.7, 30.0])
    np.testing.assert_allclose(back.band(x0, "prediction"), fit.band(x0, "prediction"), rtol=1e-14)


def test_a_version_1_model_still_loads():
    x, y = _data()
    for weights, expected in ((None, "none"), (1.0 / x, "column")):
        data = fit_polynomial(x, y, 2, weights=weights).to_dict()
        v1 = {k: v for k, v in data.items() if k not in ("weighting", "plain_rmse")}
        v1["version"] = 1
        back = PolynomialFit.from_dict(v1)
        assert back.weighting == expected
        np.testing.assert_allclose(back.predict([3.0]), data["coefficients"][0] + 3 * data["coefficients"][1]
                                   + 9 * data["coefficients"][2], rtol=1e-12)  # fmt: skip
        if weights is None:
            assert back.plain_rmse == back.rmse
        else:
            assert np.isnan(back.plain_rmse)
