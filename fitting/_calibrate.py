"""Calibration: reading unknowns back through a fitted curve, back-calculated standards, weighting choice.

Three jobs, each returning a frozen result with ``to_dict()`` (NaN becomes ``None``):

    read_back(fit, y0, *, readings=1, level=0.95, weighting=None) -> ReadBack
    back_calculate(fit, x, y, *, tolerance=15.0, lowest_tolerance=20.0, lines=None, ...) -> BackCalculation
    compare_weightings(x, y, degree, *, rules=(...), through_origin=False) -> WeightingComparison
    monotonic_ranges(fit) -> CurveShape

How a reading is read back (inverse prediction)
-----------------------------------------------
* Roots are searched only inside the calibrated x range (``fit.domain``). The slope f′ is
  a polynomial: the real roots of its Chebyshev series (numpy's companion-matrix
  ``chebroots``), together with a uniform scan of 64·(d + 1) points, give every point where
  f′ may change sign; each sign change is polished with Brent's method (``_roots.brent_root``,
  the iterates of scipy.optimize.brentq). Between two such turning points f is monotonic, so
  it crosses y0 at most once there and the bracketed root finder finds that crossing: no
  crossing of y0 depends on a scan being fine enough. (Only two turning points closer together
  than the scan spacing, whose companion-matrix roots also came out complex, could go unseen.)
  Two or more roots, or none, are said in words, never silently.
* Interval: the calibration interval of the NIST/SEMATECH e-Handbook of Statistical
  Methods, section 4.5.2.1: the x whose prediction interval for a new reading (the mean of
  k readings) contains y0, i.e. |ŷ(x) − y0| ≤ t·sp(x) with
  sp(x)² = s²/(k·w(x)) + se_fit(x)², t the two-sided Student quantile on the fit's residual
  degrees of freedom. Each end is the first crossing of |ŷ(x) − y0| = t·sp(x) met when
  walking out from x0 over a grid of 2001 points (bracket, then Brent's method). An end that is not
  reached inside the range is reported as unbounded (``None``) with a sentence. Where the
  set is not one piece (a curve that turns), the piece holding x0 is given. A point where the
  weight is undefined counts as outside the interval.
* Back-calculated standards (``back_calculate``) are read back inside the range; a standard at
  an end whose response falls just beyond the curve is read back in a margin beyond that end
  (as wide as the larger tolerance) with a note, so it is judged by its error, not failed.
* Standard uncertainty by the delta method (EURACHEM/CITAC guide "Quantifying Uncertainty in
  Analytical Measurement", appendix E.3; remembered, and checked in the tests against
  statsmodels' covariance): u(x0)² = (s²/(k·w(x0)) + se_fit(x0)²) / f′(x0)², where
  se_fit(x0)² = gᵀ·Cov(β)·g carries the intercept–slope covariance.
* w(x) is the weight a named rule gives at a new x (``_weighting.weight_at``); a fit made
  with a weights column cannot give it, and its intervals assume weight 1 there (said in
  the warnings).

These results support, and do not replace, the judgement of a qualified analyst: where a
calibration serves safety, health or legal measurement, local codes and licensed practice
decide what is acceptable.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ._errors import FitError
from ._polyfit import PolynomialFit, fit_polynomial, t_quantile
from ._roots import brent_root
from ._weighting import COLUMN_RULE, WEIGHTINGS, check_weighting, weight_at, weights_for

__all__ = [
    "CALIBRATION_CAUTION",
    "BackCalculatedStandard",
    "BackCalculation",
    "BackCalculationSummary",
    "CurveShape",
    "ReadBack",
    "ReadBackRow",
    "WeightingComparison",
    "WeightingComparisonRow",
    "back_calculate",
    "compare_weightings",
    "monotonic_ranges",
    "read_back",
]

CALIBRATION_CAUTION = (
    "These figures support, and do not replace, a qualified analyst's judgement: where a calibration serves "
    "safety, health or legal measurement, follow local codes and licensed practice."
)

_GRID_POINTS = 2001  # grid for walking out to the interval ends
_SCAN_PER_COEF = 64  # slope samples per coefficient when looking for turning points
_EPS = float(np.finfo(float).eps)


def _num(v) -> float | None:
    if v is None:
        return None
    v = float(v)
    return v if math.isfinite(v) else None


def _fmt(v: float) -> str:
    return f"{float(v):.6g}"


def _rule_of(fit: PolynomialFit, override: str | None = None) -> str:
    """The fit's weighting rule: its ``weighting`` field, else "column" for a weighted fit, else "none"."""
    rule = getattr(fit, "weighting", None) or (COLUMN_RULE if getattr(fit, "weighted", False) else "none")
    if override is None:
        return rule
    wanted = check_weighting(override)
    if rule not in (COLUMN_RULE, wanted):
        raise FitError(
            f"The fit was made with weighting {rule}, so its intervals cannot use weighting {wanted}; "
            "fit again with the weighting you want."
        )
    return wanted


