"""Verdict stability's two routes give the same verdicts: one factorisation of all rows, and a sweep per redraw.

Sources, named beside each check: the sweep's own route (``sweep_from_blocks`` on every redrawn
partition; tests/test_verdict_stability.py ties it to verdict_sweep and scikit-learn's folds) for
the counts; numpy.linalg.lstsq refits on each fold's training rows for the per-fold test errors (the
leave-group-out identity of fitting/_redraw.py). Data are invented.
"""

from __future__ import annotations

import numpy as np
import pytest

import fitting
from fitting import _basis, _evidence, _redraw
from fitting._sweep import kfold_deal


def _wavy(n=30, seed=7, noise=0.4):
    # invented: a wavy response under noise
    rng = np.random.default_rng(seed)
    x = np.linspace(0.0, 3.0, n)
    return x, np.sin(2 * x) + 0.1 * x**2 + rng.normal(0.0, noise, n)


def _clustered(seed=4):
    # invented: 30 doses crowded near zero and spread out above, a response that levels off
    rng = np.random.default_rng(seed)
    x = np.sort(np.concatenate([[0.0], np.exp(rng.uniform(-0.8, 4.2, 29))]))
    return x, 1.8 * x / (6.0 + x) + rng.normal(0.0, 0.03, x.size)


def _exact_cubic():
    x = np.linspace(0.0, 10.0, 25)  # invented: an exact cubic, so every test error of degree >= 3 is rounding
    return x, 1 + 2 * x - 0.3 * x**2 + 0.02 * x**3


def _weighted():
    x, y = _wavy(40, seed=3, noise=0.2)
    return x, y, 1.0 / (0.5 + x) ** 2  # invented: weights falling with x


CASES = {
    "wavy": (_wavy(), {}),
    "wavy, another seed": (_wavy(), {"seed": 4}),
    "few rows": (_wavy(12, seed=1), {}),
    "clustered x": (_clustered(), {}),
    "exact cubic": (_exact_cubic(), {}),
    "weighted": (_weighted()[:2], {"weights": _weighted()[2]}),
    "five folds, two repeats": (_wavy(50, seed=5), {"folds": 5, "repeats": 2}),
    "lower degrees": (_wavy(), {"degrees": range(0, 8)}),
    "replicates ignored": ((np.repeat(np.linspace(1, 8, 8), 3), _wavy(24, seed=2)[1]), {"replicates": "ignore"}),
}


@pytest.mark.parametrize("name", list(CASES))
def test_both_routes_give_the_same_counts(name, monkeypatch):
    # source: the sweep's route (every redraw's partition through sweep_from_blocks), as before the fast route
    (x, y), kw = CASES[name]
    fast = fitting.verdict_stability(x, y, draws=60, **kw)
    monkeypatch.setattr(_evidence, "_ONE_FACTOR", False)
    slow = fitting.verdict_stability(x, y, draws=60, **kw)
    np.testing.assert_array_equal(fast.counts, slow.counts)
    assert fast.to_dict() == slow.to_dict()


def test_the_fast_route_runs_on_small_noisy_data(monkeypatch):
    # guards the test above: on noisy data the redraws must not all fall back to the sweep's route
    calls = []
    real = _evidence._sweep_verdict
    monkeypatch.setattr(_evidence, "_sweep_verdict", lambda *a: calls.append(1) or real(*a))
    fitting.verdict_stability(*_wavy(), draws=50)
    assert len(calls) < 10


def test_exact_data_are_decided_by_the_sweeps_arithmetic(monkeypatch):
    # property: on an exact cubic every test error of degree >= 3 is rounding, so no verdict is clear and
    # every redraw goes through the sweep's route (which the counts test above compares against)
    calls = []
    real = _evidence._sweep_verdict
    monkeypatch.setattr(_evidence, "_sweep_verdict", lambda *a: calls.append(1) or real(*a))
    fitting.verdict_stability(*_exact_cubic(), draws=12)
    assert len(calls) == 12


def _setup(x, y, w=None, degs=range(0, 13)):
    degs = list(degs)
    offset, scale = _basis.domain_map(float(x.min()), float(x.max()))
    t = _basis.to_window(x, offset, scale)
    return t, _redraw.full_factor(t, y, w, degs), degs


def _refit_rmse(t, y, w, held, degree):
    # source: numpy.linalg.lstsq on the training rows (weighted by sqrt(w)), predicting the held-out rows
    keep = np.ones(t.size, dtype=bool)
    keep[held] = False
    sw = np.ones_like(y) if w is None else np.sqrt(w)
    a = _basis.chebyshev_vander(t, degree + 1)
    coef = np.linalg.lstsq(a[keep] * sw[keep, None], y[keep] * sw[keep], rcond=None)[0]
    r = (y[held] - a[held] @ coef) * sw[held]
    return float(np.sqrt(r @ r / (sw[held] ** 2).sum()))


@pytest.mark.parametrize("weighted", [False, True])
def test_fold_errors_equal_refits_on_the_training_rows(weighted):
    x, y, w = _weighted()
    w = w if weighted else None
    t, fac, degs = _setup(x, y, w)
    rng = np.random.RandomState(1)
    labels = np.stack([kfold_deal(rng, x.size, 10) for _ in range(3)])
    idx = _redraw.fold_rows(labels, 10, x.size).reshape(-1, 4)
    sse, pivot = _redraw.fold_errors(fac, idx)
    wsum = fac.w[idx].sum(axis=1)
    for f in range(0, idx.shape[0], 7):
        held = idx[f][idx[f] < x.size]
        for i, d in enumerate(degs):
            if pivot[f, i] > 1e-6:
                assert np.sqrt(sse[f, i] / wsum[f]) == pytest.approx(_refit_rmse(t, y, w, held, d), rel=1e-8)


def test_training_errors_equal_refits_where_the_one_factorisation_cannot_resolve():
    x, y = _clustered()
    t, fac, degs = _setup(x, y, degs=range(0, 21))
    rng = np.random.RandomState(2)
    idx = _redraw.fold_rows(np.stack([kfold_deal(rng, x.size, 10) for _ in range(4)]), 10, x.size).reshape(-1, 3)
    _sse, pivot = _redraw.fold_errors(fac, idx)
    assert (pivot < _redraw.PIVOT_WEAK).any()  # observed on these data: far doses out of the training rows' reach
    rmse, err, failed, _doubt = _redraw.training_errors(fac, idx)
    for f in range(idx.shape[0]):
        for i, d in enumerate(degs[:12]):
            if not failed[f, i]:
                assert rmse[f, i] == pytest.approx(_refit_rmse(t, y, None, idx[f], d), rel=1e-6)
                assert err[f, i] >= 1e-9 * rmse[f, i]


def test_fold_rows_lists_each_folds_rows_in_order():
    labels = np.array([[2, 0, 1, 0, 2, 2], [1, 1, 0, 0, 2, 0]])
    rows = _redraw.fold_rows(labels, 3, 6)
    assert rows.shape == (2, 3, 3)
    assert rows[0].tolist() == [[1, 3, 6], [2, 6, 6], [0, 4, 5]]
    assert rows[1].tolist() == [[2, 3, 5], [0, 1, 6], [4, 6, 6]]
