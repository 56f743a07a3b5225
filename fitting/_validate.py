"""One home for the engine's limits and the checks of split settings.

Every front end (the dashboard's sliders, the command line's options, the
streaming sweep) should take its bounds from here, so a setting accepted in one
place is accepted everywhere. Each check returns the value in canonical form or
raises FitError with a sentence that says what to do.
"""

from __future__ import annotations

import math
from typing import Any, Iterable

from ._errors import FitError

#: the highest degree any sweep or fit in the product offers
MAX_DEGREE = 20
#: the largest seed numpy's RandomState (behind scikit-learn's splitters) accepts
MAX_SEED = 2**32 - 1
#: fewest folds a cross-validation can have
MIN_FOLDS = 2
#: a holdout fraction lies strictly between these
HOLDOUT_BOUNDS = (0.0, 1.0)

__all__ = [
    "MAX_DEGREE",
    "MAX_SEED",
    "MIN_FOLDS",
    "HOLDOUT_BOUNDS",
    "check_folds",
    "check_seed",
    "check_repeats",
    "check_holdout",
    "check_degrees",
]


def check_folds(folds: Any, n: int | None) -> int:
    """The number of folds as an int from MIN_FOLDS to n (the rows); raise FitError otherwise.

    ``n=None`` when the rows are not counted yet (a file read in chunks): only the lower bound
    is checked, and the caller checks the upper one once the rows are known.
    """
    try:
        k = int(folds)
    except (TypeError, ValueError):
        raise FitError(f"Folds must be a whole number or one label per row, not {folds!r}.") from None
    if k < MIN_FOLDS:
        raise FitError(f"Cross-validation needs at least {MIN_FOLDS} folds, not {k}; 5 or 10 are common.")
    if n is not None and k > n:
        raise FitError(
            f"Cannot make {k} folds from {n} rows; use at most {n} folds (10 is common, or leave-one-out with {n})."
        )
    return k


def check_seed(seed: Any) -> int:
    """The seed as an int from 0 to MAX_SEED; raise FitError otherwise."""
    try:
        seed = int(seed)
    except (TypeError, ValueError):
        raise FitError("Repeats and seed must be whole numbers.") from None
    if not 0 <= seed <= MAX_SEED:
        raise FitError(f"The seed must be a whole number from 0 to {MAX_SEED}, not {seed}.")
    return seed


def check_repeats(repeats: Any) -> int:
    """Repeats as an int of at least 1; raise FitError otherwise."""
    try:
        repeats = int(repeats)
    except (TypeError, ValueError):
        raise FitError("Repeats and seed must be whole numbers.") from None
    if repeats < 1:
        raise FitError(f"Repeats must be at least 1, not {repeats}.")
    return repeats


def check_holdout(holdout: Any) -> float:
    """The holdout as a test fraction strictly between 0 and 1; raise FitError otherwise."""
    try:
        frac = float(holdout)
    except (TypeError, ValueError):
        frac = float("nan")
    lo, hi = HOLDOUT_BOUNDS
    if not (lo < frac < hi) or math.isnan(frac):
        raise FitError(f"The holdout must be a fraction between 0 and 1 (e.g. 0.25), not {holdout!r}.")
    return frac


def check_degrees(degrees: Iterable[Any]) -> tuple[list[int], list[str]]:
    """Sorted distinct degrees, capped at MAX_DEGREE, and the notes that explain any cap."""
    try:
        degs = sorted({int(d) for d in degrees})
    except (TypeError, ValueError):
        raise FitError(f"Degrees must be whole numbers, not {degrees!r}.") from None
    if not degs or degs[0] < 0:
        raise FitError("Give at least one degree, all of them 0 or more.")
    notes: list[str] = []
    if degs[-1] > MAX_DEGREE:
        notes.append(f"Degrees above {MAX_DEGREE} were left out: double-precision data rarely support them.")
        degs = [d for d in degs if d <= MAX_DEGREE] or [MAX_DEGREE]
    return degs, notes