# ----------------------------------------------------------------------------
# the curve's shape: slope and turning points


def _t_series(fit: PolynomialFit) -> np.ndarray:
    """Chebyshev coefficients of f in t = (x − offset)/scale (through the origin: times x/scale)."""
    from numpy.polynomial import chebyshev as _cheb  # here: the sweep never needs it

    c = np.asarray(fit.basis_coefficients, dtype=float)
    if fit.through_origin:
        c = _cheb.chebmul(c, [fit.offset / fit.scale, 1.0])
    return c


def _slope(fit: PolynomialFit, x) -> np.ndarray:
    """f′(x) from the Chebyshev series (chain rule dt/dx = 1/scale)."""
    from numpy.polynomial import chebyshev as _cheb  # here: the sweep never needs it

    c = _t_series(fit)
    d = _cheb.chebder(c) if c.size > 1 else np.zeros(1)
    t = (np.asarray(x, dtype=float) - fit.offset) / fit.scale
    return _cheb.chebval(t, d) / fit.scale


def _turning_points(fit: PolynomialFit, span: tuple[float, float] | None = None) -> np.ndarray:
    """Interior x of ``span`` (default: the calibrated range) where f′ changes sign, sorted, polished by Brent."""
    from numpy.polynomial import chebyshev as _cheb  # here: the sweep never needs it

    c = _t_series(fit)
    if c.size <= 2:
        return np.empty(0)
    lo, hi = fit.domain if span is None else span
    cand = _cheb.chebroots(_cheb.chebder(c))
    real = fit.offset + fit.scale * cand[np.abs(cand.imag) <= 1e-6].real
    real = real[(real > lo) & (real < hi)]
    grid = np.linspace(lo, hi, _SCAN_PER_COEF * c.size + 1)
    # samples just either side of each candidate, so a sign change there is seen
    pad = 1e-7 * (hi - lo)
    pts = np.unique(np.concatenate([grid, real - pad, real + pad]))
    pts = pts[(pts >= lo) & (pts <= hi)]
    s = np.sign(_slope(fit, pts))
    keep = s != 0
    pts, s = pts[keep], s[keep]
    out = []
    for i in np.flatnonzero(s[1:] != s[:-1]):
        a, b = float(pts[i]), float(pts[i + 1])
        out.append(brent_root(lambda v: float(_slope(fit, v)), a, b, xtol=_xtol(fit), rtol=4 * _EPS))
    return np.array(out)


def _xtol(fit: PolynomialFit) -> float:
    lo, hi = fit.domain
    return 1e-15 * max(abs(lo), abs(hi), hi - lo)


