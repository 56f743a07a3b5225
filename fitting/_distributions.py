"""Student t and F distribution functions, from the regularised incomplete beta function.

The engine needs a handful of values per call: interval quantiles of Student's t, p-values of
F tests and the F quantiles behind two thresholds. scipy.special has them, but importing it
costs about a fifth of a second at start-up (it loads scipy's array-API layer), more than a
small command line run spends on everything else; so they are computed here, in plain
Python floats, and the tests hold them to scipy.special (``stdtrit``, ``fdtrc``, ``fdtri``).

Method (formulas from memory, checked in tests/test_distributions.py against scipy.special)
------------------------------------------------------------------------------------------
* I_x(a, b), the regularised incomplete beta function, by its continued fraction (Abramowitz
  and Stegun 26.5.8), evaluated with the modified Lentz method, on the side where it converges
  fast (x < (a + 1)/(a + b + 2); otherwise I_x(a, b) = 1 − I_{1−x}(b, a)). Both tails are kept,
  each computed directly where it is the small one, so a tiny p-value keeps its digits.
* The factor x^a (1 − x)^b / B(a, b) in front of the fraction: for a, b >= 10 in the form of
  DiDonato and Morris (ACM TOMS 708, 1992), exp(−(a·φ(−λ/a) + b·φ(λ/b))) · sqrt(ab / (2π(a + b)))
  with φ(t) = t − ln(1 + t) and λ = a − (a + b)x, and the Stirling series corrections of
  ln Γ (Abramowitz and Stegun 6.1.41), so that large degrees of freedom lose no digits to
  cancelling logarithms; with one small parameter, Γ(a + b)/Γ(a) by the same series; with
  both small, math.lgamma.
* The inverse: a start from Abramowitz and Stegun 26.5.22 (or a power law when a or b < 1),
  then Halley steps kept inside a shrinking bracket (bisection when a step leaves it), on the
  variable (x or 1 − x) that is small at the answer.

t with ν degrees of freedom: P(|T| > t) = I_{ν/(ν + t²)}(ν/2, 1/2).
F with (d1, d2): P(F > f) = I_{d2/(d2 + d1 f)}(d2/2, d1/2).
"""

from __future__ import annotations

import math

__all__ = [
    "t_upper_quantile",
    "t_two_sided_quantile",
    "f_upper_tail",
    "f_quantile",
    "incomplete_beta",
    "incomplete_beta_inverse",
]

_EPS = 2.220446049250313e-16
_TINY = 1e-300
_HALF_LOG_2PI = 0.5 * math.log(2.0 * math.pi)
_STIRLING_FROM = 10.0
# Stirling series of ln Γ(z) − ((z − 1/2) ln z − z + ln(2π)/2): B_2k / (2k (2k − 1) z^(2k − 1)), k = 1..8
_STIRLING = (1 / 12, -1 / 360, 1 / 1260, -1 / 1680, 1 / 1188, -691 / 360360, 1 / 156, -3617 / 122400)
_CF_MAX = 100_000


def _stirling_delta(z: float) -> float:
    """ln Γ(z) − ((z − 1/2) ln z − z + ln(2π)/2), for z >= 10 (error below 1e-17 there)."""
    zz = 1.0 / (z * z)
    acc = 0.0
    for c in reversed(_STIRLING):
        acc = acc * zz + c
    return acc / z


def _phi(t: float, one_plus_t: float) -> float:
    """t − ln(1 + t) for t > −1, without cancellation for small t; ``one_plus_t`` is 1 + t as a ratio."""
    if abs(t) >= 0.5:
        return t - math.log(one_plus_t)
    r = t / (2.0 + t)  # ln(1 + t) = 2 atanh(r), and t − 2r = t² / (2 + t)
    r2 = r * r
    term, acc, k = r * r2, 0.0, 3
    while True:
        add = term / k
        acc += add
        if abs(add) <= 1e-17 * abs(acc):
            break
        term *= r2
        k += 2
    return t * t / (2.0 + t) - 2.0 * acc


