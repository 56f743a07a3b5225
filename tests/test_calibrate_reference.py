"""Reading unknowns back through a calibration curve, checked against outside references.

Sources named beside each check:
* NIST StRD "Pontius" (tests/data/nist_strd/Pontius.dat): the 40 load-cell pairs the
  NIST/SEMATECH e-Handbook's load-cell case study also uses (deflection y against load x).
  The readings read back here are our own choices, not values printed in the e-Handbook.
* The calibration interval of the NIST/SEMATECH e-Handbook, section 4.5.2.1: the x whose
  prediction interval for a new reading contains y0. Recomputed here from statsmodels OLS
  (its covariance and get_prediction) with scipy.optimize.brentq for the ends.
* The delta-method standard uncertainty (EURACHEM/CITAC guide, appendix E.3, remembered):
  checked against the formula evaluated with statsmodels' covariance, not a remembered number.
* The curves with a maximum and the replicate-level line are invented data.
"""

from __future__ import annotations

import math
from fractions import Fraction

import nist
import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from scipy.optimize import brentq

from fitting import FitError, fit_polynomial, monotonic_ranges, read_back

SCALE = 1e6  # the reference works in load / 1e6 so that statsmodels' design is well conditioned


class Reference:
    """Inverse prediction recomputed from a statsmodels OLS/WLS result in the power basis."""

    def __init__(self, res, weight=lambda u: 1.0):
        self.res = res
        self.b = np.asarray(res.params)
        self.cov = np.asarray(res.cov_params())
        self.s2 = float(res.scale)
        self.weight = weight

    def g(self, u):
        return u ** np.arange(self.b.size)

    def f(self, u):
        return float(self.g(u) @ self.b)

    def slope(self, u):
        return float(sum(j * self.b[j] * u ** (j - 1) for j in range(1, self.b.size)))

    def se_fit2(self, u):
        g = self.g(u)
        return float(g @ self.cov @ g)

    def sp(self, u, k):
        return math.sqrt(self.s2 / (k * self.weight(u)) + self.se_fit2(u))

    def read(self, y0, k, lo, hi, level=0.95):
        """x0, lower end, upper end, u(x0) for a rising curve (e-Handbook 4.5.2.1; EURACHEM/CITAC E.3)."""
        t = stats.t.ppf(0.5 + level / 2, self.res.df_resid)
        x0 = brentq(lambda u: self.f(u) - y0, lo, hi, xtol=1e-15)
        xl = brentq(lambda u: self.f(u) + t * self.sp(u, k) - y0, lo, x0, xtol=1e-15)
        xu = brentq(lambda u: self.f(u) - t * self.sp(u, k) - y0, x0, hi, xtol=1e-15)
        u = self.sp(x0, k) / abs(self.slope(x0))
        return x0, xl, xu, u


@pytest.fixture(scope="module")
def pontius():
    d = nist.load("Pontius")
    fit = fit_polynomial(d.x, d.y, 2)
    u = d.x / SCALE
    res = sm.OLS(d.y, np.vander(u, 3, increasing=True)).fit()
    return d, fit, Reference(res)


@pytest.mark.parametrize("k", [1, 3])
def test_pontius_read_back_matches_statsmodels_and_brentq(pontius, k):
    """NIST StRD Pontius (e-Handbook load-cell data), quadratic: x0, interval ends and u(x0) against statsmodels."""
    d, fit, ref = pontius
    readings = [0.35, 0.9, 1.2, 1.45, 2.0]
    out = read_back(fit, readings, readings=k)
    assert out.monotonic and out.turning_points == ()
    assert len(out.rows) == len(readings)
    lo, hi = d.x.min() / SCALE, d.x.max() / SCALE
    for row, y0 in zip(out.rows, readings, strict=True):
        x0, xl, xu, u = ref.read(y0, k, lo, hi)
        x0, xl, xu, u = x0 * SCALE, xl * SCALE, xu * SCALE, u * SCALE
        half = (xu - xl) / 2
        assert row.readings == k and not row.outside_range and row.warnings == ()
        assert row.x == pytest.approx(x0, rel=1e-6)  # statsmodels OLS + brentq
        assert abs(row.x_lower - xl) <= 1e-3 * half  # e-Handbook 4.5.2.1 via statsmodels covariance
        assert abs(row.x_upper - xu) <= 1e-3 * half
        assert row.x_lower < row.x < row.x_upper
        assert row.u_x == pytest.approx(u, rel=1e-6)  # delta method with statsmodels' covariance


def test_reference_covariance_agrees_with_get_prediction(pontius):
    """statsmodels' get_prediction se_mean equals gᵀ·Cov·g, and the engine's se_fit equals both."""
    d, fit, ref = pontius
    for load in (2e5, 1.1e6, 2.9e6):
        u = load / SCALE
        pred = ref.res.get_prediction(ref.g(u)[None, :])
        assert float(pred.se_mean[0]) ** 2 == pytest.approx(ref.se_fit2(u), rel=1e-9)
        assert float(fit.standard_error_of_fit(load)[0]) ** 2 == pytest.approx(ref.se_fit2(u), rel=1e-6)