@dataclass(frozen=True)
class CurveShape:
    """Where the fitted curve rises or falls over its calibrated range."""

    domain: tuple[float, float]
    monotonic: bool
    turning_points: tuple[float, ...]
    ranges: tuple[tuple[float, float, str], ...]  # (from x, to x, "rising" | "falling" | "flat")
    warnings: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        return {
            "domain": [float(self.domain[0]), float(self.domain[1])],
            "monotonic": self.monotonic,
            "turning_points": [float(v) for v in self.turning_points],
            "ranges": [{"from": float(a), "to": float(b), "direction": d} for a, b, d in self.ranges],
            "warnings": list(self.warnings),
        }


def monotonic_ranges(fit: PolynomialFit) -> CurveShape:
    """Split the calibrated range where the slope f′ changes sign; say so in words when it does.

    A curve can serve as a calibration only where f′ keeps one sign (CALIBRATION.md section 1;
    common practice): otherwise one reading matches two values of x.
    """
    if fit.degree < 1:
        raise FitError("A degree-0 fit is a constant: it cannot be read back. Fit degree 1 or more.")
    lo, hi = (float(v) for v in fit.domain)
    tp = _turning_points(fit)
    edges = [lo, *tp.tolist(), hi]
    ranges = []
    for a, b in zip(edges[:-1], edges[1:], strict=True):
        s = float(_slope(fit, 0.5 * (a + b)))
        ranges.append((a, b, "rising" if s > 0 else "falling" if s < 0 else "flat"))
    notes = []
    if tp.size:
        where = ", ".join(f"x = {_fmt(v)}" for v in tp)
        pieces = "; ".join(f"{d} from {_fmt(a)} to {_fmt(b)}" for a, b, d in ranges)
        notes.append(
            f"The fitted curve is not monotonic: its slope changes sign at {where}, so it cannot serve as a "
            f"calibration between x = {_fmt(lo)} and x = {_fmt(hi)} as a whole (one reading can match two values "
            f"of x). It is {pieces}."
        )
    elif ranges[0][2] == "flat":
        notes.append("The fitted curve is flat (zero slope), so no reading can be read back through it.")
    return CurveShape((lo, hi), not tp.size and ranges[0][2] != "flat", tuple(tp.tolist()), tuple(ranges), tuple(notes))


# ----------------------------------------------------------------------------
# roots of f(x) = y0 inside the range


def _scalar_curve(fit: PolynomialFit):
    """f(x) for one float x, by the very operations of ``fit.predict`` (the same bits, without numpy's per-call cost).

    Clenshaw's recurrence on t = (x − offset)/scale, as ``_basis.chebyshev_values``; times x/scale through the
    origin. The root finder calls it a few dozen times per reading.
    """
    coef = [float(c) for c in np.asarray(fit.basis_coefficients, dtype=np.float64)]
    offset, scale, origin = float(fit.offset), float(fit.scale), bool(fit.through_origin)
    head, tail = coef[0], coef[:0:-1]

    def value(x: float) -> float:
        t = (x - offset) / scale
        two_t = 2 * t
        b1 = b2 = 0.0
        for ck in tail:
            b1, b2 = ck + two_t * b1 - b2, b1
        yhat = head + t * b1 - b2
        return yhat * (x / scale) if origin else yhat

    return value


def _roots(fit: PolynomialFit, y0: float, edges: list[float], curve=None) -> list[float]:
    """Every x in the range with f(x) = y0: at most one per monotonic piece between ``edges``.

    ``curve`` is ``_scalar_curve(fit)`` when the caller already has it.
    """
    f = _scalar_curve(fit) if curve is None else curve
    found: list[float] = []
    g = [f(float(e)) - y0 for e in edges]
    for i in range(len(edges) - 1):
        a, b, ga, gb = edges[i], edges[i + 1], g[i], g[i + 1]
        if ga == 0.0:
            found.append(a)
        if gb == 0.0:
            found.append(b)
        if ga * gb < 0:
            found.append(brent_root(lambda v: f(v) - y0, a, b, xtol=_xtol(fit), rtol=4 * _EPS))
    found.sort()
    tol = 1e-12 * (edges[-1] - edges[0])
    return [r for i, r in enumerate(found) if i == 0 or r - found[i - 1] > tol]


