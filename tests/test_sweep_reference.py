"""sweep_degrees against scikit-learn's splitters and metrics and per-fold refits with numpy."""

from __future__ import annotations

import math

import numpy as np
import pytest
import statsmodels.api as sm
from numpy.polynomial import Polynomial
from sklearn.linear_model import LinearRegression
from sklearn.metrics import mean_squared_error, r2_score
from sklearn.model_selection import (
    KFold,
    LeaveOneGroupOut,
    PredefinedSplit,
    RepeatedKFold,
    ShuffleSplit,
    validation_curve,
)
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import PolynomialFeatures, StandardScaler

from fitting import sweep_degrees

REL = 1e-6  # project contract: fold test MSE equals a plain per-fold refit to relative 1e-6


def _data(n=600, seed=0):
    # invented data: a smooth curve plus noise
    rng = np.random.default_rng(seed)
    x = rng.uniform(-2.0, 3.0, n)
    y = np.sin(1.3 * x) + 0.2 * x**2 + rng.normal(0, 0.25, n)
    return x, y


def _refit_errors(x, y, degrees, splits, w=None):
    """Per (degree, split): train RMSE, test RMSE, test R², from numpy Polynomial.fit refits."""
    splits = list(splits)
    tr = np.empty((len(degrees), len(splits)))
    te = np.empty_like(tr)
    r2 = np.empty_like(tr)
    for j, (a, b) in enumerate(splits):
        for i, d in enumerate(degrees):
            # numpy's w multiplies the unsquared residual, so pass sqrt(weights)
            p = Polynomial.fit(x[a], y[a], d, w=None if w is None else np.sqrt(w[a]))
            tr[i, j] = math.sqrt(mean_squared_error(y[a], p(x[a]), sample_weight=None if w is None else w[a]))
            te[i, j] = math.sqrt(mean_squared_error(y[b], p(x[b]), sample_weight=None if w is None else w[b]))
            r2[i, j] = r2_score(y[b], p(x[b]), sample_weight=None if w is None else w[b])
    return tr, te, r2


def _assert_fold_mse(sweep, te):
    # compare mean squared errors, as the contract states
    np.testing.assert_allclose(sweep.test_rmse_folds**2, te**2, rtol=REL)


@pytest.mark.parametrize("seed", [0, 7])
def test_kfold_matches_refits(seed):
    # Reference: scikit-learn KFold(10, shuffle=True, random_state=seed) splits, numpy Polynomial.fit refits,
    # scikit-learn mean_squared_error and r2_score.
    x, y = _data()
    degrees = list(range(0, 11))
    s = sweep_degrees(x, y, degrees=degrees, folds=10, seed=seed)
    tr, te, r2 = _refit_errors(x, y, degrees, KFold(10, shuffle=True, random_state=seed).split(x))
    assert s.test_rmse_folds.shape == (len(degrees), 10)
    _assert_fold_mse(s, te)
    np.testing.assert_allclose(s.train_rmse_folds, tr, rtol=1e-9)
    np.testing.assert_allclose(s.test_rmse, te.mean(axis=1), rtol=1e-9)
    np.testing.assert_allclose(s.test_rmse_se, te.std(axis=1, ddof=1) / math.sqrt(10), rtol=1e-6)
    np.testing.assert_allclose(s.train_rmse, tr.mean(axis=1), rtol=1e-9)
    np.testing.assert_allclose(s.test_r2, r2.mean(axis=1), rtol=1e-9, atol=1e-12)
    assert list(s.degrees) == degrees and s.n_splits == 10


def test_matches_sklearn_validation_curve():
    # Reference: scikit-learn validation_curve over PolynomialFeatures -> StandardScaler -> LinearRegression
    # with the same KFold; degrees kept low so the raw-power pipeline is itself accurate.
    x, y = _data(400, seed=3)
    degrees = [1, 2, 3, 4, 5, 6]
    cv = KFold(10, shuffle=True, random_state=0)
    pipe = make_pipeline(PolynomialFeatures(include_bias=False), StandardScaler(), LinearRegression())
    train, test = validation_curve(
        pipe,
        x[:, None],
        y,
        param_name="polynomialfeatures__degree",
        param_range=degrees,
        cv=cv,
        scoring="neg_mean_squared_error",
    )
    s = sweep_degrees(x, y, degrees=degrees, folds=10, seed=0)
    np.testing.assert_allclose(s.test_rmse_folds**2, -test, rtol=REL)
    np.testing.assert_allclose(s.train_rmse_folds**2, -train, rtol=REL)


