"""Edge cases must give sentences (FitError with advice, or a note), never crashes.

The expected behaviour is the project's contract (common practice, no source);
scikit-learn's own check is the model for the folds message ("Cannot have number
of splits n_splits=... greater than the number of samples").
"""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest

from fitting import DegreescopeError, FitError, PolynomialFit, RankWarning, fit_polynomial, sweep_degrees


def _xy(n=40, seed=0):
    rng = np.random.default_rng(seed)  # invented data
    x = np.linspace(0, 5, n)
    return x, np.cos(x) + rng.normal(0, 0.1, n)


def _is_sentence(msg: str) -> bool:
    return msg[:1].isupper() and msg.rstrip().endswith(".") and len(msg.split()) >= 5


def test_fit_degree_beyond_distinct_x_raises_with_advice():
    x = np.array([1.0, 1.0, 2.0, 2.0, 3.0, 3.0])
    with pytest.raises(FitError) as err:
        fit_polynomial(x, x**2, 3)
    msg = str(err.value)
    assert (
        "at least 4 distinct x values" in msg and "have 3" in msg and "degree 2 or lower" in msg and _is_sentence(msg)
    )


def test_through_origin_degree_limit():
    x = np.array([1.0, 2.0, 3.0])
    assert fit_polynomial(x, x**3, 3, through_origin=True).dof == 0  # 3 coefficients, 3 points
    with pytest.raises(FitError, match="at least 1 for a fit through the origin"):
        fit_polynomial(x, x, 0, through_origin=True)
    with pytest.raises(FitError, match="distinct x values"):
        fit_polynomial(x, x, 4, through_origin=True)


def test_sweep_caps_degrees_and_says_so():
    x = np.repeat(np.arange(8.0), 3)  # 8 distinct x values
    y = np.sin(x) + np.random.default_rng(1).normal(0, 0.05, x.size)
    s = sweep_degrees(x, y, degrees=range(0, 13), folds=4, seed=0)
    assert s.degrees.max() < 8
    assert any("were left out" in m and "distinct x" in m for m in s.warnings)
    assert all(_is_sentence(m) for m in s.warnings)


def test_sweep_degrees_above_max_are_left_out():
    x, y = _xy(200)
    s = sweep_degrees(x, y, degrees=[2, 25], folds=5)
    assert list(s.degrees) == [2]
    assert any("Degrees above 20" in m for m in s.warnings)


@pytest.mark.parametrize("folds", [41, 1000])
def test_more_folds_than_rows(folds):
    x, y = _xy(40)
    with pytest.raises(FitError) as err:
        sweep_degrees(x, y, folds=folds)
    msg = str(err.value)
    assert f"Cannot make {folds} folds from 40 rows" in msg and "at most 40" in msg and _is_sentence(msg)


@pytest.mark.parametrize("folds", [1, 0, -3])
def test_too_few_folds(folds):
    x, y = _xy()
    with pytest.raises(FitError, match="at least 2 folds"):
        sweep_degrees(x, y, folds=folds)


@pytest.mark.parametrize("bad", [0.0, -1.0, np.nan, np.inf])
def test_weights_must_be_positive_and_finite(bad):
    x, y = _xy()
    w = np.ones_like(x)
    w[7] = bad
    for call in (lambda: fit_polynomial(x, y, 2, weights=w), lambda: sweep_degrees(x, y, weights=w, folds=5)):
        with pytest.raises(FitError) as err:
            call()
        assert "positive and finite" in str(err.value) and "row 8" in str(err.value)


def test_weights_wrong_length():
    x, y = _xy()
    with pytest.raises(FitError, match="one weight per row"):
        fit_polynomial(x, y, 1, weights=np.ones(3))


@pytest.mark.parametrize("x", [np.full(10, 3.0), np.array([2.5])])
def test_fewer_than_two_distinct_x(x):
    for call in (
        lambda: fit_polynomial(x, np.arange(x.size, dtype=float), 0),
        lambda: sweep_degrees(x, np.arange(x.size, dtype=float)),
    ):
        with pytest.raises(FitError, match="fewer than two distinct values"):
            call()


