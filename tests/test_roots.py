"""The engine's bracketed root finder (fitting/_roots.py) against scipy.optimize.brentq.

Reference: scipy.optimize.brentq, which the read-back used before. Brent's method makes the same
choices from the same function values, so the roots must agree bit for bit, and a search that
does not converge in the allowed steps must fail in both.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from fitting import FitError
from fitting._roots import brent_root

EPS = float(np.finfo(float).eps)


def _both(f, a, b, xtol):
    try:
        ref = brentq(f, a, b, xtol=xtol, rtol=4 * EPS)
    except RuntimeError:
        ref = "did not converge"
    try:
        got = brent_root(f, a, b, xtol=xtol, rtol=4 * EPS)
    except FitError:
        got = "did not converge"
    return got, ref


def test_random_polynomials_give_the_same_root_bit_for_bit():
    # source: scipy.optimize.brentq on random polynomials of degree 1-7 and random brackets
    rng = np.random.default_rng(0)
    checked = 0
    for k in range(1500):
        c = rng.normal(size=int(rng.integers(2, 9)))
        f = lambda v, c=c: float(np.polynomial.polynomial.polyval(v, c))  # noqa: E731
        a, b = sorted(rng.uniform(-3, 3, 2))
        if f(a) * f(b) >= 0:
            continue
        xtol = (2e-12, 1e-15 * max(abs(a), abs(b)), 1e-300)[k % 3]
        got, ref = _both(f, a, b, xtol)
        assert got == ref, (c, a, b, xtol)
        checked += 1
    assert checked > 400


@pytest.mark.parametrize(
    "f, a, b",
    [
        (lambda v: math.exp(v) - 2, 0.0, 2.0),
        (lambda v: v**3, -1.0, 2.0),  # a triple root: bisection does most of the work
        (lambda v: math.tan(v) - 1, 0.0, 1.5),
        (lambda v: (v - 1e-8) * 1e10, -1.0, 1.0),
        (lambda v: 1.0 if v > 0.3 else -1.0, 0.0, 1.0),  # a jump, not a root
        (lambda v: math.atan(v - 5), -1e6, 30.0),
        (lambda v: -0.0 if v < 0.5 else v, 0.0, 1.0),  # a signed zero at an end
    ],
)
def test_awkward_functions_give_the_same_outcome(f, a, b):
    # source: scipy.optimize.brentq, including a search that needs more than 100 steps (both give up)
    got, ref = _both(f, a, b, 1e-15)
    assert got == ref


def test_an_interval_that_does_not_bracket_a_root_is_refused():
    with pytest.raises(FitError, match="do not bracket"):
        brent_root(lambda v: v * v + 1, -1.0, 1.0)
    with pytest.raises(FitError, match="not a number"):
        brent_root(lambda v: math.nan if v > 0.2 else -1.0, 0.0, 1.0)
