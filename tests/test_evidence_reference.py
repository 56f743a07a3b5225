"""The evidence for a degree checked against sources outside the project.

Sources, named beside each check:
* NIST StRD Pontius (tests/data/nist_strd/Pontius.dat, read by tests/nist.py): 40 rows, 20 load
  levels each measured twice, so it has replicates for the pure-error lack-of-fit test.
* NIST/SEMATECH e-Handbook of Statistical Methods, section 4.4.4.6 (lack of fit against pure error),
  recomputed in exact rational arithmetic (fractions.Fraction; least squares by tests/nist.py).
* statsmodels: anova_lm of the polynomial OLS model against a model with one dummy per x level (its
  residual is the pure error), compare_f_test for the added term, two OLS fits for Mandel's PG
  (ISO 8466-1, formula from memory), OLSInfluence for leverage, studentized residuals, Cook's
  distance and DFFITS. For weighted fits statsmodels' OLSInfluence is applied to OLS on WLS's own
  whitened data (sqrt(w)·y on sqrt(w)·X), which is the weighted fit; OLSInfluence on WLS results
  mixes whitened and raw quantities (its hat values exceed 1 here).
* scipy.stats for F and t distribution tails and quantiles.

The statsmodels models use x / 10^6 on Pontius: the same model space as x, so the same sums of
squares, without a power basis of 10^12-sized columns.
"""

from __future__ import annotations

import json
import math
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from nist import exact_least_squares, load
from scipy import stats
from statsmodels.stats.anova import anova_lm
from statsmodels.stats.outliers_influence import OLSInfluence

from fitting import degree_evidence, evidence_sentence, fit_polynomial, influence, mandel_test


def _fr(v) -> Fraction:
    return Fraction(v) if isinstance(v, (str, int, Fraction)) else Fraction(float(v))


def exact_lack_of_fit(x, y, degree, weights=None):
    """(SS_PE, SS_LOF, F) in exact rationals, as the e-Handbook 4.4.4.6 defines them."""
    xs, ys = [_fr(v) for v in x], [_fr(v) for v in y]
    ws = [Fraction(1)] * len(xs) if weights is None else [_fr(v) for v in weights]
    levels: dict[Fraction, list[int]] = {}
    for i, xi in enumerate(xs):
        levels.setdefault(xi, []).append(i)
    ss_pe = Fraction(0)
    for idx in levels.values():
        mean = sum(ws[i] * ys[i] for i in idx) / sum(ws[i] for i in idx)
        ss_pe += sum(ws[i] * (ys[i] - mean) ** 2 for i in idx)
    rss = exact_least_squares(xs, ys, degree, weights=ws).rss
    n, m, p = len(xs), len(levels), degree + 1
    ss_lof = rss - ss_pe
    return ss_pe, ss_lof, (ss_lof / (m - p)) / (ss_pe / (n - m))


def _frame(x, y, scale=1.0):
    return pd.DataFrame({"x": np.asarray(x) / scale, "y": y, "level": [repr(float(v)) for v in x]})


def _poly_formula(degree: int) -> str:
    return "y ~ " + " + ".join(["1"] + [f"I(x**{k})" for k in range(1, degree + 1)])


# an invented replicate design: a detector response read at 6 levels, some read 2 or 3 times
INVENTED_X = ["0.5", "0.5", "1", "2", "2", "2", "3", "4", "4", "5", "5", "6"]
INVENTED_Y = ["1.25", "1.5", "2.75", "4.5", "4.75", "4.25", "6.5", "8.5", "8", "9.75", "10.25", "11.5"]
INVENTED_W = ["1", "1", "0.5", "0.5", "0.5", "0.5", "0.25", "0.25", "0.25", "0.125", "0.125", "0.125"]


