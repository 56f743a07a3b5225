"""Helpers for reference checks: the NIST StRD file parser, LRE scoring, and an
exact rational least-squares solver used as a reference for home-made hard cases.

Source of the file layout and of the LRE definition: NIST Statistical Reference
Datasets, Linear Least Squares Regression
(https://www.itl.nist.gov/div898/strd/lls/lls.shtml); see tests/data/nist_strd/SOURCES.md.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from decimal import Decimal
from fractions import Fraction
from pathlib import Path

import numpy as np

DATA_DIR = Path(__file__).parent / "data" / "nist_strd"
POLYNOMIAL_SETS = ("Norris", "Pontius", "Wampler1", "Wampler2", "Filip")
LRE_CAP = 15.0  # NIST prints 15 significant digits (SOURCES.md)


@dataclass(frozen=True)
class Certified:
    name: str
    x: np.ndarray
    y: np.ndarray
    x_text: tuple[str, ...]
    y_text: tuple[str, ...]
    degree: int
    through_origin: bool
    coefficients: dict[int, Decimal]  # power k -> certified estimate
    standard_errors: dict[int, Decimal]
    residual_sd: Decimal
    r_squared: Decimal


def load(name: str) -> Certified:
    """Parse one NIST StRD .dat file (certified values and data rows; columns y then x)."""
    text = (DATA_DIR / f"{name}.dat").read_text()
    lines = text.splitlines()
    m = re.search(r"Data\s+\(lines\s+(\d+)\s+to\s+(\d+)\)", text)
    if m is None:
        raise ValueError(f"{name}: no 'Data (lines a to b)' header")
    first, last = int(m.group(1)), int(m.group(2))
    rows = [ln.split() for ln in lines[first - 1 : last]]
    if any(len(r) != 2 for r in rows):
        raise ValueError(f"{name}: expected two columns (y, x) on every data line")
    coef: dict[int, Decimal] = {}
    se: dict[int, Decimal] = {}
    for ln in lines[:first]:
        mm = re.match(r"\s+B(\d+)\s+(\S+)\s+(\S+)\s*$", ln)
        if mm:
            coef[int(mm.group(1))] = Decimal(mm.group(2))
            se[int(mm.group(1))] = Decimal(mm.group(3))
    sd = re.search(r"Residual\s+Standard Deviation\s+(\S+)", text)
    r2 = re.search(r"R-Squared\s+(\S+)", text)
    if not coef or sd is None or r2 is None:
        raise ValueError(f"{name}: certified values not found")
    through_origin = 0 not in coef
    return Certified(
        name=name,
        x=np.array([float(r[1]) for r in rows]),
        y=np.array([float(r[0]) for r in rows]),
        x_text=tuple(r[1] for r in rows),
        y_text=tuple(r[0] for r in rows),
        degree=max(coef),
        through_origin=through_origin,
        coefficients=coef,
        standard_errors=se,
        residual_sd=Decimal(sd.group(1)),
        r_squared=Decimal(r2.group(1)),
    )


def lre(estimate, certified) -> float:
    """Log relative error as SOURCES.md defines it, capped at 15 digits.

    -log10(|estimate - certified| / |certified|); where the certified value is
    zero, -log10(|estimate|). The estimate is taken exactly as the double it is.
    """
    est = Decimal(float(estimate))
    cert = Decimal(certified) if not isinstance(certified, Decimal) else certified
    if not est.is_finite():
        return 0.0
    err = abs(est) if cert == 0 else abs(est - cert) / abs(cert)
    if err == 0:
        return LRE_CAP
    return max(0.0, min(LRE_CAP, float(-err.log10())))


# ----------------------------------------------------------------------------
# exact rational least squares (reference for home-made cases)


@dataclass(frozen=True)
class ExactFit:
    coefficients: list[Fraction]  # power basis, constant first (0 for through-origin)
    inverse_gram: list[list[Fraction]]
    rss: Fraction
    tss: Fraction  # centred, or uncentred through the origin
    dof: int

    def as_float(self):
        """(coefficients, standard errors, residual sd, R²) as floats, from exact values."""
        import math

        s2 = self.rss / self.dof if self.dof > 0 else Fraction(0)
        k0 = len(self.coefficients) - len(self.inverse_gram)
        se = [0.0] * k0 + [math.sqrt(float(self.inverse_gram[i][i] * s2)) for i in range(len(self.inverse_gram))]
        return (
            [float(c) for c in self.coefficients],
            se,
            _sqrt_fraction(s2),
            float(1 - self.rss / self.tss) if self.tss else float("nan"),
        )


def _sqrt_fraction(q: Fraction) -> float:
    """sqrt of a Fraction rounded once (via Decimal at 60 digits)."""
    import decimal

    ctx = decimal.Context(prec=60)
    return float(ctx.divide(Decimal(q.numerator), Decimal(q.denominator)).sqrt(ctx))


def exact_least_squares(x, y, degree: int, *, weights=None, through_origin: bool = False) -> ExactFit:
    """Weighted least squares in exact rationals by the normal equations.

    Inputs are taken as the exact binary values of the doubles given (or as
    Fractions/ints/decimal strings given directly), so this is the true least-squares
    solution for the data the engine sees. Normal equations are fine in exact arithmetic.
    """
    xs = [Fraction(v) if isinstance(v, (int, str, Fraction)) else Fraction(float(v)) for v in x]
    ys = [Fraction(v) if isinstance(v, (int, str, Fraction)) else Fraction(float(v)) for v in y]
    ws = (
        [Fraction(1)] * len(xs)
        if weights is None
        else [Fraction(v) if isinstance(v, (int, str, Fraction)) else Fraction(float(v)) for v in weights]
    )
    powers = list(range(1 if through_origin else 0, degree + 1))
    p = len(powers)
    # power sums S_k = sum w x^k, and b_k = sum w x^k y
    maxk = 2 * degree
    s = [Fraction(0)] * (maxk + 1)
    b = [Fraction(0)] * (degree + 1)
    for xi, yi, wi in zip(xs, ys, ws, strict=False):
        v = wi
        for k in range(maxk + 1):
            s[k] += v
            if k <= degree:
                b[k] += v * yi
            v *= xi
    g = [[s[i + j] for j in powers] for i in powers]
    rhs = [b[i] for i in powers]
    inv = _inverse(g)
    c = [sum(inv[i][j] * rhs[j] for j in range(p)) for i in range(p)]
    coef = ([Fraction(0)] if through_origin else []) + c
    rss = Fraction(0)
    for xi, yi, wi in zip(xs, ys, ws, strict=False):
        f = Fraction(0)
        for ck in reversed(coef):
            f = f * xi + ck
        rss += wi * (yi - f) ** 2
    wsum = sum(ws)
    if through_origin:
        tss = sum(wi * yi * yi for yi, wi in zip(ys, ws, strict=False))
    else:
        ybar = sum(wi * yi for yi, wi in zip(ys, ws, strict=False)) / wsum
        tss = sum(wi * (yi - ybar) ** 2 for yi, wi in zip(ys, ws, strict=False))
    return ExactFit(coefficients=coef, inverse_gram=inv, rss=rss, tss=tss, dof=len(xs) - p)


def _inverse(g: list[list[Fraction]]) -> list[list[Fraction]]:
    n = len(g)
    m = [row[:] + [Fraction(int(i == j)) for j in range(n)] for i, row in enumerate(g)]
    for c in range(n):
        piv = next(r for r in range(c, n) if m[r][c] != 0)
        m[c], m[piv] = m[piv], m[c]
        pv = m[c][c]
        m[c] = [v / pv for v in m[c]]
        for r in range(n):
            if r != c and m[r][c] != 0:
                f = m[r][c]
                m[r] = [a - f * bb for a, bb in zip(m[r], m[c], strict=False)]
    return [row[n:] for row in m]


def lre_float(estimate: float, reference: float | Fraction) -> float:
    """LRE against a reference value (a float rounded once from exact, or a Fraction)."""
    ref = (
        Decimal(reference.numerator) / Decimal(reference.denominator)
        if isinstance(reference, Fraction)
        else Decimal(float(reference))
    )
    return lre(estimate, ref)