def test_predefined_split_with_minus_one():
    # Reference: scikit-learn PredefinedSplit (label -1: the row is always in training).
    x, y = _data(300, seed=4)
    labels = np.random.default_rng(5).integers(-1, 4, x.size)
    degrees = list(range(0, 8))
    s = sweep_degrees(x, y, degrees=degrees, folds=labels)
    _, te, _ = _refit_errors(x, y, degrees, PredefinedSplit(labels).split())
    assert s.n_splits == 4
    _assert_fold_mse(s, te)


def test_group_labels_are_leave_one_group_out():
    # Reference: scikit-learn LeaveOneGroupOut: with one label per row naming its group, each group is a fold
    # (folds in sorted label order).
    x, y = _data(240, seed=6)
    groups = np.array(["site-" + "ABCDEF"[i % 6] for i in np.random.default_rng(8).permutation(x.size)])
    degrees = list(range(0, 7))
    s = sweep_degrees(x, y, degrees=degrees, folds=groups)
    _, te, r2 = _refit_errors(x, y, degrees, LeaveOneGroupOut().split(x, y, groups))
    _assert_fold_mse(s, te)
    np.testing.assert_allclose(s.test_r2, r2.mean(axis=1), rtol=1e-9)


def test_weighted_folds_match_weighted_refits():
    # Reference: KFold splits; numpy weighted refits; scikit-learn mean_squared_error with sample_weight.
    x, y = _data(500, seed=9)
    w = np.random.default_rng(10).uniform(0.2, 4.0, x.size)
    degrees = list(range(0, 9))
    s = sweep_degrees(x, y, degrees=degrees, folds=5, seed=2, weights=w)
    tr, te, _ = _refit_errors(x, y, degrees, KFold(5, shuffle=True, random_state=2).split(x), w=w)
    _assert_fold_mse(s, te)
    np.testing.assert_allclose(s.train_rmse_folds, tr, rtol=1e-9)


def test_repeated_kfold():
    # Reference: scikit-learn RepeatedKFold(n_splits=5, n_repeats=3, random_state=seed).
    x, y = _data(300, seed=11)
    degrees = list(range(0, 6))
    s = sweep_degrees(x, y, degrees=degrees, folds=5, repeats=3, seed=4)
    _, te, _ = _refit_errors(x, y, degrees, RepeatedKFold(n_splits=5, n_repeats=3, random_state=4).split(x))
    assert s.n_splits == 15
    _assert_fold_mse(s, te)


def test_random_holdout_is_shufflesplit():
    # Reference: scikit-learn ShuffleSplit(test_size=ceil(fraction * n), random_state=seed).
    x, y = _data(401, seed=12)
    degrees = list(range(0, 9))
    s = sweep_degrees(x, y, degrees=degrees, holdout=0.25, seed=5)
    train_idx, test_idx = next(ShuffleSplit(n_splits=1, test_size=math.ceil(0.25 * x.size), random_state=5).split(x))
    mask = np.zeros(x.size, bool)
    mask[test_idx] = True
    np.testing.assert_array_equal(s.test_mask, mask)
    _, te, _ = _refit_errors(x, y, degrees, [(train_idx, test_idx)])
    _assert_fold_mse(s, te)
    assert s.recommendation_rule == "minimum-test-error"
    assert s.recommended_degree == degrees[int(np.argmin(te[:, 0]))]
    # the display fit of a holdout is the fit on its training rows
    p = Polynomial.fit(x[train_idx], y[train_idx], 3)
    np.testing.assert_allclose(s.curve(3, np.linspace(-2, 3, 11)), p(np.linspace(-2, 3, 11)), rtol=1e-9, atol=1e-12)