def test_pontius_has_replicated_levels():
    # source: NIST StRD Pontius.dat, 20 load levels each read twice
    c = load("Pontius")
    ev = degree_evidence(c.x, c.y, [1, 2])
    assert ev.levels == np.unique(c.x).size == 20
    assert ev.replicates == 20 and ev.pure_error_df == 20
    assert ev.replicates_note is None


@pytest.mark.parametrize("degree", [1, 2])
def test_pontius_lack_of_fit_matches_exact_rationals(degree):
    # source: e-Handbook 4.4.4.6 formulas, exact rational arithmetic (fractions)
    c = load("Pontius")
    ss_pe, ss_lof, f = exact_lack_of_fit(c.x, c.y, degree)
    ev = degree_evidence(c.x, c.y, [1, 2])
    i = ev.index(degree)
    assert ev.pure_error_ss == pytest.approx(float(ss_pe), rel=1e-10)
    assert ev.lack_of_fit_ss[i] == pytest.approx(float(ss_lof), rel=1e-8)
    assert ev.lack_of_fit_f[i] == pytest.approx(float(f), rel=1e-8)
    assert ev.lack_of_fit_df[i] == 20 - (degree + 1)
    # p-value: scipy.stats F upper tail at the exact F
    assert ev.lack_of_fit_p[i] == pytest.approx(stats.f.sf(float(f), 20 - degree - 1, 20), rel=1e-7)


def test_pontius_lack_of_fit_matches_statsmodels_anova_against_level_dummies():
    # source: statsmodels anova_lm(polynomial OLS, OLS with one dummy per level) = the pure-error F test
    c = load("Pontius")
    df = _frame(c.x, c.y, scale=1e6)
    full = smf.ols("y ~ C(level)", df).fit()
    ev = degree_evidence(c.x, c.y, [1, 2])
    for degree in (1, 2):
        table = anova_lm(smf.ols(_poly_formula(degree), df).fit(), full)
        i = ev.index(degree)
        assert ev.lack_of_fit_f[i] == pytest.approx(table["F"].iloc[1], rel=1e-6)
        assert ev.lack_of_fit_p[i] == pytest.approx(table["Pr(>F)"].iloc[1], rel=1e-5, abs=1e-300)
    # degree 2 shows no lack of fit on Pontius, degree 1 does (the load cell bends)
    assert ev.lack_of_fit_p[ev.index(2)] > 0.05 > ev.lack_of_fit_p[ev.index(1)]


@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("degree", [1, 2, 3])
def test_invented_replicate_design_matches_exact_rationals(degree, weighted):
    # source: e-Handbook 4.4.4.6 with weighted sums of squares, exact rational arithmetic (fractions)
    w = INVENTED_W if weighted else None
    ss_pe, ss_lof, f = exact_lack_of_fit(INVENTED_X, INVENTED_Y, degree, w)
    x, y = np.array(INVENTED_X, float), np.array(INVENTED_Y, float)
    ev = degree_evidence(x, y, range(0, 5), weights=None if w is None else np.array(w, float))
    i = ev.index(degree)
    assert ev.levels == 7 and ev.pure_error_df == 5
    assert ev.pure_error_ss == pytest.approx(float(ss_pe), rel=1e-12)
    assert ev.lack_of_fit_f[i] == pytest.approx(float(f), rel=1e-9)
    assert ev.lack_of_fit_p[i] == pytest.approx(stats.f.sf(float(f), 7 - degree - 1, 5), rel=1e-8)
    assert ev.weighted is weighted
    assert ev.to_dict()["sums_of_squares"].startswith("weighted" if weighted else "unweighted")


