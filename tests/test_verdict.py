"""The one verdict rule (fitting.verdict_sweep): the dashboard's old policy, and whole x levels held out.

References: scikit-learn's GroupKFold (the fold assignment of x levels); the dashboard's policy
before it moved into the engine (app/service.py: 10-fold CV repeated 5 times at most 5,000 rows,
degrees 0..MAX_DEGREE, seed 0, each group its own fold), rebuilt here with fitting.sweep_degrees.
All data are the invented sample files or invented in the test.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from sklearn.model_selection import GroupKFold

import fitting
from fitting import (
    MAX_DEGREE,
    VERDICT_FOLDS,
    VERDICT_REPEAT_LIMIT,
    VERDICT_REPEATS,
    sweep_degrees,
    verdict_rule_text,
    verdict_sweep,
)

SAMPLES = sorted((Path(__file__).resolve().parents[1] / "sample_data").glob("*.csv"))
ALL_DEGREES = range(0, MAX_DEGREE + 1)


def _old_dashboard_policy(x, y, weights=None, group=None):
    """app/service.py's steady sweep as it stood before verdict_sweep."""
    if group is not None:
        return sweep_degrees(x, y, degrees=ALL_DEGREES, folds=np.asarray(group), weights=weights)
    n = x.size
    repeats = 5 if n <= 5_000 else 1
    return sweep_degrees(x, y, degrees=ALL_DEGREES, folds=min(10, n), repeats=repeats, seed=0, weights=weights)


def _assert_same_sweep(a, b):
    np.testing.assert_array_equal(a.degrees, b.degrees)
    np.testing.assert_array_equal(a.test_rmse_folds, b.test_rmse_folds)
    np.testing.assert_array_equal(a.train_rmse_folds, b.train_rmse_folds)
    assert a.recommended_degree == b.recommended_degree
    assert a.overfitting_from == b.overfitting_from
    assert a.scheme == b.scheme


def test_the_policy_constants_are_the_dashboards():
    assert (VERDICT_FOLDS, VERDICT_REPEATS, VERDICT_REPEAT_LIMIT) == (10, 5, 5_000)


@pytest.mark.parametrize("path", SAMPLES, ids=lambda p: p.name)
def test_verdict_equals_the_old_dashboard_policy_on_the_samples(path):
    sel = fitting.read_table(path).select()
    x, y = np.asarray(sel.x), np.asarray(sel.y)
    replicated = np.unique(x).size < x.size
    # van_fuel.csv has repeated speeds (177 distinct of 200 rows): the old policy ignored them
    got = verdict_sweep(x, y, replicates="ignore" if replicated else "auto")
    _assert_same_sweep(got, _old_dashboard_policy(x, y))
    assert got.verdict_rule == verdict_rule_text(x.size)
    assert got.verdict_rule.startswith("10-fold cross-validation repeated 5 times, degrees 0–20, seed 0")
    assert got.to_dict()["verdict_rule"] == got.verdict_rule
    assert any("replicates" in w for w in got.warnings) == replicated


def test_verdict_with_a_group_column_equals_the_old_grouped_policy():
    path = next(p for p in SAMPLES if p.name == "sensor_calibration.csv")
    table = fitting.read_table(path)
    sel = table.select("output (mV)", "temperature (°C)", group="batch")
    x, y, g = np.asarray(sel.x), np.asarray(sel.y), np.asarray(sel.group)
    got = verdict_sweep(x, y, groups=g)
    _assert_same_sweep(got, _old_dashboard_policy(x, y, group=g))
    assert got.verdict_rule.startswith("Cross-validation holding out one group at a time (4 groups)")


def _replicated_quadratic(seed=8):
    """Invented: 8 x levels, 3 replicates each, a true quadratic plus noise of SD 0.4."""
    rng = np.random.default_rng(seed)
    x = np.repeat(np.linspace(0.0, 7.0, 8), 3)
    y = 2.0 + 0.5 * x - 0.3 * x**2 + rng.normal(0.0, 0.4, x.size)
    return x, y