@pytest.mark.parametrize(
    "x,y,match",
    [
        (np.array([1.0, 2.0, np.nan]), np.array([1.0, 2.0, 3.0]), "finite"),
        (np.array([1.0, 2.0, 3.0]), np.array([1.0, np.inf, 3.0]), "finite"),
        (np.array([1.0, 2.0]), np.array([1.0, 2.0, 3.0]), "same length"),
        (np.array([]), np.array([]), "no data rows"),
        (np.array(["a", "b"]), np.array([1.0, 2.0]), "must be numbers"),
    ],
)
def test_bad_xy(x, y, match):
    with pytest.raises(FitError, match=match):
        fit_polynomial(x, y, 1)


def test_bad_degree_values():
    x, y = _xy()
    with pytest.raises(FitError, match="0 or more"):
        fit_polynomial(x, y, -1)
    with pytest.raises(FitError, match="whole number"):
        fit_polynomial(x, y, "two")
    with pytest.raises(FitError, match="at least one degree"):
        sweep_degrees(x, y, degrees=[])


@pytest.mark.parametrize("holdout", [0.0, 1.0, 1.5, "half", 0.999])
def test_bad_holdout(holdout):
    x, y = _xy(20)
    with pytest.raises(FitError, match="holdout|fraction"):
        sweep_degrees(x, y, holdout=holdout)


def test_ordered_needs_holdout_and_labels_need_two_groups():
    x, y = _xy()
    with pytest.raises(FitError, match="ordered split needs a holdout"):
        sweep_degrees(x, y, ordered=True)
    with pytest.raises(FitError, match="at least 2 distinct labels"):
        sweep_degrees(x, y, folds=np.zeros(x.size, dtype=int))
    with pytest.raises(FitError, match="one fold label per row"):
        sweep_degrees(x, y, folds=np.zeros(3, dtype=int))


def test_interpolating_fit_is_explained_not_broken():
    x = np.array([0.0, 1.0, 2.0, 4.0])
    fit = fit_polynomial(x, x**3 - x, 3)
    assert fit.dof == 0 and np.isnan(fit.residual_sd)
    assert any("passes through every point" in m for m in fit.warnings)
    lo, hi = fit.band(np.array([0.5, 3.0]))
    assert np.isnan(lo).all() and np.isnan(hi).all()
    np.testing.assert_allclose(fit.predict(x), x**3 - x, atol=1e-12)


def test_constant_y_has_undefined_r2_said_in_words():
    x = np.arange(10.0)
    fit = fit_polynomial(x, np.full(10, 4.0), 2)
    assert np.isnan(fit.r_squared)
    assert any("does not vary" in m for m in fit.warnings)
    json.dumps(fit.to_dict(), allow_nan=False)


def test_band_arguments_are_checked():
    x, y = _xy()
    fit = fit_polynomial(x, y, 2)
    with pytest.raises(FitError, match="confidence"):
        fit.band(x, kind="tolerance")
    with pytest.raises(FitError, match="between 0 and 1"):
        fit.band(x, level=95)


def test_rank_deficient_design_raises_without_a_warning():
    # Distinct but numerically coincident x values (spread 1e-13 on a range of 1): degree 6 cannot be determined.
    # An error only: a caller that catches the FitError should not also find a RankWarning on stderr.
    x = np.r_[1.0 + np.arange(10) * 1e-14, 2.0]
    y = np.arange(x.size, dtype=float)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        with pytest.raises(FitError, match="rank deficient") as err:
            fit_polynomial(x, y, 6)
    assert "numerically rank deficient" in str(err.value) and str(err.value).endswith("Use a lower degree.")
    assert "at degree 6" in str(err.value)
    assert not any(issubclass(c.category, RankWarning) for c in caught)


def test_model_file_errors_are_sentences():
    x, y = _xy()
    data = fit_polynomial(x, y, 2).to_dict()
    with pytest.raises(FitError, match="not a degreescope model file"):
        PolynomialFit.from_dict({**data, "format": "something-else"})
    with pytest.raises(FitError, match="newer than this degreescope reads"):
        PolynomialFit.from_dict({**data, "version": 99})
    broken = {**data, "stable_form": {**data["stable_form"], "coefficients": [1.0]}}
    with pytest.raises(FitError, match="inconsistent"):
        PolynomialFit.from_dict(broken)
    with pytest.raises(FitError, match="incomplete or malformed"):
        PolynomialFit.from_dict({k: v for k, v in data.items() if k != "residual_sd"})


def _subclasses(cls):
    for sub in cls.__subclasses__():
        yield sub
        yield from _subclasses(sub)


