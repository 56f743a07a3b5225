"""How stable the cross-validated verdict is when the folds are drawn again.

Sources, named beside each check: the engine's own sweep_degrees (checked against scikit-learn's
KFold, PredefinedSplit and refits in tests/test_sweep_reference.py) where a redraw cannot differ
from one sweep (leave-one-out, leave-one-level-out); otherwise properties that hold by construction
(determinism for a seed, shares summing to 1) and orderings on invented data, not exact numbers.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from fitting import FitError, sweep_degrees
from fitting._evidence import EXACT_REDRAW_LIMIT, _deal, verdict_stability


def clear_quadratic(n=200, seed=3):
    # invented: a response that bends clearly, little noise
    rng = np.random.default_rng(seed)
    x = rng.uniform(-1.0, 1.0, n)
    return x, 1.0 + x + 2.0 * x**2 + rng.normal(0.0, 0.2, n)


def noisy_thirty(seed=7):
    # invented: 30 readings of a wavy response under heavy noise
    rng = np.random.default_rng(seed)
    x = np.linspace(0.0, 3.0, 30)
    return x, np.sin(2 * x) + 0.1 * x**2 + rng.normal(0.0, 0.4, 30)


def test_same_seed_same_shares():
    # property: the redraws come from numpy's Generator seeded once
    x, y = noisy_thirty()
    a = verdict_stability(x, y, draws=30, seed=5)
    b = verdict_stability(x, y, draws=30, seed=5)
    assert np.array_equal(a.counts, b.counts) and a.sentence == b.sentence


def test_shares_sum_to_one_and_to_dict_is_json():
    # property: every redraw recommends exactly one degree
    x, y = noisy_thirty()
    v = verdict_stability(x, y, draws=50, seed=1)
    assert int(v.counts.sum()) == 50 == v.draws
    assert float(v.shares.sum()) == pytest.approx(1.0, abs=1e-12)
    d = json.loads(json.dumps(v.to_dict(), allow_nan=False))
    assert set(d) >= {"degrees", "shares", "counts", "draws", "seed", "folds", "repeats", "held_out", "sentence"}
    assert d["held_out"] == "rows" and d["repeats"] == 5 and d["mini_blocks"] is None
    assert d["sentence"].startswith(f"degree {v.modal_degree} in ") and "of 50 redraws of the folds" in d["sentence"]


@pytest.fixture(scope="module")
def clear():
    return verdict_stability(*clear_quadratic())  # the default 200 redraws


@pytest.fixture(scope="module")
def noisy():
    return verdict_stability(*noisy_thirty(), draws=100)


def test_clear_quadratic_is_degree_two_in_nine_draws_out_of_ten(clear):
    # invented clear quadratic, 200 rows: the verdict should hardly depend on the folds
    assert clear.draws == 200
    assert clear.share(2) >= 0.9


def test_thirty_noisy_points_spread_wider_than_a_clear_curve(clear, noisy):
    # ordering on invented data: heavy noise on few points leaves the verdict to the folds more often
    assert noisy.modal_share < clear.modal_share
    assert int((noisy.counts > 0).sum()) > int((clear.counts > 0).sum())


def test_leave_one_out_redraws_all_equal_the_sweep():
    # source: sweep_degrees with folds = n (leave-one-out), so every redraw is the same partition
    x, y = noisy_thirty()
    ref = sweep_degrees(x, y, degrees=range(0, 21), folds=x.size).recommended_degree
    v = verdict_stability(x, y, draws=3, folds=x.size, repeats=1)
    assert v.share(ref) == 1.0


def test_replicated_levels_are_held_out_whole():
    # source: sweep_degrees with one fold label per x level (leave-one-level-out, as PredefinedSplit)
    rng = np.random.default_rng(2)
    levels = np.linspace(1.0, 8.0, 8)
    x = np.repeat(levels, 3)
    y = 0.5 + 0.9 * x - 0.03 * x**2 + rng.normal(0.0, 0.15, x.size)
    ref = sweep_degrees(x, y, degrees=range(0, 21), folds=np.searchsorted(levels, x)).recommended_degree
    v = verdict_stability(x, y, draws=4, folds=8, repeats=1)
    assert v.held_out == "x levels" and v.share(ref) == 1.0
    g = verdict_stability(x, y, draws=4, folds=8, repeats=1, groups=(x * 10).astype(int))
    assert g.held_out == "groups" and g.share(ref) == 1.0
    rows = verdict_stability(x, y, draws=4, folds=8, repeats=1, replicates=False)
    assert rows.held_out == "rows"


def test_large_data_deal_mini_blocks_and_stay_deterministic():
    # property of the mini-block design (module docstring); invented clear quadratic above the exact limit
    x, y = clear_quadratic(n=EXACT_REDRAW_LIMIT + 1000, seed=4)
    a = verdict_stability(x, y, draws=20, seed=9)
    b = verdict_stability(x, y, draws=20, seed=9)
    assert a.mini_blocks == 200 and a.repeats == 1 and "mini-blocks" in a.method
    assert np.array_equal(a.counts, b.counts)
    assert a.modal_degree == 2 and float(a.shares.sum()) == pytest.approx(1.0)


def test_units_are_dealt_in_equal_shares():
    # property: as KFold, fold sizes differ by at most one
    rng = np.random.default_rng(0)
    for count, folds in [(23, 10), (200, 10), (7, 7)]:
        sizes = np.bincount(_deal(rng, count, folds), minlength=folds)
        assert sizes.max() - sizes.min() <= 1 and sizes.sum() == count


def test_more_folds_than_units_is_refused():
    x, y = noisy_thirty()
    with pytest.raises(FitError, match="Cannot make 40 folds"):
        verdict_stability(x, y, folds=40)