def _response_span(fit: PolynomialFit, edges: list[float]) -> tuple[float, float]:
    vals = fit.predict(np.asarray(edges))
    return float(np.min(vals)), float(np.max(vals))


# ----------------------------------------------------------------------------
# read-back of unknowns


@dataclass(frozen=True)
class ReadBackRow:
    """One reading (or the mean of ``readings`` replicate readings) read back to x."""

    y: float
    readings: int
    x: float
    x_lower: float | None
    x_upper: float | None
    u_x: float
    outside_range: bool
    roots: tuple[float, ...]
    warnings: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        return {
            "y": _num(self.y),
            "readings": self.readings,
            "x": _num(self.x),
            "x_lower": _num(self.x_lower),
            "x_upper": _num(self.x_upper),
            "u_x": _num(self.u_x),
            "outside_range": self.outside_range,
            "roots": [float(r) for r in self.roots],
            "warnings": list(self.warnings),
        }


@dataclass(frozen=True)
class ReadBack:
    """Readings read back through a fitted calibration curve, with calibration intervals."""

    level: float
    readings: int
    weighting: str
    rows: tuple[ReadBackRow, ...]
    monotonic: bool
    turning_points: tuple[float, ...]
    warnings: tuple[str, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        return {
            "level": self.level,
            "readings": self.readings,
            "weighting": self.weighting,
            "rows": [r.to_dict() for r in self.rows],
            "monotonic": self.monotonic,
            "turning_points": [float(v) for v in self.turning_points],
            "warnings": list(self.warnings),
            "caution": CALIBRATION_CAUTION,
        }


@dataclass(frozen=True)
class _Setting:
    fit: PolynomialFit
    rule: str
    k: int
    tq: float
    edges: list[float]
    grid: np.ndarray


def _reading_sd(st: _Setting, x) -> np.ndarray:
    """sp(x) = sqrt(s²/(k·w(x)) + se_fit(x)²): the SD of ŷ(x) minus the mean of k new readings at x."""
    x = np.atleast_1d(np.asarray(x, dtype=float))
    w = weight_at(st.rule, x, st.fit.predict(x))
    se = st.fit.standard_error_of_fit(x)
    return np.sqrt(st.fit.residual_sd**2 / (st.k * w) + se**2)


def _gap(st: _Setting, y0: float, x) -> np.ndarray:
    """|ŷ(x) − y0| − t·sp(x): ≤ 0 where x belongs to the calibration interval (non-finite counts as outside)."""
    x = np.atleast_1d(np.asarray(x, dtype=float))
    g = np.abs(st.fit.predict(x) - y0) - st.tq * _reading_sd(st, x)
    return np.where(np.isfinite(g), g, np.inf)


def _interval_end(st: _Setting, y0: float, x0: float, side: int) -> float | None:
    """The first x beyond x0 (side −1: below, +1: above) where |ŷ − y0| = t·sp; None if not inside the range."""
    pts = st.grid[st.grid < x0][::-1] if side < 0 else st.grid[st.grid > x0]
    if pts.size == 0:
        return None
    out = np.flatnonzero(_gap(st, y0, pts) > 0)
    if out.size == 0:
        return None
    i = int(out[0])
    inner = x0 if i == 0 else float(pts[i - 1])
    outer = float(pts[i])
    f = lambda v: float(np.clip(_gap(st, y0, v)[0], -1e300, 1e300))  # noqa: E731
    if f(inner) > 0:  # only at x0 itself, when s = 0 (an exact fit) and rounding leaves ŷ(x0) a hair off y0
        return inner
    a, b = (outer, inner) if side < 0 else (inner, outer)
    return brent_root(f, a, b, xtol=_xtol(st.fit), rtol=4 * _EPS)


def _no_single_root(st: _Setting, y0: float, roots: list[float]) -> ReadBackRow:
    lo, hi = st.edges[0], st.edges[-1]
    if roots:
        where = ", ".join(_fmt(r) for r in roots)
        msg = (
            f"The reading {_fmt(y0)} matches {len(roots)} values of x inside the calibrated range (x = {where}); "
            "it cannot be read back to one value."
        )
    else:
        ymin, ymax = _response_span(st.fit, st.edges)
        msg = (
            f"The reading {_fmt(y0)} lies outside the responses the standards cover ({_fmt(ymin)} to {_fmt(ymax)} "
            f"for x from {_fmt(lo)} to {_fmt(hi)}); it cannot be read back without extrapolating."
        )
    nan = float("nan")
    return ReadBackRow(y0, st.k, nan, None, None, nan, not roots, tuple(roots), (msg,))


def _read_one(st: _Setting, y0: float, level: float) -> ReadBackRow:
    roots = _roots(st.fit, y0, st.edges)
    if len(roots) != 1:
        return _no_single_root(st, y0, roots)
    x0 = roots[0]
    if not math.isfinite(st.tq):
        msg = "The fit has no residual degrees of freedom, so no calibration interval or uncertainty can be given."
        return ReadBackRow(y0, st.k, x0, None, None, float("nan"), False, (x0,), (msg,))
    notes: list[str] = []
    slope = float(_slope(st.fit, x0))
    u = float(_reading_sd(st, x0)[0]) / abs(slope) if slope != 0 else float("inf")
    if not math.isfinite(u):
        notes.append(
            f"The slope of the curve at x = {_fmt(x0)} is zero or the weight there is undefined, so the "
            "uncertainty of the read-back value is unbounded."
        )
    ends: list[float | None] = [None, None]
    for j, (side, name, bound) in enumerate(((-1, "lower", "below"), (1, "upper", "above"))):
        ends[j] = _interval_end(st, y0, x0, side)
        if ends[j] is None:
            edge = st.edges[0] if side < 0 else st.edges[-1]
            notes.append(
                f"The {name} end of the {_fmt(level * 100)} % calibration interval is not bounded inside the "
                f"calibrated range: it lies {bound} x = {_fmt(edge)}."
            )
    return ReadBackRow(y0, st.k, x0, ends[0], ends[1], u, False, (x0,), tuple(notes))


def _check_level(level: float) -> float:
    try:
        level = float(level)
    except (TypeError, ValueError):
        raise FitError(f"The interval level must be a number between 0 and 1 (e.g. 0.95), not {level!r}.") from None
    if not 0.0 < level < 1.0:
        raise FitError(f"The interval level must be between 0 and 1 (e.g. 0.95), not {level!r}.")
    return level


def _check_readings(readings) -> int:
    try:
        k = int(readings)
    except (TypeError, ValueError):
        k = 0
    if k < 1 or k != readings:
        raise FitError(f"The number of replicate readings must be a whole number, 1 or more, not {readings!r}.")
    return k


def read_back(
    fit: PolynomialFit, y0, *, readings: int = 1, level: float = 0.95, weighting: str | None = None
) -> ReadBack:
    """Read responses y0 (each the mean of ``readings`` replicate readings) back to x through ``fit``.

    Parameters
    ----------
    fit : PolynomialFit of degree 1 or more.
    y0 : float or array-like of float; one row per value.
    readings : int, default=1
        k, the number of replicate readings each y0 is the mean of (variance s²/(k·w)).
    level : float, default=0.95
        Two-sided level of the calibration interval.
    weighting : str, default=None
        The named rule behind a fit made with a weights column (to give w at a new x); by default
        the fit's own rule. A rule that contradicts the fit's is refused.

    Returns a ReadBack; its rows and warnings say in words when a reading matches two or more
    values of x, none (outside what the standards cover), or an interval end is unbounded.
    """
    level = _check_level(level)
    k = _check_readings(readings)
    rule = _rule_of(fit, weighting)
    ys = np.atleast_1d(np.asarray(y0, dtype=float)).ravel()
    if not np.isfinite(ys).all():
        raise FitError("Every reading must be a finite number; remove empty or non-numeric readings first.")
    shape = monotonic_ranges(fit)
    lo, hi = shape.domain
    tq = t_quantile(level, fit.dof) if fit.dof > 0 and math.isfinite(fit.residual_sd) else float("nan")
    grid = np.linspace(lo, hi, _GRID_POINTS)
    st = _Setting(fit, rule, k, tq, [lo, *shape.turning_points, hi], grid)
    notes = list(shape.warnings)
    if rule == COLUMN_RULE:
        notes.append(
            "The fit was weighted by a weights column, which cannot give the weight at a new x: the intervals "
            "assume a weight of 1 there. Fit with a named weighting to get intervals that follow it."
        )
    rows = tuple(_read_one(st, float(v), level) for v in ys)
    return ReadBack(level, k, rule, rows, shape.monotonic, shape.turning_points, tuple(notes))


# ----------------------------------------------------------------------------
# back-calculated standards

RULE_SOURCE = "FDA 2018 Bioanalytical Method Validation guidance; ICH M10"


@dataclass(frozen=True)
class BackCalculatedStandard:
    line: int | None
    x: float
    y: float
    x_back: float
    relative_error_percent: float
    within_tolerance: bool | None
    note: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "line": self.line,
            "x": _num(self.x),
            "y": _num(self.y),
            "x_back": _num(self.x_back),
            "relative_error_percent": _num(self.relative_error_percent),
            "within_tolerance": self.within_tolerance,
            "note": self.note,
        }