@pytest.mark.parametrize("weighted", [False, True])
def test_invented_design_matches_statsmodels_anova(weighted):
    # source: statsmodels anova_lm on OLS / WLS models (WLS sums of squares are weighted)
    x, y = np.array(INVENTED_X, float), np.array(INVENTED_Y, float)
    w = np.array(INVENTED_W, float) if weighted else None
    df = _frame(x, y)
    fit = (lambda f: smf.wls(f, df, weights=w).fit()) if weighted else (lambda f: smf.ols(f, df).fit())
    full = fit("y ~ C(level)")
    ev = degree_evidence(x, y, [1, 2, 3], weights=w)
    for degree in (1, 2, 3):
        table = anova_lm(fit(_poly_formula(degree)), full)
        i = ev.index(degree)
        assert ev.lack_of_fit_f[i] == pytest.approx(table["F"].iloc[1], rel=1e-8)
        assert ev.lack_of_fit_p[i] == pytest.approx(table["Pr(>F)"].iloc[1], rel=1e-8)


@pytest.mark.parametrize("weighted", [False, True])
def test_added_term_f_matches_statsmodels_compare_f_test(weighted):
    # source: statsmodels RegressionResults.compare_f_test (extra sum of squares), OLS and WLS
    c = load("Pontius")
    x, y = c.x, c.y
    w = 1.0 / (1.0 + x / 1e6) if weighted else None
    ev = degree_evidence(x, y, range(0, 5), weights=w)
    fits = {}
    for d in range(0, 5):
        X = np.vander(x / 1e6, d + 1, increasing=True)
        fits[d] = (sm.WLS(y, X, weights=w) if weighted else sm.OLS(y, X)).fit()
    assert ev.added_term_f[0] != ev.added_term_f[0]  # NaN: degree 0 has no lower degree
    for d in range(1, 5):
        f, p, df_diff = fits[d].compare_f_test(fits[d - 1])
        i = ev.index(d)
        assert df_diff == 1 and ev.added_term_df[i] == fits[d].df_resid
        assert ev.added_term_f[i] == pytest.approx(f, rel=1e-6)
        assert ev.added_term_p[i] == pytest.approx(p, rel=1e-5, abs=1e-300)


def test_aic_bic_differences_match_statsmodels():
    # source: statsmodels OLS aic/bic (2k - 2 ln L); differences between degrees equal ours
    c = load("Pontius")
    ev = degree_evidence(c.x, c.y, range(0, 4))
    ref = [sm.OLS(c.y, np.vander(c.x / 1e6, d + 1, increasing=True)).fit() for d in range(0, 4)]
    for d in range(1, 4):
        assert ev.aic[d] - ev.aic[0] == pytest.approx(ref[d].aic - ref[0].aic, rel=1e-9)
        assert ev.bic[d] - ev.bic[0] == pytest.approx(ref[d].bic - ref[0].bic, rel=1e-9)
    assert "n·ln(RSS/W) + 2p" in ev.criteria


def test_without_replicates_lack_of_fit_is_none_and_the_note_says_why():
    # invented: 12 distinct concentrations, one reading each
    x = np.linspace(1.0, 12.0, 12)
    y = 0.4 + 1.9 * x + 0.03 * x**2 + np.sin(7 * x) * 0.2
    ev = degree_evidence(x, y, range(0, 5))
    d = json.loads(json.dumps(ev.to_dict(), allow_nan=False))
    assert d["replicates"] == 0
    assert d["lack_of_fit_f"] == [None] * 5 and d["lack_of_fit_p"] == [None] * 5 and d["lack_of_fit_df"] == [None] * 5
    assert d["pure_error_ss"] is None
    assert "no x level has replicates" in d["replicates_note"]
    assert d["added_term_p"][0] is None and all(v is not None for v in d["added_term_p"][1:])
    sentence = evidence_sentence(ev, 2)
    assert "needs replicates" in sentence and "added-term" in sentence and "degree-2 term" in sentence


def test_lack_of_fit_is_none_where_m_minus_p_is_not_positive():
    # invented: 3 levels in duplicate; degree 2 passes through the level means (m - p = 0)
    x = np.array([1.0, 1.0, 2.0, 2.0, 3.0, 3.0])
    y = np.array([1.0, 1.2, 2.1, 1.9, 3.3, 3.1])
    ev = degree_evidence(x, y, [0, 1, 2])
    assert math.isfinite(ev.lack_of_fit_p[1])
    assert ev.to_dict()["lack_of_fit_p"][2] is None and ev.to_dict()["lack_of_fit_df"][2] is None