def test_ordered_holdout_holds_out_highest_x():
    # Common practice, no source: an extrapolation check holds out the largest x values.
    x, y = _data(200, seed=13)
    s = sweep_degrees(x, y, degrees=range(0, 6), holdout=0.2, ordered=True)
    assert s.test_mask.sum() == 40
    assert x[s.test_mask].min() >= x[~s.test_mask].max()
    idx = np.arange(x.size)
    _, te, _ = _refit_errors(x, y, list(range(6)), [(idx[~s.test_mask], idx[s.test_mask])])
    _assert_fold_mse(s, te)


def test_same_seed_same_split_and_different_seed_differs():
    # Contract: the same seed gives the same split (and so identical numbers), every time.
    x, y = _data(300, seed=14)
    a = sweep_degrees(x, y, degrees=range(0, 8), folds=5, seed=21)
    b = sweep_degrees(x, y, degrees=range(0, 8), folds=5, seed=21)
    c = sweep_degrees(x, y, degrees=range(0, 8), folds=5, seed=22)
    np.testing.assert_array_equal(a.test_rmse_folds, b.test_rmse_folds)
    assert a.recommendation == b.recommendation
    assert not np.array_equal(a.test_rmse_folds, c.test_rmse_folds)
    h1 = sweep_degrees(x, y, holdout=0.3, seed=3)
    h2 = sweep_degrees(x, y, holdout=0.3, seed=3)
    np.testing.assert_array_equal(h1.test_mask, h2.test_mask)


def test_aic_bic_differences_match_statsmodels():
    # Reference: statsmodels OLS aic/bic; they differ from ours by a constant n (log 2π + 1), so compare differences.
    x, y = _data(150, seed=15)
    degrees = list(range(0, 7))
    s = sweep_degrees(x, y, degrees=degrees, folds=5)
    ref_aic = np.array([sm.OLS(y, np.vander(x, d + 1, increasing=True)).fit().aic for d in degrees])
    ref_bic = np.array([sm.OLS(y, np.vander(x, d + 1, increasing=True)).fit().bic for d in degrees])
    np.testing.assert_allclose(np.diff(s.aic), np.diff(ref_aic), rtol=1e-7, atol=1e-8)
    np.testing.assert_allclose(np.diff(s.bic), np.diff(ref_bic), rtol=1e-7, atol=1e-8)
    assert s.aic_degree == degrees[int(np.argmin(ref_aic))]
    assert s.bic_degree == degrees[int(np.argmin(ref_bic))]


# ----------------------------------------------------------------------------
# the recommendation rules, on constructed cases


def _rule_from_refits(te):
    """One-standard-error rule from independent refits (Hastie, Tibshirani & Friedman, The Elements of
    Statistical Learning, sec. 7.10, cited from memory): the smallest degree whose mean CV error is within
    one standard error of the minimum; the SE is the spread of fold errors / sqrt(folds)."""
    mean = te.mean(axis=1)
    se = te.std(axis=1, ddof=1) / math.sqrt(te.shape[1])
    imin = int(np.argmin(mean))
    return int(np.nonzero(mean <= mean[imin] + se[imin])[0][0]), imin, mean, se


def test_one_standard_error_rule_on_a_quadratic():
    # Invented case: a true quadratic with noise. The minimum of the mean test RMSE may land above 2 by
    # chance; the one-SE rule must pick the smallest degree within one SE of it, i.e. 2 here.
    rng = np.random.default_rng(16)
    x = rng.uniform(-1, 1, 120)
    y = 1 - 2 * x + 3 * x**2 + rng.normal(0, 0.5, x.size)
    degrees = list(range(0, 9))
    s = sweep_degrees(x, y, degrees=degrees, folds=10, seed=1)
    _, te, _ = _refit_errors(x, y, degrees, KFold(10, shuffle=True, random_state=1).split(x))
    irec, imin, mean, se = _rule_from_refits(te)
    assert s.recommendation_rule == "one-standard-error"
    assert s.recommended_degree == degrees[irec] == 2
    assert s.min_test_degree == degrees[imin]
    assert "one standard error" in s.recommendation or "lowest mean test RMSE" in s.recommendation