def test_replicates_narrow_the_interval(pontius):
    """More replicate readings shrink s²/k, so the calibration interval narrows (e-Handbook 4.5.2.1)."""
    _, fit, _ = pontius
    one, three = read_back(fit, 1.2, readings=1).rows[0], read_back(fit, 1.2, readings=3).rows[0]
    assert one.x == three.x
    assert three.x_upper - three.x_lower < one.x_upper - one.x_lower
    assert three.u_x < one.u_x


def test_reading_outside_the_standards_is_said(pontius):
    """A reading below the lowest fitted response has no root in range: outside, with a sentence."""
    _, fit, _ = pontius
    row = read_back(fit, 0.01).rows[0]
    assert row.outside_range and row.roots == () and math.isnan(row.x)
    assert "outside the responses the standards cover" in row.warnings[0]
    d = read_back(fit, 0.01).to_dict()["rows"][0]
    assert d["x"] is None and d["u_x"] is None and d["x_lower"] is None


def test_interval_end_beyond_the_range_is_reported(pontius):
    """A reading at the lowest standard's fitted response: the lower end lies below the range (said in words)."""
    _, fit, _ = pontius
    y0 = float(fit.predict(fit.domain[0]))
    row = read_back(fit, y0).rows[0]
    assert row.x == pytest.approx(fit.domain[0], rel=1e-9)
    assert row.x_lower is None and row.x_upper is not None
    assert any("lower end" in w and "not bounded" in w for w in row.warnings)


# ----------------------------------------------------------------------------
# a curve with a maximum inside the range (invented data)


@pytest.fixture(scope="module")
def hump():
    x = np.repeat(np.arange(0.0, 11.0), 2)
    y = 40.0 - (x - 6.0) ** 2 + np.tile([0.3, -0.3], 11) + 0.05 * x
    fit = fit_polynomial(x, y, 2)
    res = sm.OLS(y, np.vander(x, 3, increasing=True)).fit()
    return fit, Reference(res)


def test_reading_below_the_maximum_lists_two_roots(hump):
    """Invented hump: a reading below the maximum matches one x on each side (brentq on statsmodels' quadratic)."""
    fit, ref = hump
    b = ref.b
    vertex = -b[1] / (2 * b[2])
    row = read_back(fit, 30.0).rows[0]
    assert math.isnan(row.x) and not row.outside_range
    assert len(row.roots) == 2
    left = brentq(lambda u: ref.f(u) - 30.0, 0.0, vertex, xtol=1e-14)
    right = brentq(lambda u: ref.f(u) - 30.0, vertex, 10.0, xtol=1e-14)
    assert row.roots == pytest.approx([left, right], rel=1e-9)
    assert "matches 2 values of x" in row.warnings[0]
    assert row.to_dict()["x"] is None


def test_reading_above_the_maximum_is_outside(hump):
    """Invented hump: a reading above the fitted maximum has no root in range."""
    fit, ref = hump
    vertex = -ref.b[1] / (2 * ref.b[2])
    row = read_back(fit, ref.f(vertex) + 0.5).rows[0]
    assert row.outside_range and row.roots == ()


def test_non_monotonic_warning_states_where_the_slope_changes_sign(hump):
    """The turning point is the vertex −b1/(2 b2) of statsmodels' quadratic; the warning names it once."""
    fit, ref = hump
    vertex = -ref.b[1] / (2 * ref.b[2])
    shape = monotonic_ranges(fit)
    assert not shape.monotonic
    assert shape.turning_points == pytest.approx([vertex], rel=1e-9)
    assert [r[2] for r in shape.ranges] == ["rising", "falling"]
    out = read_back(fit, [30.0, 35.0])
    assert out.to_dict()["monotonic"] is False
    assert len(out.warnings) == 1
    assert (
        f"{vertex:.6g}" in out.warnings[0]
        and "cannot serve as a calibration between x = 0 and x = 10" in (out.warnings[0])
    )


def test_cubic_with_two_turning_points():
    """Invented cubic rising, falling, rising: both sign changes of f′ found (numpy's quadratic formula on f′)."""
    x = np.linspace(-3.0, 3.0, 25)
    y = x**3 - 4.0 * x + 0.01 * np.cos(7 * x)
    fit = fit_polynomial(x, y, 3)
    c = fit.coefficients
    crit = np.sort(np.roots([3 * c[3], 2 * c[2], c[1]]).real)
    shape = monotonic_ranges(fit)
    assert shape.turning_points == pytest.approx(crit, rel=1e-9)
    assert [r[2] for r in shape.ranges] == ["rising", "falling", "rising"]
    assert len(read_back(fit, 0.0).rows[0].roots) == 3