def test_replicate_tolerance_pools_close_x_values():
    # invented: nominal levels read back with tiny x jitter; pure error pools within 0.01
    x = np.array([1.0, 1.001, 2.0, 1.999, 3.0, 3.002, 4.0])
    y = np.array([2.0, 2.1, 3.9, 4.2, 6.1, 5.9, 8.0])
    assert degree_evidence(x, y, [1]).replicates == 0
    ev = degree_evidence(x, y, [1], replicate_tolerance=0.01)
    assert ev.levels == 4 and ev.pure_error_df == 3


def test_sentences_tie_the_table_to_the_verdict():
    # source of the numbers: Pontius, checked above against exact rationals and statsmodels
    c = load("Pontius")
    ev = degree_evidence(c.x, c.y, range(0, 5))
    same = evidence_sentence(ev, 2)
    assert "lowest degree without significant lack of fit (p = 0.67)" in same and "cross-validated choice" in same
    higher = evidence_sentence(ev, 3)
    assert "already absent at degree 2" in higher
    lower = evidence_sentence(ev, 1)
    assert "significant lack of fit (p < 0.001)" in lower and "degree 2 is the lowest" in lower
    with pytest.raises(Exception, match="not in this evidence table"):
        evidence_sentence(ev, 7)


@pytest.mark.parametrize("case", ["pontius", "near-line", "weighted"])
def test_mandel_pg_matches_two_statsmodels_fits(case):
    # source: ISO 8466-1 formula [memory] recomputed from statsmodels OLS / WLS mse_resid; scipy F quantile and tail
    w = None
    if case == "pontius":
        c = load("Pontius")
        x, y = c.x, c.y
    else:  # invented: a nearly straight response with noise
        rng = np.random.default_rng(11)
        x = np.linspace(1, 10, 10)
        y = 0.2 + 0.8 * x + rng.normal(0, 0.05, x.size)
        w = 1.0 / x if case == "weighted" else None
    n = x.size

    def mse(k):
        X = np.vander(x / x.max(), k, increasing=True)
        return (sm.OLS(y, X) if w is None else sm.WLS(y, X, weights=w)).fit().mse_resid

    s1, s2 = mse(2), mse(3)
    pg = ((n - 2) * s1 - (n - 3) * s2) / s2
    r = mandel_test(x, y, weights=w)
    # PG is the added-term F of degree 2 (both are (RSS_1 - RSS_2) / s2²)
    assert r.pg == pytest.approx(degree_evidence(x, y, [2], weights=w).added_term_f[0], rel=1e-12)
    assert r.s1_squared == pytest.approx(s1, rel=1e-9) and r.s2_squared == pytest.approx(s2, rel=1e-9)
    assert r.pg == pytest.approx(pg, rel=1e-6)
    assert r.critical_value == pytest.approx(stats.f.ppf(0.99, 1, n - 3), rel=1e-10)
    assert r.p_value == pytest.approx(stats.f.sf(pg, 1, n - 3), rel=1e-5)
    assert r.quadratic_better == bool(pg > stats.f.ppf(0.99, 1, n - 3))
    assert "not proof of linearity" in r.caution
    json.dumps(r.to_dict(), allow_nan=False)
    if case == "pontius":
        assert r.quadratic_better


def _influence_case():
    # invented: a 14-standard calibration, one reading with a gross error (row 6) and one far standard
    rng = np.random.default_rng(5)
    x = np.array([0.5, 1, 1.5, 2, 2.5, 3, 3.5, 4, 4.5, 5, 5.5, 6, 6.5, 15.0])
    y = 0.3 + 1.2 * x - 0.01 * x**2 + rng.normal(0, 0.05, x.size)
    y[5] += 1.0
    return x, y


