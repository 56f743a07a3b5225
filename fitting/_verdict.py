"""The one verdict rule: how degreescope chooses the degree it recommends.

Every front end (the dashboard's verdict, ``degreescope sweep``) calls ``verdict_sweep``
so that they recommend by the same rule, and prints ``verdict_rule_text`` (or the
result's ``verdict_rule``) so the user can read that rule in plain words.

The rule
--------
* Shuffled 10-fold cross-validation (``VERDICT_FOLDS``; fewer folds when there are
  fewer rows), repeated 5 times (``VERDICT_REPEATS``) with new shuffles when there are
  at most 5,000 rows (``VERDICT_REPEAT_LIMIT``), seed 0; degrees 0 to MAX_DEGREE.
* With a group column, each group is held out in turn (rows of one group never sit
  in both training and test).
* When x has replicates (an x level that appears at least twice), whole x levels are
  held out: the levels are dealt to 10 folds the way scikit-learn's GroupKFold deals
  groups (largest first, each to the lightest fold). Otherwise the replicates of a
  level would sit in both training and test, and a curve through the level means
  would look better than it is. ``replicates="ignore"`` turns this off, with a warning.
* The recommended degree is the lowest whose mean test RMSE is within one standard
  error of the lowest mean test RMSE (the one-standard-error rule; common practice,
  no source here).
"""

from __future__ import annotations

import dataclasses
from typing import Iterable

import numpy as np
from numpy.typing import ArrayLike

from ._errors import FitError
from ._polyfit import validate_xyw
from ._sweep import DegreeSweep, sweep_degrees
from ._validate import MAX_DEGREE

__all__ = [
    "VERDICT_FOLDS",
    "VERDICT_REPEATS",
    "VERDICT_REPEAT_LIMIT",
    "verdict_sweep",
    "verdict_rule_text",
    "replicate_levels",
    "group_kfold_labels",
]

#: folds of the verdict's cross-validation (fewer when there are fewer rows or x levels)
VERDICT_FOLDS = 10
#: repeats of the shuffled folds for data sets of at most VERDICT_REPEAT_LIMIT rows
VERDICT_REPEATS = 5
#: above this many rows the folds are not repeated (the mean over 10 folds is steady enough)
VERDICT_REPEAT_LIMIT = 5_000
_RULE_TAIL = "the lowest degree within one standard error of the best"
REPLICATE_NOTE = (
    "x has replicates, but they were not grouped (replicates='ignore'): replicates of one x level then sit in "
    "both training and test, which flatters degrees that pass through the level means."
)


def _span(degrees: list[int]) -> str:
    return f"degree {degrees[0]}" if len(degrees) == 1 else f"degrees {degrees[0]}–{degrees[-1]}"


def verdict_rule_text(
    n: int,
    *,
    grouped: int | bool = False,
    levels: int | None = None,
    degrees: Iterable[int] | None = None,
    seed: int = 0,
) -> str:
    """The verdict's rule as a sentence, for ``n`` rows, before anything is run.

    ``grouped``: the number of groups when a group column is given (True when unknown).
    ``levels``: the number of distinct x levels when x has replicates that the folds
    keep together (None otherwise).
    """
    degs = sorted({int(d) for d in (range(0, MAX_DEGREE + 1) if degrees is None else degrees)})
    span = _span(degs)
    if grouped:
        count = f" ({int(grouped)} groups)" if not isinstance(grouped, bool) else ""
        return f"Cross-validation holding out one group at a time{count}, {span}; {_RULE_TAIL}."
    if levels is not None:
        k = min(VERDICT_FOLDS, int(levels))
        return (
            f"{k}-fold cross-validation, whole x levels held out ({int(levels)} levels with replicates), "
            f"{span}; {_RULE_TAIL}."
        )
    k = min(VERDICT_FOLDS, int(n))
    repeats = f" repeated {VERDICT_REPEATS} times" if n <= VERDICT_REPEAT_LIMIT else ""
    return f"{k}-fold cross-validation{repeats}, {span}, seed {seed}; {_RULE_TAIL}."


