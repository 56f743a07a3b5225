"""A bracketed root finder: Brent's method, in plain Python.

R. P. Brent, Algorithms for Minimization without Derivatives (1973), chapter 4: keep a
bracket [b, c] with f(b) and f(c) of opposite signs and |f(b)| <= |f(c)|; step from b by
inverse quadratic interpolation (or the secant, when only two points are known) when that
step is short enough, by bisection otherwise; never step by less than the tolerance. The
iterates follow the same choices as scipy.optimize.brentq, and tests/test_roots.py holds
them to it (the same root, bit for bit, on polynomials, the read-back's functions and
awkward brackets). It lives here so that reading standards back needs no scipy import,
which costs more than a small command-line run spends on everything else.
"""

from __future__ import annotations

import math
from typing import Callable

from ._errors import FitError

__all__ = ["brent_root"]

_EPS = 2.220446049250313e-16


def brent_root(
    f: Callable[[float], float],
    a: float,
    b: float,
    *,
    xtol: float = 2e-12,
    rtol: float = 4 * _EPS,
    maxiter: int = 100,
) -> float:
    """A root of ``f`` in [a, b], where f(a) and f(b) have opposite signs (or one is zero).

    Converged when the bracket is narrower than xtol + rtol·|x| (or f(x) = 0). Raises FitError
    when the signs do not bracket a root, when f gives NaN, or when ``maxiter`` steps do not suffice.
    """
    x_pre, x_cur = float(a), float(b)
    f_pre, f_cur = _value(f, x_pre), _value(f, x_cur)
    if f_pre == 0.0:
        return x_pre
    if f_cur == 0.0:
        return x_cur
    if math.copysign(1.0, f_pre) == math.copysign(1.0, f_cur):
        raise FitError("A root search was given an interval whose ends do not bracket a root; please report this.")
    x_blk = f_blk = s_pre = s_cur = 0.0
    for _ in range(maxiter):
        if f_pre != 0.0 and f_cur != 0.0 and (f_pre < 0.0) != (f_cur < 0.0):  # non-zero: the signs decide
            x_blk, f_blk = x_pre, f_pre  # the contrapoint: the bracket is [x_cur, x_blk]
            s_pre = s_cur = x_cur - x_pre
        if abs(f_blk) < abs(f_cur):  # keep the better point as x_cur
            x_pre, x_cur, x_blk = x_cur, x_blk, x_cur
            f_pre, f_cur, f_blk = f_cur, f_blk, f_cur
        delta = (xtol + rtol * abs(x_cur)) / 2
        s_bis = (x_blk - x_cur) / 2
        if f_cur == 0.0 or abs(s_bis) < delta:
            return x_cur
        s_pre, s_cur = _step(x_pre, x_cur, x_blk, f_pre, f_cur, f_blk, s_pre, s_cur, s_bis, delta)
        x_pre, f_pre = x_cur, f_cur
        x_cur += s_cur if abs(s_cur) > delta else (delta if s_bis > 0 else -delta)
        f_cur = float(f(x_cur))
        if f_cur != f_cur:
            _value(f, x_cur)  # raises, naming x
    raise FitError(f"A root search did not converge in {maxiter} steps; please report this data set.")


def _step(x_pre, x_cur, x_blk, f_pre, f_cur, f_blk, s_pre, s_cur, s_bis, delta) -> tuple[float, float]:
    """The next (previous step, step): interpolation when it is short enough, bisection otherwise."""
    if abs(s_pre) > delta and abs(f_cur) < abs(f_pre):
        if x_pre == x_blk:  # two points: the secant
            s_try = -f_cur * (x_cur - x_pre) / (f_cur - f_pre)
        else:  # three points: inverse quadratic interpolation
            d_pre = (f_pre - f_cur) / (x_pre - x_cur)
            d_blk = (f_blk - f_cur) / (x_blk - x_cur)
            s_try = -f_cur * (f_blk * d_blk - f_pre * d_pre) / (d_blk * d_pre * (f_blk - f_pre))
        if 2 * abs(s_try) < min(abs(s_pre), 3 * abs(s_bis) - delta):
            return s_cur, s_try
    return s_bis, s_bis


def _value(f: Callable[[float], float], x: float) -> float:
    v = float(f(x))
    if math.isnan(v):
        raise FitError(f"A root search met a value that is not a number at x = {x!r}; please report this data set.")
    return v