@dataclass(frozen=True)
class BackCalculationSummary:
    """How many standards and levels pass, against the minimums of the acceptance rule."""

    standards: int  # non-blank standards
    standards_passing: int
    share_passing_percent: float
    levels: int  # distinct non-zero x values
    levels_passing: int
    lowest_level: float
    min_share_percent: float
    min_levels: int
    share_met: bool
    levels_met: bool
    accepted: bool

    def to_dict(self) -> dict[str, Any]:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__}
        for k in ("share_passing_percent", "lowest_level", "min_share_percent"):
            d[k] = _num(d[k])
        return d


@dataclass(frozen=True)
class BackCalculation:
    rows: tuple[BackCalculatedStandard, ...]
    summary: BackCalculationSummary
    rule: str

    def to_dict(self) -> dict[str, Any]:
        return {"rows": [r.to_dict() for r in self.rows], "summary": self.summary.to_dict(), "rule": self.rule}


def _read_standard(fit: PolynomialFit, yi: float, outer: list[float]) -> tuple[float, str | None]:
    """x_back of one standard: the single root inside the range, else the single root in the tolerance margin.

    A standard at an end of the range whose response falls just beyond the curve reads back just
    outside the range; it is read back there (with a note) so that it is judged by its error rather
    than failed for lying a hair outside.
    """
    lo, hi = fit.domain
    roots = _roots(fit, yi, outer)
    inside = [r for r in roots if lo <= r <= hi]
    if len(inside) == 1:
        return inside[0], None
    if not inside and len(roots) == 1:
        return roots[
            0
        ], f"Read back at x = {_fmt(roots[0])}, just outside the calibrated range ({_fmt(lo)} to {_fmt(hi)})."
    if inside:
        return float(
            "nan"
        ), f"Not read back: its response matches {len(inside)} values of x inside the calibrated range."
    return float("nan"), "Not read back: its response lies beyond the responses the curve covers near the range."