def test_overfitting_from_on_few_points():
    # Invented case: 24 noisy points of a cubic; high degrees chase the noise. overfitting_from is the first
    # degree above the best whose mean test RMSE exceeds the minimum by more than its SE while the training
    # error is below the training error at the best degree; every degree from there on is judged
    # overfit (semantics stated in fitting/_sweep.py).
    rng = np.random.default_rng(17)
    x = np.sort(rng.uniform(0, 4, 24))
    y = x**3 - 4 * x**2 + 3 * x + rng.normal(0, 0.6, x.size)
    degrees = list(range(0, 13))
    s = sweep_degrees(x, y, degrees=degrees, folds=6, seed=0)
    kept = list(s.degrees)
    tr, te, _ = _refit_errors(x, y, kept, KFold(6, shuffle=True, random_state=0).split(x))
    irec, imin, mean, se = _rule_from_refits(te)
    train = tr.mean(axis=1)
    expected = [
        kept[i] for i in range(imin + 1, len(kept)) if mean[i] > mean[imin] + se[imin] and train[i] < train[imin]
    ]
    assert expected, "the constructed case must overfit"
    assert s.overfitting_from == expected[0]
    assert [int(d) for d in s.degrees[s.overfit]] == [d for d in kept if d >= expected[0]]
    assert s.recommended_degree == kept[irec]
    assert any("chasing noise" in m for m in s.warnings_for(expected[0]))


def test_degrees_past_the_onset_are_overfit_even_where_test_error_dips():
    # A degree above overfitting_from whose test error dips back within one SE is still past the onset:
    # it is no better than the minimum and carries more terms (semantics stated in fitting/_sweep.py).
    rng = np.random.default_rng(20261204)
    x = np.sort(rng.uniform(-2.5, 2.5, 30))
    y = 0.6 * x**3 - 0.5 * x**2 - 2.5 * x + 1 + rng.normal(0, 1.5, x.size)
    s = sweep_degrees(x, y, degrees=range(0, 13), folds=10, seed=0)
    onset = s.overfitting_from
    assert onset is not None
    imin = int(np.nanargmin(s.test_rmse))
    dips = 0
    for i, d in enumerate(s.degrees):
        assert bool(s.overfit[i]) == (int(d) >= onset)
        rises = s.test_rmse[i] > s.test_rmse[imin] + s.test_rmse_se[imin] and s.train_rmse[i] < s.train_rmse[imin]
        if int(d) > onset and not rises:
            dips += 1
            assert any(f"past degree {onset}" in m for m in s.warnings_for(int(d)))
    assert dips >= 1, "the constructed case must have a degree past the onset whose test error dips back"


def test_holdout_overfitting_uses_ten_percent_rise():
    # Without a standard error (single holdout) a rise of more than 10 % over the minimum counts
    # (threshold stated in fitting/_sweep.py; common practice, no source).
    rng = np.random.default_rng(18)
    x = np.sort(rng.uniform(0, 4, 30))
    y = np.exp(x / 2) + rng.normal(0, 0.4, x.size)
    s = sweep_degrees(x, y, degrees=range(0, 12), holdout=0.3, seed=2)
    t = s.test_rmse
    imin = int(np.nanargmin(t))
    expected = [
        int(s.degrees[i])
        for i in range(imin + 1, len(t))
        if t[i] > 1.1 * t[imin] and s.train_rmse[i] < s.train_rmse[imin]
    ]
    assert s.overfitting_from == (expected[0] if expected else None)


