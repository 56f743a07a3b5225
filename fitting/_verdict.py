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
  x values closer than ``replicate_tolerance`` (x units, chained along sorted x) form one
  level, as in ``degree_evidence``: ``replicate_levels`` is the one definition of a level.
* The recommended degree is the lowest whose mean test RMSE is within one standard
  error of the lowest mean test RMSE (the one-standard-error rule; common practice,
  no source here).

``verdict_folds`` applies this policy to a data set (what a fold holds out whole, how many
folds, how many repeats) before any fold is drawn; ``verdict_sweep`` and
``fitting.verdict_stability`` both start from it, so they follow the same rule.
"""

from __future__ import annotations

import dataclasses
import math
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
    "VERDICT_DEGREES",
    "VerdictFolds",
    "verdict_folds",
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
#: the degrees the verdict sweeps unless told otherwise
VERDICT_DEGREES = range(0, MAX_DEGREE + 1)
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
    replicated: int | None = None,
) -> str:
    """The verdict's rule as a sentence, for ``n`` rows, before anything is run.

    ``grouped``: the number of groups when a group column is given (True when unknown).
    ``levels``: the number of distinct x levels when x has replicates that the folds
    keep together (None otherwise); ``replicated``: how many of them have replicates (all when None).
    """
    degs = sorted({int(d) for d in (VERDICT_DEGREES if degrees is None else degrees)})
    span = _span(degs)
    if grouped:
        count = f" ({int(grouped)} groups)" if not isinstance(grouped, bool) else ""
        return f"Cross-validation holding out one group at a time{count}, {span}; {_RULE_TAIL}."
    if levels is not None:
        k, m = min(VERDICT_FOLDS, int(levels)), int(levels)
        some = replicated is not None and int(replicated) < m
        which = f"{m:,} levels, {int(replicated):,} of them" if some else f"{m:,} levels"
        which += " with replicates"
        return f"{k}-fold cross-validation, whole x levels held out ({which}), {span}; {_RULE_TAIL}."
    k = min(VERDICT_FOLDS, int(n))
    repeats = f" repeated {VERDICT_REPEATS} times" if n <= VERDICT_REPEAT_LIMIT else ""
    return f"{k}-fold cross-validation{repeats}, {span}, seed {seed}; {_RULE_TAIL}."


def replicate_levels(x: ArrayLike, tolerance: float = 0.0) -> np.ndarray:
    """An x-level label per row (0 .. m - 1, in order of x).

    Sorted x values no more than ``tolerance`` (in x units) above their neighbour share a level,
    so a chain of close values forms one level; 0 means exactly equal values only. The one
    definition of an x level: the verdict's folds, its stability and the lack-of-fit test use it.
    """
    tol = check_tolerance(tolerance)
    x = np.asarray(x, dtype=np.float64).ravel()
    order = np.argsort(x, kind="stable")
    new = np.ones(x.size, dtype=bool)
    new[1:] = np.diff(x[order]) > tol
    labels = np.empty(x.size, dtype=np.int64)
    labels[order] = np.cumsum(new) - 1
    return labels


def check_tolerance(tolerance) -> float:
    """The replicate tolerance as a float of 0 or more (x units); raise FitError otherwise."""
    try:
        tol = float(tolerance)
    except (TypeError, ValueError):
        tol = float("nan")
    if not (math.isfinite(tol) and tol >= 0.0):
        raise FitError(f"The replicate tolerance must be 0 or a positive number in x units, not {tolerance!r}.")
    return tol


def check_replicates(replicates) -> str:
    """Return "auto" or "ignore" (True and False stand for them); raise FitError otherwise."""
    if isinstance(replicates, bool):
        return "auto" if replicates else "ignore"
    if replicates not in ("auto", "ignore"):
        raise FitError(f'Replicates must be "auto" or "ignore", not {replicates!r}.')
    return replicates


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


@dataclasses.dataclass(frozen=True, eq=False)
class VerdictFolds:
    """The verdict's policy applied to one data set, before any fold is drawn."""

    units: np.ndarray  # a unit label per row (0 .. n_units - 1): what a fold holds out whole
    held_out: str  # "rows", "x levels" or "groups"
    folds: int
    repeats: int
    rule: str  # ``verdict_rule_text`` for this data set
    notes: tuple[str, ...] = ()
    groups: np.ndarray | None = None  # the group labels as given (held_out == "groups")

    @property
    def n_units(self) -> int:
        return int(self.units.max()) + 1


def verdict_folds(
    x: np.ndarray,
    *,
    groups: ArrayLike | None = None,
    replicates: str | bool = "auto",
    replicate_tolerance: float = 0.0,
    degrees: Iterable[int] | None = None,
    seed: int = 0,
) -> VerdictFolds:
    """What the verdict holds out, in how many folds, how many times (see the module docstring).

    ``x`` is already checked (``validate_xyw``); ``degrees`` and ``seed`` only enter the rule's sentence.
    """
    mode = check_replicates(replicates)
    n = x.size
    if groups is not None:
        labels = np.asarray(groups).ravel()
        if labels.size != n:
            raise FitError(f"Expected one group label per row; got {labels.size} labels for {n} rows.")
        if labels.dtype.kind in "iu" and (labels < 0).any():
            # sweep_degrees keeps integer labels below 0 in training (PredefinedSplit); a group is held out
            labels = labels.astype(str)
        units = np.unique(labels.astype(str), return_inverse=True)[1].astype(np.int64).ravel()
        k = int(units.max()) + 1
        rule = verdict_rule_text(n, grouped=k, degrees=degrees, seed=seed)
        return VerdictFolds(units, "groups", k, 1, rule, groups=labels)
    levels = replicate_levels(x, replicate_tolerance)
    m = int(levels.max()) + 1
    if m < n and mode == "auto":
        if m < 2:
            raise FitError(
                "With this replicate tolerance all x values form one level; lower the tolerance (it is in x units)."
            )
        replicated = int((np.bincount(levels) > 1).sum())
        rule = verdict_rule_text(n, levels=m, degrees=degrees, seed=seed, replicated=replicated)
        return VerdictFolds(levels, "x levels", min(VERDICT_FOLDS, m), 1, rule)
    repeats = VERDICT_REPEATS if n <= VERDICT_REPEAT_LIMIT else 1
    rule = verdict_rule_text(n, degrees=degrees, seed=seed)
    notes = (REPLICATE_NOTE,) if m < n else ()
    return VerdictFolds(np.arange(n, dtype=np.int64), "rows", min(VERDICT_FOLDS, n), repeats, rule, notes)


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
        x values within this distance (x units, chained along sorted x) count as one
        level (``replicate_levels``, as in ``degree_evidence``).
    """
    check_replicates(replicates)
    x, y, w = validate_xyw(x, y, weights)
    degrees = list(VERDICT_DEGREES) if degrees is None else list(degrees)
    plan = verdict_folds(
        x, groups=groups, replicates=replicates, replicate_tolerance=replicate_tolerance, degrees=degrees, seed=seed
    )
    if plan.held_out == "groups":
        folds = plan.groups
    elif plan.held_out == "x levels":
        folds = group_kfold_labels(plan.units, plan.folds)
    else:
        folds = plan.folds
    sweep = sweep_degrees(x, y, degrees=degrees, folds=folds, repeats=plan.repeats, seed=seed, weights=w)
    return dataclasses.replace(sweep, verdict_rule=plan.rule, warnings=sweep.warnings + plan.notes)