def _standard_row(fit, outer, line, xi, yi, lowest, tolerance, lowest_tolerance) -> BackCalculatedStandard:
    xb, note = _read_standard(fit, yi, outer)
    nan = float("nan")
    if not math.isfinite(xb):
        return BackCalculatedStandard(line, xi, yi, nan, nan, None if xi == 0 else False, note)
    if xi == 0:
        blank = "Blank (x = 0): the relative error is undefined, so it is not judged."
        return BackCalculatedStandard(line, xi, yi, xb, nan, None, blank if note is None else f"{blank} {note}")
    re = (xb - xi) / xi * 100.0
    tol = lowest_tolerance if xi == lowest else tolerance
    return BackCalculatedStandard(line, xi, yi, xb, re, bool(abs(re) <= tol), note)


def _outer_edges(fit: PolynomialFit, x: np.ndarray, margin: float) -> list[float]:
    """Monotonic pieces over the range widened by ``margin`` (a fraction) of the end standards' |x|."""
    lo, hi = fit.domain
    a = min(lo, float(x.min()) - margin * abs(float(x.min())))
    b = max(hi, float(x.max()) + margin * abs(float(x.max())))
    return [a, *_turning_points(fit, (a, b)).tolist(), b]


def _summary(rows, lowest, min_share, min_levels, level_share) -> BackCalculationSummary:
    judged = [r for r in rows if r.x != 0]
    passing = sum(1 for r in judged if r.within_tolerance)
    share = 100.0 * passing / len(judged) if judged else float("nan")
    levels: dict[float, list[bool]] = {}
    for r in judged:
        levels.setdefault(r.x, []).append(bool(r.within_tolerance))
    lv_pass = sum(1 for v in levels.values() if sum(v) >= level_share * len(v))
    share_met = bool(judged) and share >= min_share
    levels_met = lv_pass >= min_levels
    return BackCalculationSummary(
        len(judged), passing, share, len(levels), lv_pass, lowest, min_share, min_levels, share_met, levels_met,
        share_met and levels_met,
    )  # fmt: skip


