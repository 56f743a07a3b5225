"""Student t and F functions computed without scipy (fitting/_distributions.py), against scipy.special.

Reference: scipy.special (stdtrit, fdtrc, fdtri, betainc, betaincc, betaincinv), named beside each
check. Where the two disagree by more than rounding the test says which is right: a 60-digit
evaluation of the same continued fraction with Python's decimal module (exact arithmetic on the
double inputs), written out in ``_hi_t_tail`` below.
"""

from __future__ import annotations

import math
from decimal import Decimal, getcontext

import numpy as np
import pytest
from scipy import special

from fitting._distributions import (
    f_quantile,
    f_upper_tail,
    incomplete_beta,
    incomplete_beta_inverse,
    t_two_sided_quantile,
    t_upper_quantile,
)
from fitting._linalg import t_quantile

MODERATE = [1, 2, 3, 4, 5, 7, 10, 19, 20, 21, 30, 50, 99, 100, 333, 1000]


@pytest.mark.parametrize("dof", MODERATE)
@pytest.mark.parametrize("level", [0.5, 0.68, 0.9, 0.95, 0.99, 0.999, 1 - 1e-6])
def test_two_sided_t_quantile_matches_scipy_stdtrit(dof, level):
    # source: scipy.special.stdtrit(dof, 0.5 + level / 2), what the engine called before
    ref = float(special.stdtrit(dof, 0.5 + level / 2))
    assert t_two_sided_quantile(level, dof) == pytest.approx(ref, rel=2e-13)
    assert t_quantile(level, dof) == t_two_sided_quantile(level, dof)


@pytest.mark.parametrize("dof", MODERATE)
@pytest.mark.parametrize("tail", [0.4, 0.25, 0.025, 1e-3, 1e-5, 1e-8, 1e-12, 0.6, 0.975])
def test_upper_t_quantile_matches_scipy_stdtrit(dof, tail):
    # source: scipy.special.stdtrit(dof, tail) is the lower quantile; t is symmetric
    assert t_upper_quantile(tail, dof) == pytest.approx(-float(special.stdtrit(dof, tail)), rel=1e-12)


@pytest.mark.parametrize("dof", [1e4, 1e5, 1e6, 1e7])
def test_large_degrees_of_freedom_stay_close_to_scipy(dof):
    # source: scipy.special.stdtrit; the continued fraction loses about one digit per tenfold beyond 1e4
    # degrees of freedom (module docstring), so the tolerance widens with them
    for level in (0.9, 0.95, 0.99):
        assert t_two_sided_quantile(level, dof) == pytest.approx(float(special.stdtrit(dof, 0.5 + level / 2)), rel=1e-9)


def test_cauchy_quantile_is_exact_where_it_is_known():
    # source: with 1 degree of freedom t is Cauchy: the upper quantile of tail q is 1 / tan(pi q) (closed form)
    for q in (0.25, 0.1, 1e-3, 1e-9, 1e-12):
        assert t_upper_quantile(q, 1) == pytest.approx(1.0 / math.tan(math.pi * q), rel=1e-13)


def _hi_t_tail(t: float, dof: int) -> Decimal:
    """P(T > t) = I_x(dof/2, 1/2) / 2 with x = dof / (dof + t²), to about 50 digits (checking only)."""
    getcontext().prec = 60
    nu, tt = Decimal(dof), Decimal(t)
    x, y = nu / (nu + tt * tt), tt * tt / (nu + tt * tt)
    a, b = nu / 2, Decimal("0.5")
    if x < (a + 1) / (a + b + 2):
        return _hi_fraction(a, b, x, y) / 2
    return (1 - _hi_fraction(b, a, y, x)) / 2


def _hi_fraction(a: Decimal, b: Decimal, x: Decimal, y: Decimal) -> Decimal:
    """I_x(a, b) by the continued fraction of Abramowitz and Stegun 26.5.8, in decimals (x below the switch point)."""
    lnb = _ln_gamma_half(a) + _ln_gamma_half(b) - _ln_gamma_half(a + b)
    front = (a * x.ln() + b * y.ln() - lnb).exp()
    c, d = Decimal(1), 1 / (1 - (a + b) * x / (a + 1))
    h = d
    for m in range(1, 5000):
        even = m * (b - m) * x / ((a - 1 + 2 * m) * (a + 2 * m))
        odd = -(a + m) * (a + b + m) * x / ((a + 2 * m) * (a + 1 + 2 * m))
        for num in (even, odd):
            d = 1 / (1 + num * d)
            c = 1 + num / c
            h *= d * c
        if abs(d * c - 1) < Decimal("1e-55"):
            break
    return front * h / a