def test_replicates_hold_out_whole_x_levels_as_group_kfold_does():
    x, y = _replicated_quadratic()
    got = verdict_sweep(x, y)
    # reference: scikit-learn's GroupKFold on the level labels, 8 levels -> 8 folds
    levels = np.unique(x, return_inverse=True)[1]
    labels = np.empty(x.size, dtype=np.int64)
    for f, (_, test) in enumerate(GroupKFold(n_splits=8).split(x, y, groups=levels)):
        labels[test] = f
    _assert_same_sweep(got, sweep_degrees(x, y, degrees=ALL_DEGREES, folds=labels))
    assert got.verdict_rule == (
        "8-fold cross-validation, whole x levels held out (8 levels with replicates), degrees 0–20; "
        "the lowest degree within one standard error of the best."
    )


def test_unequal_replicates_are_dealt_to_folds_as_group_kfold_deals_them():
    # 14 levels with 1 to 4 replicates: more levels than folds, unequal sizes, so the dealing order matters
    rng = np.random.default_rng(3)
    counts = np.array([1, 4, 2, 3, 1, 2, 4, 1, 3, 2, 2, 1, 4, 3])
    x = np.repeat(np.arange(14.0), counts)
    y = np.sin(x / 3) + rng.normal(0, 0.05, x.size)
    got = verdict_sweep(x, y, degrees=range(0, 6))
    labels = np.empty(x.size, dtype=np.int64)
    for f, (_, test) in enumerate(GroupKFold(n_splits=10).split(x, y, groups=x)):  # scikit-learn's reference
        labels[test] = f
    _assert_same_sweep(got, sweep_degrees(x, y, degrees=range(0, 6), folds=labels))


def test_degrees_through_the_level_means_are_judged_overfit_when_levels_are_held_out():
    x, y = _replicated_quadratic()
    grouped = verdict_sweep(x, y)
    ignored = verdict_sweep(x, y, replicates="ignore")
    # Observed (seed 8): with levels held out, degrees 0..6 are carried (each training set has 7 levels,
    # and degree 6 passes through their means); the verdict is the true degree 2 and overfitting sets in
    # at degree 3. With replicates ignored, degree 6's test RMSE is flattered by the left-in replicates.
    assert grouped.recommended_degree == 2
    assert grouped.overfitting_from is not None and grouped.overfitting_from <= 4
    i6 = grouped.index(6)
    assert grouped.degrees.max() == 6 and bool(grouped.overfit[i6])
    assert grouped.test_rmse[i6] > 2 * ignored.test_rmse[ignored.index(6)]
    assert any("both training and test" in w for w in ignored.warnings)
    assert not any("both training and test" in w for w in grouped.warnings)


def test_near_replicates_within_the_tolerance_count_as_one_level():
    x, y = _replicated_quadratic()
    jitter = np.tile([0.0, 1e-4, -1e-4], 8)  # 1e-4 on a range of 7: within a 1e-3 share of the range
    exact = verdict_sweep(x + jitter, y, replicate_tolerance=0.0)
    near = verdict_sweep(x + jitter, y, replicate_tolerance=1e-3)
    assert "whole x levels held out (8 levels" in near.verdict_rule
    assert exact.verdict_rule.startswith("10-fold cross-validation repeated 5 times")


def test_rule_text_before_running():
    assert verdict_rule_text(20_000) == (
        "10-fold cross-validation, degrees 0–20, seed 0; the lowest degree within one standard error of the best."
    )
    assert verdict_rule_text(6).startswith("6-fold cross-validation repeated 5 times")
    assert "whole x levels held out (30 levels" in verdict_rule_text(90, levels=30)
    with pytest.raises(fitting.FitError, match="auto"):
        verdict_sweep([1.0, 2.0, 3.0], [1.0, 2.0, 3.0], replicates="sometimes")


def test_rule_text_says_how_many_levels_have_replicates():
    # invented continuous x with one value repeated: the levels are held out whole (no leak), and the
    # sentence says that one level has replicates, not that all 199 have
    rng = np.random.default_rng(3)
    x = rng.uniform(0.0, 10.0, 200)
    x[1] = x[0]
    y = 1.0 + 0.5 * x + rng.normal(0.0, 0.1, x.size)
    res = verdict_sweep(x, y, degrees=range(0, 4))
    assert "whole x levels held out (199 levels, 1 of them with replicates)" in res.verdict_rule
    assert "(1,200 levels with replicates)" in verdict_rule_text(3600, levels=1200, replicated=1200)