def _front(a: float, b: float, x: float, y: float) -> float:
    """x^a y^b / B(a, b), with y = 1 − x given separately (no digits lost when x is near 1)."""
    if a >= _STIRLING_FROM and b >= _STIRLING_FROM:
        s = a + b
        lam = (s * y - b) if a > b else (a - s * x)
        e = a * _phi(-lam / a, x * s / a) + b * _phi(lam / b, y * s / b)
        corr = _stirling_delta(a) + _stirling_delta(b) - _stirling_delta(s)
        return math.sqrt(a * b / s) * math.exp(-e - corr - _HALF_LOG_2PI)
    if a >= _STIRLING_FROM or b >= _STIRLING_FROM:
        big, small, xb, ys = (a, b, x, y) if a >= b else (b, a, y, x)
        # ln Γ(big + small) − ln Γ(big) = small·ln(big) + (big + small − 1/2)·ln(1 + small/big) − small + δ
        log_xb = math.log1p(-ys) if ys < 0.5 else math.log(xb)
        e = big * log_xb + small * math.log(big * ys) + ((big + small - 0.5) * math.log1p(small / big) - small)
        e += _stirling_delta(big + small) - _stirling_delta(big) - math.lgamma(small)
        return math.exp(e)
    log_x = math.log1p(-y) if y < 0.5 else math.log(x)
    log_y = math.log1p(-x) if x < 0.5 else math.log(y)
    return math.exp(a * log_x + b * log_y - (math.lgamma(a) + math.lgamma(b) - math.lgamma(a + b)))


def _fraction(a: float, b: float, x: float, y: float) -> float:
    """The continued fraction of I_x(a, b) (modified Lentz); converges fast for x < (a + 1)/(a + b + 2)."""
    qab, qap, qam = a + b, a + 1.0, a - 1.0
    c = 1.0
    d = (1.0 - b + qab * y) / qap if x > 0.5 else 1.0 - qab * x / qap  # 1 − (a + b)x/(a + 1), no cancellation
    d = 1.0 / (d if abs(d) >= _TINY else _TINY)
    h = d
    for m in range(1, _CF_MAX):
        m2 = 2 * m
        for num in (m * (b - m) * x / ((qam + m2) * (a + m2)), -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2))):
            d = 1.0 + num * d
            d = 1.0 / (d if abs(d) >= _TINY else _TINY)
            c = 1.0 + num / c
            c = c if abs(c) >= _TINY else _TINY
            step = d * c
            h *= step
        if abs(step - 1.0) <= _EPS:
            break
    return h


def incomplete_beta(a: float, b: float, x: float, y: float | None = None) -> tuple[float, float]:
    """(I_x(a, b), 1 − I_x(a, b)), each computed directly where it is the smaller; ``y`` = 1 − x if known better."""
    a, b, x = float(a), float(b), float(x)
    y = 1.0 - x if y is None else float(y)
    if x <= 0.0:
        return 0.0, 1.0
    if y <= 0.0:
        return 1.0, 0.0
    if x < (a + 1.0) / (a + b + 2.0):
        low = _front(a, b, x, y) * _fraction(a, b, x, y) / a
        return low, 1.0 - low
    high = _front(b, a, y, x) * _fraction(b, a, y, x) / b
    return 1.0 - high, high


def _start(a: float, b: float, p: float, q: float) -> float:
    """A first x with I_x(a, b) near p (Abramowitz and Stegun 26.5.22; a power law when a or b < 1)."""
    if a >= 1.0 and b >= 1.0:
        pp = min(p, q)
        t = math.sqrt(-2.0 * math.log(pp))
        z = t - (2.30753 + 0.27061 * t) / (1.0 + t * (0.99229 + t * 0.04481))  # normal deviate of the tail pp
        z = z if p < 0.5 else -z
        al = (z * z - 3.0) / 6.0
        h = 2.0 / (1.0 / (2.0 * a - 1.0) + 1.0 / (2.0 * b - 1.0))
        skew = 1.0 / (2.0 * b - 1.0) - 1.0 / (2.0 * a - 1.0)
        w = z * math.sqrt(al + h) / h - skew * (al + 5.0 / 6.0 - 2.0 / (3.0 * h))
        return a / (a + b * math.exp(min(2.0 * w, 700.0)))
    lna, lnb = math.log(a / (a + b)), math.log(b / (a + b))
    t, u = math.exp(a * lna) / a, math.exp(b * lnb) / b
    w = t + u
    if p < t / w:
        return (a * w * p) ** (1.0 / a)
    return 1.0 - (b * w * q) ** (1.0 / b)