@pytest.mark.parametrize(
    "n, k, repeats, seed", [(10, 10, 1, 0), (23, 5, 1, 7), (97, 10, 3, 12345), (7, 2, 4, 2**32 - 1)]
)
def test_fold_labels_are_scikit_learns_without_importing_it(n, k, repeats, seed):
    # Reference: scikit-learn KFold(shuffle=True, random_state=seed) and RepeatedKFold; the engine's own
    # labels come from numpy's RandomState (no public name: the engine does not import scikit-learn for them).
    from fitting._sweep import kfold_labels

    got = kfold_labels(n, k, repeats=repeats, seed=seed)
    splitter = (
        KFold(k, shuffle=True, random_state=seed)
        if repeats == 1
        else RepeatedKFold(n_splits=k, n_repeats=repeats, random_state=seed)
    )
    want = [np.empty(n, dtype=np.int64) for _ in range(repeats)]
    for i, (_, test) in enumerate(splitter.split(np.empty((n, 1)))):
        want[i // k][test] = i % k
    assert len(got) == repeats
    for g, w in zip(got, want, strict=True):
        np.testing.assert_array_equal(g, w)


@pytest.mark.parametrize("n, n_test, repeats, seed", [(20, 5, 1, 0), (101, 26, 3, 9)])
def test_holdout_rows_are_scikit_learns_shuffle_split(n, n_test, repeats, seed):
    # Reference: scikit-learn ShuffleSplit(n_splits=repeats, test_size=n_test, random_state=seed).
    from fitting._sweep import shuffle_holdout_labels

    got = shuffle_holdout_labels(n, n_test, repeats=repeats, seed=seed)
    splits = ShuffleSplit(n_splits=repeats, test_size=n_test, random_state=seed).split(np.empty((n, 1)))
    for g, (_, test) in zip(got, splits, strict=True):
        np.testing.assert_array_equal(np.flatnonzero(g), np.sort(test))


def test_the_in_memory_sweep_does_not_import_scikit_learn():
    import subprocess
    import sys

    code = (
        "import sys, numpy as np, fitting\n"
        "x = np.linspace(0, 1, 40); fitting.sweep_degrees(x, x**2, degrees=range(4), folds=5, repeats=2)\n"
        "fitting.sweep_degrees(x, x**2, degrees=range(3), holdout=0.25, repeats=2)\n"
        "fitting.verdict_sweep(np.repeat(x[:10], 2), np.repeat(x[:10], 2) ** 2, degrees=range(3))\n"
        "print('sklearn' in sys.modules)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_without_diagnostics_the_errors_and_the_verdict_are_unchanged():
    # Reference: sweep_degrees itself (checked above against KFold refits); the same blocks with
    # diagnostics=False must give identical errors and recommendation, and skip only the diagnostics.
    from fitting import FitError
    from fitting._basis import domain_map, to_window
    from fitting._sweep import Split, block_factor, kfold_labels, sweep_from_blocks

    x, y = _data(n=400, seed=3)
    degs, k = list(range(0, 13)), 10
    ref = sweep_degrees(x, y, degrees=degs, folds=k, repeats=2, seed=5)
    offset, scale = domain_map(float(x.min()), float(x.max()))
    t = to_window(x, offset, scale)
    splits = [Split(test=(j,), train=tuple(o for o in range(k) if o != j)) for j in range(k)]
    parts = [
        ({j: block_factor(t[lab == j], y[lab == j], len(degs)) for j in range(k)}, splits)
        for lab in kfold_labels(x.size, k, repeats=2, seed=5)
    ]
    common = dict(ncols=len(degs), offset=offset, scale=scale, domain=ref.domain, y_range=(y.min(), y.max()))
    full = sweep_from_blocks(parts, degs, scheme=ref.scheme, **common)
    lean = sweep_from_blocks(parts, degs, scheme=ref.scheme, diagnostics=False, **common)
    for s in (full, lean):
        np.testing.assert_array_equal(s.test_rmse_folds, ref.test_rmse_folds)
        np.testing.assert_array_equal(s.train_rmse_folds, ref.train_rmse_folds)
        assert (s.recommended_degree, s.overfitting_from, s.rows_used) == (
            ref.recommended_degree,
            ref.overfitting_from,
            ref.rows_used,
        )
    np.testing.assert_array_equal(full.condition_numbers, ref.condition_numbers)
    assert np.isnan(lean.condition_numbers).all() and np.isnan(lean.aic).all() and np.isnan(lean.bic).all()
    assert lean.aic_degree == lean.bic_degree == lean.recommended_degree and lean.display_coefficients == {}
    with pytest.raises(FitError, match="has no fit in this sweep"):
        lean.curve(2, [0.0])