def test_reading_at_a_level_mean_gives_back_that_level():
    """Invented replicate levels whose deviations cancel: the line passes through each level mean (exact
    fractions give the mean), so a reading equal to a level's mean response reads back to its x."""
    x = np.repeat([1.0, 2.0, 4.0, 8.0, 16.0], 3)
    y = 0.5 + 2.0 * x + np.tile([0.25, -0.125, -0.125], 5)
    fit = fit_polynomial(x, y, 1)
    level = 4.0
    mean = sum(Fraction(v) for v in y[x == level]) / 3
    row = read_back(fit, float(mean)).rows[0]
    assert row.x == pytest.approx(level, rel=1e-12)
    assert row.x_lower < level < row.x_upper


def test_refusals_are_sentences(pontius):
    _, fit, _ = pontius
    with pytest.raises(FitError, match="replicate readings"):
        read_back(fit, 1.0, readings=0)
    with pytest.raises(FitError, match="between 0 and 1"):
        read_back(fit, 1.0, level=95)
    with pytest.raises(FitError, match="finite"):
        read_back(fit, [1.0, float("nan")])
    with pytest.raises(FitError, match="cannot use weighting"):
        read_back(fit, 1.0, weighting="1/x")
    const = fit_polynomial([1.0, 2.0, 3.0], [1.0, 2.0, 3.0], 0)
    with pytest.raises(FitError, match="constant"):
        read_back(const, 2.0)


def test_to_dict_keys(pontius):
    _, fit, _ = pontius
    d = read_back(fit, [1.0, 9.0], readings=2, level=0.9).to_dict()
    assert {"level", "readings", "rows", "monotonic", "turning_points", "warnings"} <= set(d)
    assert d["level"] == 0.9 and d["readings"] == 2 and len(d["rows"]) == 2
    assert set(d["rows"][0]) >= {
        "y", "readings", "x", "x_lower", "x_upper", "u_x", "outside_range", "roots", "warnings"
    }  # fmt: skip
    assert d["rows"][1]["x"] is None and d["rows"][1]["outside_range"] is True


def test_through_origin_fit_reads_back_against_statsmodels():
    """Invented through-origin quadratic: x0, ends and u(x0) against statsmodels OLS without a constant + brentq;
    the turning point is −b1/(2 b2) of statsmodels' coefficients."""
    x = np.linspace(1.0, 10.0, 12)
    y = 3.0 * x - 0.2 * x**2 + 0.05 * np.sin(5 * x)
    fit = fit_polynomial(x, y, 2, through_origin=True)
    res = sm.OLS(y, np.column_stack([x, x * x])).fit()
    b1, b2 = res.params
    cov = res.cov_params()
    assert monotonic_ranges(fit).turning_points == pytest.approx([-b1 / (2 * b2)], rel=1e-9)
    t = stats.t.ppf(0.975, res.df_resid)

    def f(v):
        return b1 * v + b2 * v * v

    def sp(v):
        g = np.array([v, v * v])
        return math.sqrt(res.scale + g @ cov @ g)

    y0 = 5.0
    row = read_back(fit, y0).rows[0]
    x0 = brentq(lambda v: f(v) - y0, 1.0, -b1 / (2 * b2), xtol=1e-15)
    xl = brentq(lambda v: f(v) + t * sp(v) - y0, 1.0, x0, xtol=1e-15)
    xu = brentq(lambda v: f(v) - t * sp(v) - y0, x0, -b1 / (2 * b2), xtol=1e-15)
    assert row.x == pytest.approx(x0, rel=1e-9)
    assert abs(row.x_lower - xl) <= 1e-3 * (xu - xl) / 2 and abs(row.x_upper - xu) <= 1e-3 * (xu - xl) / 2
    assert row.u_x == pytest.approx(sp(x0) / abs(b1 + 2 * b2 * x0), rel=1e-6)


def test_no_residual_degrees_of_freedom_gives_no_interval():
    """Three points, degree 2: the curve passes through them; x0 is given, the interval and u(x0) are not."""
    fit = fit_polynomial([1.0, 2.0, 3.0], [1.0, 4.0, 8.0], 2)
    row = read_back(fit, 3.0).rows[0]
    c = fit.coefficients
    assert row.x == pytest.approx(brentq(lambda v: c[0] + c[1] * v + c[2] * v * v - 3.0, 1.0, 3.0), rel=1e-12)
    assert row.x_lower is None and row.x_upper is None and math.isnan(row.u_x)
    assert "no residual degrees of freedom" in row.warnings[0]


def test_exact_polynomial_reads_back_exactly():
    """NIST StRD Wampler1 is y = 1 + x + x² + x³ + x⁴ + x⁵ exactly (certified residual SD 0): a reading
    computed in exact fractions at x = 7.5 reads back to 7.5, and the interval shrinks onto it."""
    d = nist.load("Wampler1")
    fit = fit_polynomial(d.x, d.y, d.degree)
    x = Fraction(15, 2)
    y0 = float(sum(x**j for j in range(6)))
    row = read_back(fit, y0).rows[0]
    assert row.x == pytest.approx(7.5, rel=1e-13)
    assert row.x_lower == pytest.approx(7.5, rel=1e-9) and row.x_upper == pytest.approx(7.5, rel=1e-9)
    assert row.warnings == ()