def replicate_levels(x: ArrayLike, tolerance: float = 0.0) -> tuple[np.ndarray, int]:
    """A level label per row and the number of levels.

    Values of x within ``tolerance`` times the x range of their neighbour (in sorted
    order) count as one level; with tolerance 0 only equal values do.
    """
    x = np.asarray(x, dtype=np.float64).ravel()
    if not tolerance >= 0:
        raise FitError(f"The replicate tolerance must be 0 or more (a share of the x range), not {tolerance!r}.")
    order = np.argsort(x, kind="stable")
    xs = x[order]
    gap = float(tolerance) * (float(xs[-1]) - float(xs[0])) if xs.size else 0.0
    new_level = np.concatenate(([True], np.diff(xs) > gap)) if xs.size else np.zeros(0, dtype=bool)
    labels = np.empty(x.size, dtype=np.int64)
    labels[order] = np.cumsum(new_level) - 1
    return labels, int(new_level.sum())


def group_kfold_labels(groups: ArrayLike, n_splits: int) -> np.ndarray:
    """A fold label per row that deals whole groups to ``n_splits`` folds.

    The same assignment as scikit-learn's GroupKFold(n_splits) without shuffling: groups
    by size, largest first (a stable sort, reversed), each to the fold with the fewest
    rows so far. scikit-learn is not imported.
    """
    uniq, group_idx = np.unique(np.asarray(groups).ravel(), return_inverse=True)
    if n_splits > uniq.size:
        raise FitError(f"Cannot deal {uniq.size} groups to {n_splits} folds; use at most {uniq.size} folds.")
    sizes = np.bincount(group_idx)
    order = np.argsort(sizes, kind="stable")[::-1]
    per_fold = np.zeros(n_splits)
    group_to_fold = np.zeros(uniq.size, dtype=np.int64)
    for g in order:
        lightest = int(np.argmin(per_fold))
        per_fold[lightest] += sizes[g]
        group_to_fold[g] = lightest
    return group_to_fold[group_idx.ravel()]


def verdict_sweep(
    x: ArrayLike,
    y: ArrayLike,
    *,
    weights: ArrayLike | None = None,
    groups: ArrayLike | None = None,
    degrees: Iterable[int] | None = None,
    seed: int = 0,
    replicates: str = "auto",
    replicate_tolerance: float = 0.0,
) -> DegreeSweep:
    """The degree sweep behind the verdict, by the one rule (see the module docstring).

    The result's ``verdict_rule`` states the rule as a sentence.

    Parameters
    ----------
    groups : array-like, default=None
        A group label per row: each group is held out in turn.
    degrees : iterable of int, default=None (0 to MAX_DEGREE)
    replicates : "auto" or "ignore", default="auto"
        "auto" holds out whole x levels when x has replicates; "ignore" uses plain
        shuffled folds and adds a warning.
    replicate_tolerance : float, default=0.0
        x values closer than this share of the x range count as one level.
    """
    if replicates not in ("auto", "ignore"):
        raise FitError(f'Replicates must be "auto" or "ignore", not {replicates!r}.')
    x, y, w = validate_xyw(x, y, weights)
    degrees = list(range(0, MAX_DEGREE + 1)) if degrees is None else list(degrees)
    n = x.size
    notes: tuple[str, ...] = ()
    if groups is not None:
        labels = np.asarray(groups).ravel()
        if labels.size != n:
            raise FitError(f"Expected one group label per row; got {labels.size} labels for {n} rows.")
        rule = verdict_rule_text(n, grouped=int(np.unique(labels.astype(str)).size), degrees=degrees, seed=seed)
        sweep = sweep_degrees(x, y, degrees=degrees, folds=labels, seed=seed, weights=w)
        return dataclasses.replace(sweep, verdict_rule=rule)
    levels, m = replicate_levels(x, replicate_tolerance)
    if m < n and replicates == "auto":
        if m < 2:
            raise FitError(
                "With this replicate tolerance all x values form one level; lower the tolerance "
                "(it is a share of the x range)."
            )
        folds = group_kfold_labels(levels, min(VERDICT_FOLDS, m))
        sweep = sweep_degrees(x, y, degrees=degrees, folds=folds, seed=seed, weights=w)
        rule = verdict_rule_text(n, levels=m, degrees=degrees, seed=seed)
    else:
        repeats = VERDICT_REPEATS if n <= VERDICT_REPEAT_LIMIT else 1
        sweep = sweep_degrees(x, y, degrees=degrees, folds=min(VERDICT_FOLDS, n), repeats=repeats, seed=seed, weights=w)
        rule = verdict_rule_text(n, degrees=degrees, seed=seed)
        if m < n:
            notes = (REPLICATE_NOTE,)
    return dataclasses.replace(sweep, verdict_rule=rule, warnings=sweep.warnings + notes)