def _solve_small(a: float, b: float, p: float, q: float, z: float) -> float:
    """z in (0, 1) with I_z(a, b) = p (1 − p = q), by Halley steps inside a bracket; z starts as a guess."""
    lo, hi = 0.0, 1.0
    for _ in range(200):
        low, high = incomplete_beta(a, b, z, 1.0 - z)
        g = (low - p) if p <= q else (q - high)  # I_z − p, from the tail that holds the digits
        if g == 0.0:
            return z
        if g > 0.0:
            hi = z
        else:
            lo = z
        zc = 1.0 - z
        dens = _front(a, b, z, zc) / (z * zc)
        step = g / dens if dens > 0.0 else math.inf
        if math.isfinite(step):
            curv = (a - 1.0) / z - (b - 1.0) / zc  # f′/f of the density: Halley's correction
            step = step / (1.0 - 0.5 * max(-1.0, min(1.0, step * curv)))
        new = z - step
        if not (lo < new < hi) or not math.isfinite(new):
            new = 0.5 * (lo + hi) if lo > 0.0 or hi < 1e-3 else math.sqrt(max(lo, _TINY) * hi)
        if abs(new - z) <= 2.0 * _EPS * new or hi - lo <= 2.0 * _EPS * hi:
            return new
        z = new
    return z


def incomplete_beta_inverse(a: float, b: float, p: float, q: float | None = None) -> tuple[float, float]:
    """(x, 1 − x) with I_x(a, b) = p; ``q`` = 1 − p if known more precisely (a small upper tail)."""
    a, b, p = float(a), float(b), float(p)
    q = 1.0 - p if q is None else float(q)
    if p <= 0.0:
        return 0.0, 1.0
    if q <= 0.0:
        return 1.0, 0.0
    x0 = _start(a, b, p, q)
    if not 0.0 < x0 < 1.0 or not math.isfinite(x0):
        x0 = a / (a + b)
    if x0 <= 0.5:
        x = _solve_small(a, b, p, q, x0)
        return x, 1.0 - x
    y = _solve_small(b, a, q, p, 1.0 - x0)  # I_y(b, a) = 1 − I_x(a, b) = q
    return 1.0 - y, y


def t_upper_quantile(tail: float, dof: float) -> float:
    """t with P(T > t) = ``tail`` for Student's t on ``dof`` degrees of freedom (0 < tail < 1)."""
    tail, dof = float(tail), float(dof)
    if not (0.0 < tail < 1.0) or not dof > 0.0 or math.isnan(dof):
        return math.nan
    if tail > 0.5:
        return -t_upper_quantile(1.0 - tail, dof)
    if tail == 0.5:
        return 0.0
    x, y = incomplete_beta_inverse(0.5 * dof, 0.5, 2.0 * tail, 1.0 - 2.0 * tail)  # P(|T| > t) = 2·tail
    return math.sqrt(dof * y / x) if x > 0.0 else math.inf


def t_two_sided_quantile(level: float, dof: float) -> float:
    """The t with P(|T| <= t) = ``level``: the multiplier of a central interval.

    The upper tail is formed as 1 − (1/2 + level/2) (an exact subtraction), the tail of the
    quantile 1/2 + level/2 that the engine asked scipy.special.stdtrit for before.
    """
    return t_upper_quantile(1.0 - (0.5 + float(level) / 2.0), dof)


def f_upper_tail(f: float, d1: float, d2: float) -> float:
    """P(F > f) for F(d1, d2); NaN for NaN input or a degree of freedom that is not positive."""
    f, d1, d2 = float(f), float(d1), float(d2)
    if math.isnan(f) or not (d1 > 0.0 and d2 > 0.0):
        return math.nan
    if f <= 0.0:
        return 1.0
    if math.isinf(f):
        return 0.0
    den = d2 + d1 * f
    return incomplete_beta(0.5 * d2, 0.5 * d1, d2 / den, d1 * f / den)[0]


def f_quantile(p: float, d1: float, d2: float) -> float:
    """f with P(F <= f) = p for F(d1, d2)."""
    p, d1, d2 = float(p), float(d1), float(d2)
    if not (0.0 < p < 1.0) or not (d1 > 0.0 and d2 > 0.0):
        return math.nan
    w, wc = incomplete_beta_inverse(0.5 * d1, 0.5 * d2, p, 1.0 - p)  # w = d1 f / (d1 f + d2)
    return (d2 * w) / (d1 * wc) if wc > 0.0 else math.inf