def _ln_gamma_half(z: Decimal) -> Decimal:
    """ln Γ(z) for z a positive multiple of 1/2, by the recurrence down to Γ(1) = 1 or Γ(1/2) = sqrt(pi)."""
    pi = Decimal("3.14159265358979323846264338327950288419716939937510582097494459")
    acc, v = Decimal(0), z
    while v > 1:
        v -= 1
        acc += v.ln()
    return acc + (pi.sqrt().ln() if v == Decimal("0.5") else Decimal(0))


def test_where_scipy_and_the_engine_differ_the_engine_is_the_more_accurate():
    # source: a 60-digit decimal evaluation (_hi_t_tail); scipy.special.stdtrit(4, 0.505) lands about 7.6e-15
    # off in the tail it inverts (observed), the engine within rounding of it
    tail = 1.0 - (0.5 + 0.01 / 2)
    ours, ref = t_two_sided_quantile(0.01, 4), float(special.stdtrit(4, 0.505))
    err_ours = abs(float((_hi_t_tail(ours, 4) - Decimal(tail)) / Decimal(tail)))
    err_ref = abs(float((_hi_t_tail(ref, 4) - Decimal(tail)) / Decimal(tail)))
    assert err_ours < 1e-16 and err_ours <= err_ref


@pytest.mark.parametrize("d1", [1, 2, 3, 5, 10, 20, 50, 1000])
@pytest.mark.parametrize("d2", [1, 2, 3, 5, 8, 25, 100, 1000])
def test_f_upper_tail_matches_scipy_fdtrc(d1, d2):
    # source: scipy.special.fdtrc(d1, d2, f), the F survival function; tiny tails keep their digits
    for f in (1e-6, 0.01, 0.3, 0.9, 1.0, 1.5, 3.0, 7.0, 30.0, 300.0, 1e4, 1e8):
        assert f_upper_tail(f, d1, d2) == pytest.approx(float(special.fdtrc(d1, d2, f)), rel=5e-13, abs=1e-300)
    assert f_upper_tail(0.0, d1, d2) == 1.0 and f_upper_tail(math.inf, d1, d2) == 0.0
    assert math.isnan(f_upper_tail(math.nan, d1, d2)) and math.isnan(f_upper_tail(1.0, 0, d2))


@pytest.mark.parametrize("d1", [1, 2, 3, 5, 10, 20, 50, 1000])
@pytest.mark.parametrize("d2", [1, 2, 3, 5, 8, 25, 100, 1000])
def test_f_quantile_matches_scipy_fdtri(d1, d2):
    # source: scipy.special.fdtri(d1, d2, p), the inverse of the F distribution function
    for p in (1e-6, 0.01, 0.1, 0.5, 0.9, 0.99, 0.999999):
        assert f_quantile(p, d1, d2) == pytest.approx(float(special.fdtri(d1, d2, p)), rel=1e-12)


def test_incomplete_beta_and_its_inverse_match_scipy():
    # source: scipy.special.betainc, betaincc and betaincinv on random parameters from 0.1 to 10^4
    rng = np.random.default_rng(11)
    for _ in range(400):
        a, b = 10 ** rng.uniform(-1, 4, 2)
        x, p = rng.uniform(), rng.uniform()
        low, high = incomplete_beta(a, b, x)
        assert low == pytest.approx(float(special.betainc(a, b, x)), rel=1e-12, abs=1e-300)
        assert high == pytest.approx(float(special.betaincc(a, b, x)), rel=1e-12, abs=1e-300)
        assert incomplete_beta_inverse(a, b, p)[0] == pytest.approx(float(special.betaincinv(a, b, p)), rel=1e-12)


def test_quantiles_refuse_what_has_no_answer():
    assert math.isnan(t_upper_quantile(0.0, 5)) and math.isnan(t_upper_quantile(0.3, 0))
    assert t_upper_quantile(0.5, 3) == 0.0
    assert math.isnan(f_quantile(1.0, 2, 3)) and math.isnan(f_quantile(0.5, -1, 3))
