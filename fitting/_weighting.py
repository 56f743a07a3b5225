"""Weighting rules: the named weightings of calibration practice, and the one weight convention.

A weight is an inverse variance: w_i = 1 / Var(y_i), up to a common factor. A weights
column is read that way, and so is every rule here. (numpy's ``polyfit`` takes
w = 1/sigma instead; degreescope never does.)

Rules (the usual choices in calibration; common practice, no source):

    none    every standard counts the same
    1/x     variance grows in proportion to x
    1/x2    standard deviation grows in proportion to x (constant relative error in x)
    1/y     variance grows in proportion to the response
    1/y2    standard deviation grows in proportion to the response (constant relative error)

A named rule gives the weight at any new x as well (``weight_at``), which a prediction
or calibration interval there needs: the variance of a new reading at x0 is
s² / w(x0). Rules on y use the fitted response at x0, since a new point has no observed y.
A weights column cannot say what the weight at a new x is; a fit made with one records
the rule ``"column"``.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ._errors import FitError

#: rule -> plain-language label, in the order the comparison shows them
WEIGHTINGS: dict[str, str] = {
    "none": "none: every standard counts the same",
    "1/x": "1/x: variance grows with x",
    "1/x2": "1/x²: spread grows with x (constant relative error)",
    "1/y": "1/y: variance grows with the response",
    "1/y2": "1/y²: spread grows with the response (constant relative error)",
}

#: recorded on a fit made with a weights column: the weight at a new x is unknown
COLUMN_RULE = "column"

_POWER = {"1/x": ("x", 1), "1/x2": ("x", 2), "1/y": ("y", 1), "1/y2": ("y", 2)}


def check_weighting(rule: str | None) -> str:
    """Return the canonical rule name, or raise FitError naming the accepted ones.

    ``None`` means ``"none"``; ``"1/x^2"`` and ``"1/x²"`` are read as ``"1/x2"`` (and the same for y).
    """
    if rule is None:
        return "none"
    key = str(rule).strip().lower().replace("^2", "2").replace("²", "2").replace(" ", "")
    if key in WEIGHTINGS:
        return key
    names = ", ".join(WEIGHTINGS)
    raise FitError(f"Unknown weighting {str(rule)[:40]!r}. Use one of: {names}.")


def weights_for(rule: str | None, x: ArrayLike, y: ArrayLike, *, rows: ArrayLike | None = None) -> np.ndarray | None:
    """Weights (inverse variances) for each row under a named rule; ``None`` for ``"none"``.

    Rows where the rule is undefined (x = 0 under 1/x, y ≤ 0 under 1/y, a non-finite
    weight) are refused with a FitError that names them: by ``rows`` (the file's line
    numbers) when given, otherwise by position. They are never dropped silently.

    Examples
    --------
    >>> weights_for("1/x2", [1.0, 2.0, 4.0], [3.0, 5.0, 9.0]).tolist()
    [1.0, 0.25, 0.0625]
    >>> weights_for("none", [1.0], [2.0]) is None
    True
    """
    rule = check_weighting(rule)
    if rule == "none":
        return None
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    var, power = _POWER[rule]
    base = x if var == "x" else y
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        w = 1.0 / np.abs(base) ** power if var == "x" else 1.0 / base**power
    bad = ~np.isfinite(w) | (w <= 0)
    if var == "y" and power == 1:
        bad |= base <= 0
    if np.any(bad):
        where = np.flatnonzero(bad)
        labels = np.asarray(rows)[where] if rows is not None else where
        shown = ", ".join(str(int(v)) for v in labels[:10]) + (" …" if len(labels) > 10 else "")
        what = "line" if rows is not None else "row"
        why = f"{var} = 0" if var == "x" else f"{var} ≤ 0" if power == 1 else f"{var} = 0"
        raise FitError(
            f"Weighting {rule} is undefined where {why}: {len(labels)} {what}{'s' if len(labels) != 1 else ''} "
            f"({what} {shown}). Choose another weighting, or leave those rows out on purpose."
        )
    return w


def weight_at(rule: str | None, x0: ArrayLike, y_hat0: ArrayLike) -> np.ndarray:
    """The weight a named rule gives at new points x0 (with fitted responses y_hat0).

    ``"none"`` gives 1. ``"column"`` cannot be evaluated at a new x; it also gives 1, and the
    caller must say that intervals assume a weight of 1 there. Undefined points give NaN.
    """
    rule = COLUMN_RULE if rule == COLUMN_RULE else check_weighting(rule)
    x0 = np.asarray(x0, dtype=float)
    if rule in ("none", COLUMN_RULE):
        return np.ones_like(x0)
    var, power = _POWER[rule]
    base = x0 if var == "x" else np.asarray(y_hat0, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        w = 1.0 / np.abs(base) ** power if var == "x" else 1.0 / base**power
    ok = np.isfinite(w) & (w > 0)
    if var == "y" and power == 1:
        ok &= base > 0
    return np.where(ok, w, np.nan)
