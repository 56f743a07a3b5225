"""Properties every least-squares polynomial fit must have (hypothesis-generated data).

These are facts of the method (common practice, no source): nested models never
fit worse, an exact polynomial is recovered, the fit does not depend on the
units of x, and unit weights change nothing.
"""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fitting import FitError, fit_polynomial, sweep_degrees

SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def datasets(draw, min_n=8, max_n=60):
    n = draw(st.integers(min_n, max_n))
    seed = draw(st.integers(0, 2**32 - 1))
    rng = np.random.default_rng(seed)
    lo = draw(st.floats(-1e3, 1e3))
    span = draw(st.floats(1e-2, 1e3))
    x = lo + span * rng.uniform(0, 1, n)
    x[:2] = lo, lo + span  # at least two distinct values
    kind = draw(st.sampled_from(["smooth", "noise", "steps"]))
    t = (x - lo) / span
    if kind == "smooth":
        y = np.sin(6 * t) + rng.normal(0, 0.1, n)
    elif kind == "noise":
        y = rng.normal(0, 1, n) * draw(st.floats(1e-3, 1e6))
    else:
        y = np.floor(4 * t) + rng.normal(0, 0.01, n)
    return x, y


@SETTINGS
@given(datasets())
def test_training_rss_never_rises_with_degree(data):
    x, y = data
    top = min(8, np.unique(x).size - 1)
    rss = [fit_polynomial(x, y, d).rss for d in range(0, top + 1)]
    tss = float(np.sum((y - y.mean()) ** 2)) or 1.0
    for a, b in zip(rss, rss[1:], strict=False):
        assert b <= a + 1e-10 * tss


@SETTINGS
@given(datasets(min_n=30, max_n=80))
def test_sweep_training_error_never_rises_with_degree(data):
    x, y = data
    s = sweep_degrees(x, y, degrees=range(0, 7), folds=3, seed=0)
    tr = s.train_rmse_folds[np.isfinite(s.train_rmse_folds).all(axis=1)]
    assert np.all(np.diff(tr, axis=0) <= 1e-9 * np.abs(y).max() + 1e-300)


@SETTINGS
@given(
    st.integers(0, 7),
    st.lists(st.integers(-9, 9), min_size=8, max_size=8),
    st.integers(-20, 20),
    st.integers(1, 4),
)
def test_noiseless_polynomial_is_recovered(degree, coefs, start, step):
    coefs = [float(c) for c in coefs[: degree + 1]]
    x = start + step * np.arange(degree + 6, dtype=float)
    y = np.polynomial.polynomial.polyval(x, coefs)
    fit = fit_polynomial(x, y, degree)
    scale = np.abs(coefs).max() + 1
    np.testing.assert_allclose(fit.coefficients, coefs, rtol=0, atol=1e-9 * scale)
    assert fit.rss <= 1e-18 * max(1.0, float(np.sum(y**2)))


@SETTINGS
@given(datasets(), st.integers(0, 6), st.integers(-10_000, 10_000), st.integers(-10, 10), st.booleans())
def test_invariant_to_shifting_and_scaling_x(data, degree, shift, exponent, flip):
    # x on a grid of 1/1024, a power-of-two factor and a whole shift keep a * x + shift exact in
    # binary, so both fits see the same mathematical problem and any difference is the engine's.
    x, y = data
    x = np.round(x * 1024) / 1024
    if np.unique(x).size < 2:
        return
    degree = min(degree, np.unique(x).size - 1)
    a = (-1.0 if flip else 1.0) * 2.0**exponent
    shift = float(shift)
    assert np.array_equal((a * x + shift - shift) / a, x)
    fit = fit_polynomial(x, y, degree)
    moved = fit_polynomial(a * x + shift, y, degree)
    yscale = np.abs(y).max() + 1e-300
    np.testing.assert_allclose(moved.predict(a * x + shift), fit.predict(x), rtol=0, atol=1e-8 * yscale)
    assert abs(moved.residual_sd - fit.residual_sd) <= 1e-8 * yscale
    if np.isfinite(fit.r_squared):
        assert abs(moved.r_squared - fit.r_squared) <= 1e-8
    lo1, hi1 = fit.band(x[:5])
    lo2, hi2 = moved.band(a * x[:5] + shift)
    np.testing.assert_allclose(lo2, lo1, rtol=0, atol=1e-7 * yscale)
    np.testing.assert_allclose(hi2, hi1, rtol=0, atol=1e-7 * yscale)


@SETTINGS
@given(datasets(), st.integers(0, 6), st.booleans())
def test_unit_weights_equal_unweighted(data, degree, origin):
    x, y = data
    degree = max(1 if origin else 0, min(degree, np.unique(x).size - 1 - (0 if not origin else 0)))
    try:
        plain = fit_polynomial(x, y, degree, through_origin=origin)
    except FitError:
        return  # e.g. rank deficient: nothing to compare
    ones = fit_polynomial(x, y, degree, through_origin=origin, weights=np.ones_like(x))
    np.testing.assert_allclose(ones.coefficients, plain.coefficients, rtol=1e-12, atol=1e-300)
    np.testing.assert_allclose(ones.standard_errors, plain.standard_errors, rtol=1e-12, atol=1e-300)
    assert ones.r_squared == plain.r_squared or abs(ones.r_squared - plain.r_squared) <= 1e-14


@SETTINGS
@given(datasets(min_n=20, max_n=60), st.floats(0.1, 10.0))
def test_constant_weights_do_not_change_coefficients(data, c):
    # Scaling every weight by the same constant leaves the weighted least-squares solution unchanged.
    x, y = data
    d = min(3, np.unique(x).size - 1)
    a = fit_polynomial(x, y, d, weights=np.full(x.size, c))
    b = fit_polynomial(x, y, d)
    np.testing.assert_allclose(a.predict(x), b.predict(x), rtol=0, atol=1e-10 * (np.abs(y).max() + 1e-300))