@pytest.mark.parametrize("weighted", [False, True])
def test_influence_matches_statsmodels_olsinfluence(weighted):
    # source: statsmodels OLSInfluence (OLS; for weights, OLS on WLS's whitened data)
    x, y = _influence_case()
    w = 1.0 / (0.2 + x) if weighted else None
    X = np.vander(x / 15.0, 3, increasing=True)
    if weighted:
        wls = sm.WLS(y, X, weights=w).fit()
        res = sm.OLS(wls.model.wendog, wls.model.wexog).fit()
    else:
        res = sm.OLS(y, X).fit()
    ref = OLSInfluence(res)
    got = influence(x, y, 2, weights=w)
    np.testing.assert_allclose(got.leverage, ref.hat_matrix_diag, rtol=1e-10)
    np.testing.assert_allclose(got.studentized_residual, ref.resid_studentized_external, rtol=1e-8)
    np.testing.assert_allclose(got.cooks_distance, ref.cooks_distance[0], rtol=1e-8)
    np.testing.assert_allclose(got.dffits, ref.dffits[0], rtol=1e-8)


def test_influence_thresholds_flags_and_verdicts():
    # thresholds: scipy.stats t (Bonferroni, 5 % two-sided, n - p - 1 df) and F(p, n - p) median
    x, y = _influence_case()
    got = influence(x, y, fit_polynomial(x, y, 2), lines=np.arange(2, 16))
    n, p = 14, 3
    th = got.thresholds
    assert th["leverage"]["value"] == pytest.approx(3 * p / n)  # n < 30: 3p/n
    assert th["studentized_residual"]["value"] == pytest.approx(stats.t.ppf(1 - 0.05 / (2 * n), n - p - 1), rel=1e-10)
    assert th["cooks_distance"]["value"] == pytest.approx(stats.f.median(p, n - p), rel=1e-10)
    assert th["dffits"]["value"] == pytest.approx(2 * math.sqrt(p / n))
    assert all(th[k]["source"] for k in th)
    d = json.loads(json.dumps(got.to_dict(), allow_nan=False))
    rows = {r["line"]: r for r in d["rows"]}
    assert rows[7]["verdict"] == "outlier?" and "studentized_residual" in rows[7]["flags"]  # row 6, line 7
    far = rows[15]  # the far standard: high leverage by design
    assert "leverage" in far["flags"] and far["verdict"] in ("review", "influential?")
    assert 7 in d["flagged"] and 15 in d["flagged"]
    assert all(r["verdict"] == "ok" for r in d["rows"] if not r["flags"])


def test_leverage_alone_is_review_never_outlier():
    # invented: an exact line (tiny noise) with one standard far out; only its leverage stands out
    x = np.array([1.0, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 40])
    y = 2.0 + 0.5 * x + np.array([0.01, -0.02, 0.015, -0.01, 0.0, 0.02, -0.015, 0.01, -0.005, 0.0, 0.01, -0.01, 0.0])
    got = influence(x, y, 1)
    last = got.to_dict()["rows"][-1]
    assert last["leverage"] > got.thresholds["leverage"]["value"]  # 0.89 against 3p/n = 0.46
    assert last["flags"] == ["leverage"]
    assert last["verdict"] == "review"
    assert got.flagged == [13]


def test_an_exact_fit_reads_no_test_or_flag_from_rounding():
    # source: exact arithmetic; y = 2x + 1 on integers is a line with zero residuals
    x = np.arange(6.0)
    y = 2.0 * x + 1.0
    ev = degree_evidence(x, y, [0, 1, 2])
    assert ev.rss[1] == 0.0 and ev.rss[2] == 0.0
    assert ev.to_dict()["added_term_p"][2] is None
    inf = influence(x, y, 1)
    assert inf.flagged == [] and inf.to_dict()["rows"][0]["studentized_residual"] is None