def back_calculate(
    fit: PolynomialFit,
    x,
    y,
    *,
    tolerance: float = 15.0,
    lowest_tolerance: float = 20.0,
    lines=None,
    min_share: float = 75.0,
    min_levels: int = 6,
    level_share: float = 0.5,
) -> BackCalculation:
    """Read each standard's response back through ``fit`` and judge its relative error.

    Relative error % = (x_back − x)/x · 100. The default rule is the bioanalytical one for
    chromatographic assays of the FDA 2018 Bioanalytical Method Validation guidance and ICH M10:
    each non-zero standard within ±``tolerance`` % (15), ±``lowest_tolerance`` % (20) at the lowest
    non-zero level; the curve is accepted when at least ``min_share`` % (75) of the standards and at
    least ``min_levels`` (6) levels pass. A level (a distinct non-zero x) passes when at least
    ``level_share`` (half) of its standards pass: with one standard per level, when it passes
    (the replicate clause of ICH M10, from memory). Other fields use other rules: set them.

    Blanks (x = 0) are reported with a note and not judged; a standard whose response does not
    read back to exactly one x inside the range gets a note and counts as failing.
    """
    x = np.asarray(x, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    if x.shape != y.shape or x.size == 0:
        raise FitError(f"Expected x and y of the same, non-zero length; got {x.size} and {y.size} values.")
    if not (np.isfinite(x).all() and np.isfinite(y).all()):
        raise FitError("Standards must be finite numbers; remove rows with missing values first.")
    line_list = [None] * x.size if lines is None else [int(v) for v in np.asarray(lines).ravel()]
    if len(line_list) != x.size:
        raise FitError(f"Expected one line number per standard; got {len(line_list)} for {x.size} standards.")
    if fit.degree < 1:
        raise FitError("A degree-0 fit is a constant: standards cannot be read back through it. Fit degree 1 or more.")
    outer = _outer_edges(fit, x, max(float(tolerance), float(lowest_tolerance)) / 100.0)
    nonzero = x[x != 0]
    lowest = float(nonzero.min()) if nonzero.size else float("nan")
    rows = tuple(
        _standard_row(fit, outer, ln, float(a), float(b), lowest, tolerance, lowest_tolerance)
        for ln, a, b in zip(line_list, x, y, strict=True)
    )
    summary = _summary(rows, lowest, float(min_share), int(min_levels), float(level_share))
    rule = (
        f"Each non-zero standard read back within ±{_fmt(tolerance)} % of its nominal x, ±{_fmt(lowest_tolerance)} % "
        f"at the lowest level (x = {_fmt(lowest)}); a level passes when at least {_fmt(level_share * 100)} % of its "
        f"standards pass; the curve is accepted when at least {_fmt(min_share)} % of the standards and at least "
        f"{min_levels} levels pass (bioanalytical rule of the {RULE_SOURCE}, chromatographic assays). "
        "Other fields use other rules."
    )
    return BackCalculation(rows, summary, rule)


# ----------------------------------------------------------------------------
# choosing a weighting


@dataclass(frozen=True)
class WeightingComparisonRow:
    weighting: str
    label: str
    sum_abs_relative_error_percent: float
    rank: int | None
    note: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return {
            "weighting": self.weighting,
            "label": self.label,
            "sum_abs_relative_error_percent": _num(self.sum_abs_relative_error_percent),
            "rank": self.rank,
            "note": self.note,
        }


@dataclass(frozen=True)
class WeightingComparison:
    rows: tuple[WeightingComparisonRow, ...]
    best: str | None

    def to_dict(self) -> dict[str, Any]:
        return {"rows": [r.to_dict() for r in self.rows], "best": self.best}


def _fit_with_rule(x, y, degree, rule, through_origin) -> PolynomialFit:
    return fit_polynomial(x, y, degree, weighting=rule, through_origin=through_origin)


def _score(x, y, degree, rule, through_origin, lines=None) -> tuple[float, str | None]:
    """Σ|relative error %| of the back-calculated non-blank standards under one rule, or NaN and a reason."""
    try:
        weights_for(rule, x, y, rows=lines)  # an undefined rule is refused naming the file's lines
        fit = _fit_with_rule(x, y, degree, rule, through_origin)
        back = back_calculate(fit, x, y)
    except FitError as exc:
        return float("nan"), f"Skipped: {exc}"
    judged = [r for r in back.rows if r.x != 0]
    missing = [r for r in judged if not math.isfinite(r.relative_error_percent)]
    if missing:
        return float("nan"), f"Not ranked: {len(missing)} standards could not be read back to one value of x."
    if not judged:
        return float("nan"), "Not ranked: there are no non-zero standards to judge."
    return float(sum(abs(r.relative_error_percent) for r in judged)), None


def compare_weightings(
    x,
    y,
    degree: int,
    *,
    rules=("none", "1/x", "1/x2", "1/y", "1/y2"),
    through_origin: bool = False,
    lines=None,
) -> WeightingComparison:
    """Fit each weighting rule, back-calculate the standards, and rank by Σ|relative error %|.

    The criterion is that of Almeida, Castel-Branco and Falcão, J. Chromatogr. B 774 (2002) 215
    (journal details from memory): the smallest sum of absolute relative errors of the
    back-calculated standards wins. Blanks (x = 0) are left out of the sum. A rule undefined on
    these data (x = 0 under 1/x, y ≤ 0 under 1/y, ...) is skipped with the reason; so is a rule
    under which some standard does not read back to one value. ``lines`` (the file's line
    numbers of the rows) name the rows where a rule is undefined.
    """
    x = np.asarray(x, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    canon = [check_weighting(r) for r in rules]
    scored = [(r, *_score(x, y, degree, r, through_origin, lines)) for r in canon]
    order = sorted((s, i) for i, (_, s, _) in enumerate(scored) if math.isfinite(s))
    rank = {i: n + 1 for n, (_, i) in enumerate(order)}
    rows = tuple(
        WeightingComparisonRow(r, WEIGHTINGS[r], s, rank.get(i), note) for i, (r, s, note) in enumerate(scored)
    )
    best = scored[order[0][1]][0] if order else None
    return WeightingComparison(rows, best)