def test_every_engine_error_is_a_degreescope_error():
    import fitting

    public_errors = [
        v
        for v in vars(fitting).values()
        if isinstance(v, type) and issubclass(v, Exception) and not issubclass(v, Warning)
    ]
    assert {FitError, fitting.IntakeError, fitting.ColumnError, fitting.FileTooLargeError} <= set(public_errors)
    for err in public_errors:
        assert issubclass(err, DegreescopeError), err
        for sub in _subclasses(err):
            assert issubclass(sub, DegreescopeError), sub
    assert set(_subclasses(DegreescopeError)) >= set(public_errors) - {DegreescopeError}


def test_file_too_large_error_carries_its_size_and_limit():
    import fitting

    err = fitting.FileTooLargeError("too big", size=300, limit=200)
    assert (err.size, err.limit, err.size_bytes, err.limit_bytes, str(err)) == (300, 200, 300, 200, "too big")
    old_style = fitting.FileTooLargeError("too big")  # the one-argument form callers use today
    assert old_style.size is None and old_style.limit is None


def test_sweep_on_tiny_data_leave_one_out():
    # Leave-one-out on 6 rows: degrees capped by the 5 distinct x of each training set.
    x = np.array([0.0, 1.0, 2.0, 3.0, 4.0, 5.0])
    y = np.array([0.1, 0.9, 4.2, 8.8, 16.1, 25.3])
    s = sweep_degrees(x, y, degrees=range(0, 8), folds=6)
    assert s.degrees.max() == 4
    assert np.isfinite(s.test_rmse).all()
    assert any("interpolates the points" in m for m in s.warnings_for(4))


@pytest.mark.parametrize("seed", [-1, 2**32, 10**30])
def test_seed_outside_the_generator_range_is_a_sentence(seed):
    x, y = _xy()
    with pytest.raises(FitError) as err:
        sweep_degrees(x, y, degrees=range(3), seed=seed)
    assert "from 0 to 4294967295" in str(err.value) and _is_sentence(str(err.value))
    sweep_degrees(x, y, degrees=range(3), seed=2**32 - 1)  # the largest accepted seed works


@pytest.mark.parametrize(
    "x, y, match",
    [
        (np.array([-1e308, 0.0, 5e307, 1e308]), np.arange(4.0), "range too wide"),  # max - min overflows
    ],
)
def test_what_doubles_cannot_hold_is_refused(x, y, match):
    # before: an overflowing x range crashed in the SVD
    for call in (lambda: fit_polynomial(x, y, 1), lambda: sweep_degrees(x, y, degrees=range(2), folds=2)):
        with pytest.raises(FitError, match=match) as err:
            call()
        assert _is_sentence(str(err.value))


@pytest.mark.parametrize("factor", [1e300, 1e-300])
def test_y_magnitudes_whose_squares_leave_double_precision_are_fitted(factor):
    # Until y was scaled by a power of two these were refused ("express y in larger units"); before that
    # the sweep reported RMSE 0 (1e-300) or "check for duplicated x" (1e300). Same data in ordinary units
    # is the reference (scaling by a power of two is exact; the decimal factor here is not, hence rel=1e-12).
    x = np.arange(1.0, 12.0)
    y_plain = x**2 + 0.1 * np.sin(7 * x)
    fit = fit_polynomial(x, y_plain * factor, 1)
    ref = fit_polynomial(x, y_plain, 1)
    np.testing.assert_allclose(fit.coefficients, ref.coefficients * factor, rtol=1e-12)
    assert fit.rmse == pytest.approx(ref.rmse * factor, rel=1e-12)
    s = sweep_degrees(x, y_plain * factor, degrees=range(3), folds=2)
    s_ref = sweep_degrees(x, y_plain, degrees=range(3), folds=2)
    np.testing.assert_allclose(s.test_rmse, s_ref.test_rmse * factor, rtol=1e-12)
    assert s.recommended_degree == s_ref.recommended_degree


def test_x_far_from_zero_is_still_fitted():
    x = np.arange(1.0, 12.0) * 1e300  # only y magnitudes are limited; x is mapped to [-1, 1]
    fit = fit_polynomial(x, np.arange(1.0, 12.0), 1)
    assert fit.predict(np.array([5e300]))[0] == pytest.approx(5.0, rel=1e-9)
