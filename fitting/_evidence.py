"""The evidence for a degree: tests and diagnostics that stand beside the cross-validated verdict.

The degree recommendation stays the cross-validation rule (the one-standard-error rule of
``sweep_from_blocks``). This module adds evidence a lab analyst or an auditor asks for; it
never recommends a degree of its own.

What is computed
----------------
``degree_evidence`` (per degree; x mapped to [-1, 1], Chebyshev basis, one Householder QR
of the weighted [A | y] for the highest degree, nested degrees read off its leading blocks;
the normal equations are never formed):

* RSS, the (weighted) residual sum of squares. With weights every sum of squares below is
  weighted: sum w_i r_i^2.
* Lack of fit against pure error (NIST/SEMATECH e-Handbook of Statistical Methods, section
  4.4.4.6): SS_PE = sum over x levels of sum w_i (y_i - ybar_level)^2 (ybar weighted),
  n - m degrees of freedom for m levels; SS_LOF = RSS - SS_PE on m - p; F = (SS_LOF / (m - p))
  / (SS_PE / (n - m)), p = degree + 1. Undefined (None) without replicates (n = m), when
  m - p <= 0, or when the replicates agree exactly (SS_PE = 0).
* Added term (extra sum of squares): F = (RSS_{d-1} - RSS_d) / (RSS_d / (n - d - 1)) on
  (1, n - d - 1) degrees of freedom, the same test as the t test of the highest coefficient.
  Undefined for degree 0. RSS_{d-1} comes from the same factor, so it is defined for every
  degree d >= 1 whether or not d - 1 is among the degrees asked for.
* AIC = n ln(RSS / W) + 2p and BIC = n ln(RSS / W) + p ln n, W = sum of weights (n without
  weights), the same definition ``sweep_degrees`` reports (differences between degrees are what
  count; constants are dropped).

``mandel_test``: ISO 8466-1 fitting test, line against quadratic [formula from memory, checked in
the tests against two statsmodels fits]: DS^2 = (N - 2) s1^2 - (N - 3) s2^2 = RSS_1 - RSS_2,
PG = DS^2 / s2^2, compared with F(1, N - 3) at 99 %. PG equals the added-term F of degree 2.

``influence``: leverage, externally studentized residual, Cook's distance and DFFITS of every row
for one degree, from a thin QR of the weighted Chebyshev design (h_ii = ||Q_i||^2), each flagged
against a stated threshold (see ``THRESHOLD_SOURCES``). A leverage flag alone means "review":
the end standards of a calibration exceed the leverage threshold by design.

``verdict_stability``: how often the cross-validated verdict would come out the same if the folds
were drawn again.

Verdict stability: design
-------------------------
The rule is the verdict's (``_verdict.verdict_folds``, shared with ``verdict_sweep``): units are
what a fold holds out whole (rows; x levels by ``replicate_levels`` when x has replicates; the
user's groups), with the verdict's number of folds and repeats and its degrees. Every redraw deals
the units to folds at random in equal shares, with KFold's shuffle (``_sweep.kfold_deal``, one
numpy RandomState(seed) for all redraws), ``repeats`` times, and hands the resulting blocks to
``sweep_from_blocks``, whose one-standard-error rule gives that redraw's degree. With rows as
units the first redraw is therefore exactly the verdict's folds (KFold with random_state=seed,
repeated); with x levels the verdict deals them by size (as GroupKFold) and a redraw at random.
With a group column each group is its own fold, as in the verdict, so every redraw is the same
partition and one sweep decides all of them.

* Up to ``EXACT_REDRAW_LIMIT`` units, each redraw deals the units themselves and reduces each
  fold's rows to its factor (``block_factor``): exact redraws, one pass over the rows each.
  When every fold holds at most ``_redraw.HAT_FOLD_ROWS`` rows, the same redraws (the same
  partitions, dealt from the same generator) are scored from one thin QR of all rows instead
  (``_redraw``: each fold's test error is the leave-group-out residual (I − H_F)⁻¹ e_F), all
  redraws at once; a redraw whose verdict is not clear of that route's rounding, or that meets a
  fold on the sweep's rank threshold, is scored the sweep's way, so the counts are those of the
  sweep's route (tests/test_stability_routes.py). 200 redraws of 30 rows take tens of
  milliseconds instead of about two seconds.
* Above it, the rows are reduced once: the units are shuffled once into ``MINI_BLOCKS``
  mini-blocks (a multiple of the fold count), each reduced to its (P + 1) x (P + 1) factor. A
  redraw deals mini-blocks to folds and merges their factors (``Block.merge``, TSQR); it touches
  no rows: 200 redraws at 10^5 rows cost about 11-20 sweeps (benchmarks/bench_stability.py, 2 cores at
  load 2-11), most of it in ``sweep_from_blocks`` itself. Each redraw is, on its own, a uniformly random
  equal-share partition of the units (a random partition into mini-blocks dealt at random is one);
  redraws are not independent of each other, because units that share a mini-block stay together
  in every redraw. Of the pairs of units that share a fold in a redraw, about folds / mini-blocks
  (5 % with 10 folds and 200 mini-blocks) share it in every redraw; the shares are therefore
  estimated a little less precisely than with independent redraws, not with a bias.
* Only the recommendation of each redraw is kept, so ``sweep_from_blocks`` runs with
  ``diagnostics=False``: no full-data factor, no display fit, and none of the conditioning,
  oscillation and band checks (none of which enter the one-standard-error rule).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import _basis
from ._distributions import f_quantile, f_upper_tail, t_upper_quantile
from ._errors import FitError
from ._linalg import single_thread_blas
from ._polyfit import PolynomialFit, pow2_exponent, validate_xyw
from ._sweep import Block, Split, block_factor, kfold_deal, kfold_deals, normalise_degrees, sweep_from_blocks
from ._validate import check_seed
from ._verdict import VERDICT_DEGREES, VerdictFolds, check_tolerance, replicate_levels, verdict_folds

__all__ = [
    "DegreeEvidence",
    "Influence",
    "MandelResult",
    "VerdictStability",
    "degree_evidence",
    "evidence_sentence",
    "influence",
    "mandel_test",
    "replicate_levels",
    "verdict_stability",
]

ALPHA = 0.05  # significance level of the sentences; common practice, no source
MANDEL_LEVEL = 0.99  # ISO 8466-1 compares PG with F(1, N - 3) at 99 % [memory]
SMALL_N = 30  # below this many rows the leverage threshold is 3p/n; common practice, no source
EXACT_REDRAW_LIMIT = 5_000  # units; above this, redraws deal mini-blocks
MINI_BLOCKS = 200
_ONE_FACTOR = True  # small folds: test errors from one factorisation of all rows (``_redraw``); tests turn it off
MANDEL_CAUTION = (
    "Mandel's test has low power with routine calibration designs (Andrade and Gómez-Carracedo, Anal. Methods 5 "
    "(2013) 1145): a pass is not proof of linearity."
)
INFLUENCE_CAUTION = (
    "A flag means review the row, not remove it: the end standards of a calibration often exceed the leverage "
    "threshold by design. Excluding a row is the analyst's decision, to be recorded with a reason; follow local "
    "codes and licensed practice where the calibration serves safety, health or legal measurement."
)
THRESHOLD_SOURCES = {
    "leverage": "Belsley, Kuh and Welsch, Regression Diagnostics (1980) [memory]; 3p/n below "
    f"{SMALL_N} rows is common practice, no source",
    "studentized_residual": "Bonferroni outlier test on the externally studentized residual, common practice "
    "(e.g. Cook and Weisberg, Residuals and Influence in Regression, 1982 [memory])",
    "cooks_distance": "median of F(p, n - p), common practice (Cook and Weisberg 1982 [memory])",
    "dffits": "Belsley, Kuh and Welsch (1980) [memory]",
}


def _num(v) -> float | None:
    v = float(v)
    return v if math.isfinite(v) else None


def _nums(a) -> list[float | None]:
    return [_num(v) for v in np.asarray(a, dtype=np.float64)]


def _ints(a) -> list[int | None]:
    return [int(v) if math.isfinite(v) else None for v in np.asarray(a, dtype=np.float64)]


def _f_sf(f, d1, d2) -> np.ndarray:
    """Upper tail of F(d1, d2) at f; NaN where f is NaN or a df is not positive."""
    f, d1, d2 = np.broadcast_arrays(*(np.asarray(v, dtype=np.float64) for v in (f, d1, d2)))
    ok = np.isfinite(f) & (d1 > 0) & (d2 > 0)
    out = np.full(f.shape, np.nan)
    out[ok] = [f_upper_tail(a, b, c) for a, b, c in zip(f[ok], d1[ok], d2[ok], strict=True)]
    return out


def _fmt_p(p: float) -> str:
    return "p < 0.001" if p < 0.001 else f"p = {p:.2g}"


def _pure_error(y: np.ndarray, w: np.ndarray | None, labels: np.ndarray, m: int) -> float:
    """Weighted sum of squares of y about its (weighted) mean within each level."""
    ww = np.ones_like(y) if w is None else w
    mean = np.bincount(labels, ww * y, minlength=m) / np.bincount(labels, ww, minlength=m)
    dev = y - mean[labels]
    return float(np.sum(ww * dev * dev))


def _rounding_floor(total_ss: float, n: int) -> float:
    """A residual sum of squares at or below this is rounding error of a fit to data with sum of squares total_ss."""
    return (n * np.finfo(np.float64).eps) ** 2 * total_ss


def _nested_rss(x, y, w, top: int) -> np.ndarray:
    """RSS of every degree 0..top from one QR of [A | y] (NaN where the design is rank deficient)."""
    offset, scale = _basis.domain_map(float(x.min()), float(x.max()))
    t = _basis.to_window(x, offset, scale)
    ww = np.ones_like(y) if w is None else w
    yc = y - float(ww @ y) / float(ww.sum())  # centring costs nothing (every model has a constant) and saves digits
    ncols = top + 1
    with single_thread_blas():
        r = block_factor(t, yc, ncols, w).r
    col = r[:, ncols] ** 2
    rss = np.array([float(np.sum(col[d + 1 :])) for d in range(ncols)])
    rss[rss <= _rounding_floor(float(np.sum(col)), x.size)] = 0.0  # an exact fit leaves only rounding: call it 0
    dg = np.abs(np.diag(r))[:ncols]
    eps = np.finfo(np.float64).eps
    for d in range(ncols):
        if dg[: d + 1].min() <= 1e3 * max(x.size, d + 1) * eps * dg[: d + 1].max():
            rss[d:] = np.nan
            break
    return rss


# ----------------------------------------------------------------------------
# per-degree evidence


@dataclass(frozen=True, eq=False)
class DegreeEvidence:
    """Lack of fit, added-term tests and information criteria per degree (arrays indexed like ``degrees``)."""

    degrees: np.ndarray
    n: int
    levels: int
    replicates: int
    weighted: bool
    replicate_tolerance: float
    pure_error_ss: float | None
    pure_error_df: int
    replicates_note: str | None
    rss: np.ndarray
    lack_of_fit_ss: np.ndarray
    lack_of_fit_f: np.ndarray
    lack_of_fit_df: np.ndarray
    lack_of_fit_p: np.ndarray
    added_term_f: np.ndarray
    added_term_df: np.ndarray
    added_term_p: np.ndarray
    aic: np.ndarray
    bic: np.ndarray
    criteria: str
    notes: tuple[str, ...] = field(default=())

    @property
    def has_lack_of_fit(self) -> bool:
        return bool(np.isfinite(self.lack_of_fit_p).any())

    def index(self, degree: int) -> int:
        hits = np.nonzero(self.degrees == int(degree))[0]
        if hits.size == 0:
            raise FitError(f"Degree {degree} is not in this evidence table ({_span(self.degrees)}).")
        return int(hits[0])

    def lowest_without_lack_of_fit(self, alpha: float = ALPHA) -> int | None:
        """The lowest degree whose lack-of-fit p-value is at least ``alpha`` (None if none or untestable)."""
        ok = np.isfinite(self.lack_of_fit_p) & (np.nan_to_num(self.lack_of_fit_p) >= alpha)
        return int(self.degrees[np.argmax(ok)]) if ok.any() else None

    def to_dict(self) -> dict[str, Any]:
        return {
            "degrees": [int(d) for d in self.degrees],
            "n": self.n,
            "levels": self.levels,
            "replicates": self.replicates,
            "weighted": self.weighted,
            "sums_of_squares": "weighted (sum of w·r²)" if self.weighted else "unweighted",
            "replicate_tolerance": self.replicate_tolerance,
            "pure_error_ss": None if self.pure_error_ss is None else _num(self.pure_error_ss),
            "pure_error_df": self.pure_error_df,
            "replicates_note": self.replicates_note,
            "rss": _nums(self.rss),
            "lack_of_fit_ss": _nums(self.lack_of_fit_ss),
            "lack_of_fit_f": _nums(self.lack_of_fit_f),
            "lack_of_fit_df": _ints(self.lack_of_fit_df),
            "lack_of_fit_p": _nums(self.lack_of_fit_p),
            "added_term_f": _nums(self.added_term_f),
            "added_term_df": _ints(self.added_term_df),
            "added_term_p": _nums(self.added_term_p),
            "aic": _nums(self.aic),
            "bic": _nums(self.bic),
            "criteria": self.criteria,
            "notes": list(self.notes),
        }


def _span(degs) -> str:
    degs = [int(d) for d in degs]
    return f"{degs[0]}" if len(degs) == 1 else f"{degs[0]}–{degs[-1]}"


def _replicates_note(n: int, m: int) -> str | None:
    if n == m:
        return "no x level has replicates (pure-error df = 0), so the lack-of-fit test cannot be made"
    return None


def _lack_of_fit(rss, p, n, m, ss_pe):
    """(SS_LOF, F, df, p-value) arrays; NaN where the test is undefined."""
    lof_df = (m - p).astype(np.float64)
    pe_df = n - m
    defined = (lof_df > 0) & (pe_df > 0) & (ss_pe > 0) & np.isfinite(rss)
    ss_lof = np.where(defined, np.maximum(rss - ss_pe, 0.0), np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        f = np.where(defined, (ss_lof / lof_df) / (ss_pe / max(pe_df, 1)), np.nan)
    return ss_lof, f, np.where(defined, lof_df, np.nan), _f_sf(f, lof_df, pe_df)


def _added_term(rss_all, degs, n):
    """(F, residual df, p-value) of each degree's highest term against degree - 1."""
    d = np.asarray(degs)
    df = (n - d - 1).astype(np.float64)
    rss = rss_all[d]
    prev = np.where(d >= 1, rss_all[np.maximum(d - 1, 0)], np.nan)
    ok = (d >= 1) & (df > 0) & (rss > 0) & np.isfinite(prev)
    with np.errstate(invalid="ignore", divide="ignore"):
        f = np.where(ok, np.maximum(prev - rss, 0.0) / (rss / np.where(df > 0, df, 1)), np.nan)
    return f, np.where(df > 0, df, np.nan), _f_sf(f, 1, df)


def degree_evidence(x, y, degrees=VERDICT_DEGREES, *, weights=None, replicate_tolerance: float = 0.0) -> DegreeEvidence:
    """Lack of fit (with replicates), added-term F tests, AIC and BIC for each degree.

    Parameters
    ----------
    x, y : array-like of float.
    degrees : iterable of int, default=range(0, 21)
        Degrees above what the distinct x values carry (levels - 1) are left out, with a note.
    weights : array-like of positive floats, default=None
        Inverse-variance weights; every sum of squares is then weighted.
    replicate_tolerance : float, default=0.0
        x values within this distance (x units, chained along sorted x) count as one level.
    """
    x, y, w = validate_xyw(x, y, weights)
    tol = check_tolerance(replicate_tolerance)
    degs, notes = normalise_degrees(degrees)
    labels = replicate_levels(x, tol)
    n, m = x.size, int(labels.max()) + 1
    if degs[-1] > m - 1:
        notes.append(f"Degrees above {m - 1} were left out: the data have {m} distinct x levels.")
        degs = [d for d in degs if d <= m - 1] or [m - 1]
    rss_all = _nested_rss(x, y, w, degs[-1])
    d = np.asarray(degs)
    p = d + 1
    rss = rss_all[d]
    ss_pe = _pure_error(y, w, labels, m) if n > m else float("nan")
    note = _replicates_note(n, m)
    if n > m and not ss_pe > 0:
        note = "the replicates agree exactly (pure error is zero), so the lack-of-fit F is undefined"
    elif n > m and m - p.min() <= 0:
        note = f"too few x levels ({m}) to test lack of fit for these degrees (m − p <= 0)"
    ss_lof, lof_f, lof_df, lof_p = _lack_of_fit(rss, p, n, m, ss_pe)
    at_f, at_df, at_p = _added_term(rss_all, degs, n)
    wsum = float(n if w is None else w.sum())
    with np.errstate(divide="ignore", invalid="ignore"):
        base = np.where(rss > 0, n * np.log(rss / wsum), np.nan)
    return DegreeEvidence(
        degrees=d.astype(np.int64),
        n=n,
        levels=m,
        replicates=n - m,
        weighted=w is not None,
        replicate_tolerance=tol,
        pure_error_ss=ss_pe if n > m else None,
        pure_error_df=n - m,
        replicates_note=note,
        rss=rss,
        lack_of_fit_ss=ss_lof,
        lack_of_fit_f=lof_f,
        lack_of_fit_df=lof_df,
        lack_of_fit_p=lof_p,
        added_term_f=at_f,
        added_term_df=at_df,
        added_term_p=at_p,
        aic=base + 2 * p,
        bic=base + p * math.log(n),
        criteria="AIC = n·ln(RSS/W) + 2p, BIC = n·ln(RSS/W) + p·ln(n); p = degree + 1, W = sum of weights (n "
        "unweighted)" + ("; RSS weighted" if w is not None else ""),
        notes=tuple(notes),
    )


# ----------------------------------------------------------------------------
# one sentence tying the table to the verdict


def evidence_sentence(evidence: DegreeEvidence, recommended_degree: int) -> str:
    """One plain sentence relating the lack-of-fit (or added-term) evidence to the cross-validated degree."""
    rec = int(recommended_degree)
    evidence.index(rec)  # raises when the degree is not in the table
    if evidence.has_lack_of_fit:
        return _sentence_with_replicates(evidence, rec)
    return _sentence_added_term(evidence, rec)


def _sentence_with_replicates(ev: DegreeEvidence, rec: int) -> str:
    low = ev.lowest_without_lack_of_fit()
    p_rec = ev.lack_of_fit_p[ev.index(rec)]
    if low is None:
        tested = np.isfinite(ev.lack_of_fit_p)
        i = int(np.nanargmax(np.where(tested, ev.lack_of_fit_p, -1.0)))
        return (
            f"Every degree that could be tested shows significant lack of fit (largest {_fmt_p(ev.lack_of_fit_p[i])}, "
            f"at degree {int(ev.degrees[i])}); degree {rec} is the cross-validated choice, but the replicate scatter "
            "is smaller than what any of these curves leaves, so the shape may not be polynomial or the replicates "
            "may understate the real scatter (for example, measured together)."
        )
    p_low = ev.lack_of_fit_p[ev.index(low)]
    if rec == low:
        return (
            f"Degree {rec} is the lowest degree without significant lack of fit ({_fmt_p(p_low)}) and the "
            "cross-validated choice."
        )
    if rec > low:
        return (
            f"Degree {rec} is the cross-validated choice: cross-validation finds the terms above degree {low} worth "
            f"their variance, but lack of fit is already absent at degree {low} ({_fmt_p(p_low)}), so the replicates "
            "do not show the bend those terms fit."
        )
    where = f"({_fmt_p(p_rec)})" if math.isfinite(p_rec) else "(not testable there)"
    return (
        f"Degree {rec} is the cross-validated choice, but it shows significant lack of fit {where}; degree {low} is "
        f"the lowest degree without it ({_fmt_p(p_low)}): a bend larger than the replicate scatter remains at "
        f"degree {rec}."
    )


def _sentence_added_term(ev: DegreeEvidence, rec: int) -> str:
    why = (
        "the lack-of-fit test needs replicates and no x level has any"
        if ev.replicates == 0
        else (ev.replicates_note or "the lack-of-fit test is undefined here")
    )
    head = f"Degree {rec} is the cross-validated choice; {why}, and the evidence rests on the added-term test"
    i = ev.index(rec)
    p_own = ev.added_term_p[i]
    nxt = np.nonzero(ev.degrees == rec + 1)[0]
    p_next = ev.added_term_p[int(nxt[0])] if nxt.size else float("nan")
    parts = []
    if math.isfinite(p_own):
        sig = "significant" if p_own < ALPHA else "not significant"
        parts.append(f"the degree-{rec} term is {sig} ({_fmt_p(p_own)})")
    if math.isfinite(p_next):
        if p_next < ALPHA:
            parts.append(
                f"the degree-{rec + 1} term is significant too ({_fmt_p(p_next)}), though cross-validation does not "
                "find it worth its variance"
            )
        else:
            parts.append(f"the degree-{rec + 1} term is not ({_fmt_p(p_next)})")
    return head + (": " + " and ".join(parts) if parts else "") + "."


# ----------------------------------------------------------------------------
# Mandel's fitting test


@dataclass(frozen=True)
class MandelResult:
    """ISO 8466-1 fitting test of a straight line against a quadratic."""

    n: int
    s1_squared: float  # residual variance of the line, RSS_1 / (N - 2)
    s2_squared: float  # residual variance of the quadratic, RSS_2 / (N - 3)
    ds_squared: float  # (N - 2) s1² - (N - 3) s2²
    pg: float  # DS² / s2²
    critical_value: float  # F(1, N - 3) at ``level``
    level: float
    p_value: float
    quadratic_better: bool
    weighted: bool
    conclusion: str
    caution: str = MANDEL_CAUTION

    def to_dict(self) -> dict[str, Any]:
        return {
            "n": self.n,
            "s1_squared": _num(self.s1_squared),
            "s2_squared": _num(self.s2_squared),
            "ds_squared": _num(self.ds_squared),
            "pg": _num(self.pg),
            "critical_value": _num(self.critical_value),
            "level": self.level,
            "p_value": _num(self.p_value),
            "quadratic_better": self.quadratic_better,
            "weighted": self.weighted,
            "conclusion": self.conclusion,
            "caution": self.caution,
            "source": "ISO 8466-1 [formula from memory]",
        }


def mandel_test(x, y, *, weights=None) -> MandelResult:
    """Mandel's fitting test (ISO 8466-1): does a quadratic fit significantly better than a line?"""
    x, y, w = validate_xyw(x, y, weights)
    n = x.size
    if n < 4 or np.unique(x).size < 3:
        raise FitError("Mandel's test needs at least 4 rows and 3 distinct x values (a line and a quadratic).")
    rss = _nested_rss(x, y, w, 2)
    s1, s2 = rss[1] / (n - 2), rss[2] / (n - 3)
    ds2 = (n - 2) * s1 - (n - 3) * s2
    with np.errstate(divide="ignore", invalid="ignore"):
        pg = ds2 / s2 if s2 > 0 else float("nan")
    crit = f_quantile(MANDEL_LEVEL, 1, n - 3)
    pval = float(_f_sf(pg, 1, n - 3))
    better = bool(pg > crit)
    if better:
        text = f"PG = {pg:.4g} exceeds F(1, {n - 3}; 99 %) = {crit:.4g}: the quadratic fits significantly better."
    else:
        text = (
            f"PG = {pg:.4g} does not exceed F(1, {n - 3}; 99 %) = {crit:.4g}: no significant gain from the quadratic "
            "(which does not prove the line is right)."
        )
    return MandelResult(
        n=n,
        s1_squared=float(s1),
        s2_squared=float(s2),
        ds_squared=float(ds2),
        pg=float(pg),
        critical_value=crit,
        level=MANDEL_LEVEL,
        p_value=pval,
        quadratic_better=better,
        weighted=w is not None,
        conclusion=text,
    )


# ----------------------------------------------------------------------------
# influence of single rows


@dataclass(frozen=True, eq=False)
class Influence:
    """Leverage, externally studentized residual, Cook's distance and DFFITS of every row at one degree."""

    degree: int
    n: int
    p: int
    weighted: bool
    lines: np.ndarray
    x: np.ndarray
    y: np.ndarray
    leverage: np.ndarray
    studentized_residual: np.ndarray
    cooks_distance: np.ndarray
    dffits: np.ndarray
    flags: tuple[tuple[str, ...], ...]
    verdicts: tuple[str, ...]
    thresholds: dict[str, dict[str, Any]]
    caution: str = INFLUENCE_CAUTION

    @property
    def flagged(self) -> list[int]:
        return [int(ln) for ln, v in zip(self.lines, self.verdicts, strict=True) if v != "ok"]

    def to_dict(self) -> dict[str, Any]:
        rows = [
            {
                "line": int(self.lines[i]),
                "x": float(self.x[i]),
                "y": float(self.y[i]),
                "leverage": _num(self.leverage[i]),
                "studentized_residual": _num(self.studentized_residual[i]),
                "cooks_distance": _num(self.cooks_distance[i]),
                "dffits": _num(self.dffits[i]),
                "flags": list(self.flags[i]),
                "verdict": self.verdicts[i],
            }
            for i in range(self.n)
        ]
        return {
            "degree": self.degree,
            "n": self.n,
            "p": self.p,
            "weighted": self.weighted,
            "rows": rows,
            "flagged": self.flagged,
            "thresholds": {
                k: {kk: (_num(vv) if kk == "value" else vv) for kk, vv in v.items()} for k, v in self.thresholds.items()
            },
            "caution": self.caution,
        }


def _influence_thresholds(n: int, p: int) -> dict[str, dict[str, Any]]:
    small = n < SMALL_N
    dof = n - p - 1
    t_crit = t_upper_quantile(ALPHA / (2 * n), dof) if dof > 0 else float("nan")
    return {
        "leverage": {
            "value": (3 if small else 2) * p / n,
            "rule": f"h > {'3' if small else '2'}p/n" + (f" (fewer than {SMALL_N} rows)" if small else ""),
            "verdict": "review",
            "source": THRESHOLD_SOURCES["leverage"],
        },
        "studentized_residual": {
            "value": t_crit,
            "rule": f"|t| > t(1 − {ALPHA:g}/(2n); n − p − 1 = {dof}), Bonferroni, two-sided, 5 % overall",
            "verdict": "outlier?",
            "source": THRESHOLD_SOURCES["studentized_residual"],
        },
        "cooks_distance": {
            "value": f_quantile(0.5, p, n - p) if n > p else float("nan"),
            "rule": "D > median of F(p, n − p)",
            "verdict": "influential?",
            "source": THRESHOLD_SOURCES["cooks_distance"],
        },
        "dffits": {
            "value": 2.0 * math.sqrt(p / n),
            "rule": "|DFFITS| > 2·sqrt(p/n)",
            "verdict": "review",
            "source": THRESHOLD_SOURCES["dffits"],
        },
    }


def _influence_measures(x, y, w, degree: int):
    """(h, t, D, DFFITS) from a thin QR of the weighted Chebyshev design."""
    n, p = x.size, degree + 1
    offset, scale = _basis.domain_map(float(x.min()), float(x.max()))
    sw = np.ones_like(y) if w is None else np.sqrt(w)
    a = _basis.chebyshev_vander(_basis.to_window(x, offset, scale), p) * sw[:, None]
    ys = y * sw
    with single_thread_blas():
        q, r = np.linalg.qr(a, mode="reduced")
    if np.abs(np.diag(r)).min() <= 1e3 * n * np.finfo(np.float64).eps * np.abs(np.diag(r)).max():
        raise FitError(f"The design at degree {degree} is numerically rank deficient; use a lower degree.")
    e = ys - q @ (q.T @ ys)  # weighted residuals sqrt(w)·(y − ŷ)
    h = np.einsum("ij,ij->i", q, q)
    rss = float(e @ e)
    if rss <= _rounding_floor(float(ys @ ys), n):  # an exact fit: residual measures would be rounding noise
        nan = np.full(n, np.nan)
        return h, nan, nan.copy(), nan.copy()
    with np.errstate(divide="ignore", invalid="ignore"):
        one_h = 1.0 - h
        s2 = rss / (n - p) if n > p else float("nan")
        s2_i = (rss - e * e / one_h) / (n - p - 1) if n > p + 1 else np.full(n, np.nan)
        t = e / np.sqrt(np.maximum(s2_i, 0.0) * one_h)
        cook = e * e * h / (p * s2 * one_h**2)
        dffits = t * np.sqrt(h / one_h)
    bad = one_h <= 1e-12
    for arr in (t, cook, dffits):
        arr[bad] = np.nan
    return h, t, cook, dffits


def influence(x, y, degree: int | PolynomialFit, *, weights=None, lines=None) -> Influence:
    """Influence of every row on the degree-``degree`` fit, each measure flagged against a stated threshold.

    ``degree`` is a whole number or a PolynomialFit of these rows (its degree is used; the measures are
    computed afresh from the rows). ``lines`` names the rows in the output (for example their line numbers
    in the input file); default 1..n. With weights, the measures are those of the weighted fit (of
    sqrt(w)·y on sqrt(w)·A).
    """
    x, y, w = validate_xyw(x, y, weights)
    if isinstance(degree, PolynomialFit):
        if degree.through_origin:
            raise FitError("Influence measures are computed for fits with a constant term, not through the origin.")
        degree = degree.degree
    degree = int(degree)
    n, p = x.size, degree + 1
    if degree < 0 or np.unique(x).size < p:
        raise FitError(f"Degree {degree} needs at least {p} distinct x values; the data have {np.unique(x).size}.")
    lines = np.arange(1, n + 1) if lines is None else np.asarray(lines).ravel()
    if lines.size != n:
        raise FitError(f"Expected one line number per row; got {lines.size} for {n} rows.")
    h, t, cook, dffits = _influence_measures(x, y, w, degree)
    th = _influence_thresholds(n, p)
    checks = {
        "leverage": h,
        "studentized_residual": np.abs(t),
        "cooks_distance": cook,
        "dffits": np.abs(dffits),
    }
    flags = tuple(tuple(k for k, v in checks.items() if np.isfinite(v[i]) and v[i] > th[k]["value"]) for i in range(n))
    order = ("outlier?", "influential?", "review")
    verdicts = tuple(next((v for v in order if any(th[k]["verdict"] == v for k in f)), "ok") for f in flags)
    return Influence(
        degree=degree,
        n=n,
        p=p,
        weighted=w is not None,
        lines=lines,
        x=x,
        y=y,
        leverage=h,
        studentized_residual=t,
        cooks_distance=cook,
        dffits=dffits,
        flags=flags,
        verdicts=verdicts,
        thresholds=th,
    )


# ----------------------------------------------------------------------------
# verdict stability


@dataclass(frozen=True, eq=False)
class VerdictStability:
    """Share of fold redraws in which each degree would be the cross-validated verdict."""

    degrees: np.ndarray
    counts: np.ndarray
    shares: np.ndarray
    draws: int
    seed: int
    folds: int
    repeats: int
    held_out: str  # "rows", "x levels" or "groups"
    method: str
    mini_blocks: int | None
    modal_degree: int
    modal_share: float
    sentence: str
    notes: tuple[str, ...] = field(default=())

    def share(self, degree: int) -> float:
        hits = np.nonzero(self.degrees == int(degree))[0]
        return float(self.shares[hits[0]]) if hits.size else 0.0

    def to_dict(self) -> dict[str, Any]:
        return {
            "degrees": [int(d) for d in self.degrees],
            "counts": [int(c) for c in self.counts],
            "shares": _nums(self.shares),
            "draws": self.draws,
            "seed": self.seed,
            "folds": self.folds,
            "repeats": self.repeats,
            "held_out": self.held_out,
            "method": self.method,
            "mini_blocks": self.mini_blocks,
            "modal_degree": self.modal_degree,
            "modal_share": _num(self.modal_share),
            "sentence": self.sentence,
            "notes": list(self.notes),
        }


def _pct(s: float) -> str:
    v = round(100 * s)
    if s > 0 and v == 0:
        return "under 1 %"
    if s < 1 and v == 100:
        return "over 99 %"
    return f"{v} %"


def _stability_sentence(degs: np.ndarray, counts: np.ndarray, draws: int) -> str:
    order = [i for i in np.argsort(-counts, kind="stable") if counts[i] > 0]
    head = f"degree {int(degs[order[0]])} in {_pct(counts[order[0]] / draws)} of {draws} redraws of the folds"
    rest = [f"degree {int(degs[i])} in {_pct(counts[i] / draws)}" for i in order[1:4]]
    if len(order) > 4:
        rest.append(f"{len(order) - 4} other degrees in the rest")
    return head + ("; " + ", ".join(rest) if rest else "")


def _groups_of(labels: np.ndarray, k: int) -> list[np.ndarray]:
    """Row indices of each label 0..k-1."""
    order = np.argsort(labels, kind="stable")
    cuts = np.cumsum(np.bincount(labels, minlength=k))[:-1]
    return np.split(order, cuts)


def _splits(folds: int) -> list[Split]:
    return [Split(test=(j,), train=tuple(o for o in range(folds) if o != j)) for j in range(folds)]


def _exact_redraws(t, y, w, units, folds, ncols):
    """A redraw function that deals units to folds and reduces each fold's rows."""
    n_units = int(units.max()) + 1

    def redraw(rng):
        return _fold_blocks(t, y, w, kfold_deal(rng, n_units, folds)[units], folds, ncols)

    return redraw, "exact redraws of the units", None


def _mini_block_redraws(t, y, w, units, folds, ncols, rng):
    """A redraw function that deals pre-reduced mini-blocks to folds and merges their factors."""
    n_units = int(units.max()) + 1
    count = min(folds * max(1, MINI_BLOCKS // folds), n_units)
    member = kfold_deal(rng, n_units, count)[units]
    minis = [block_factor(t[idx], y[idx], ncols, None if w is None else w[idx]) for idx in _groups_of(member, count)]

    def redraw(rng):
        fold = kfold_deal(rng, count, folds)
        return {j: Block.merge(minis[i] for i in np.nonzero(fold == j)[0]) for j in range(folds)}

    return redraw, f"{count} mini-blocks of units reduced once, dealt to folds at each redraw", count


def _carry_cap(x, n_units: int, held_out: str, folds: int) -> tuple[int, str]:
    """The highest degree every training set carries (distinct x - 1), and why, where it can be known in advance.

    Held-out x levels and distinct-valued rows leave at least units - ceil(units / folds) distinct x values
    in training; otherwise the cap is the full data's, and a degree that a training set cannot carry is
    reported as failed by ``sweep_from_blocks`` for that redraw.
    """
    m = int(np.unique(x).size)
    if held_out == "x levels" or (held_out == "rows" and m == x.size):
        left = n_units - math.ceil(n_units / folds)
        return max(left - 1, 0), f"the smallest training set has {left} distinct x values"
    return m - 1, f"the data have {m} distinct x values"


def _redraw_setup(x, y, w, units, folds, degs, rng):
    """(redraw function, method, mini-block count or None, keyword arguments for sweep_from_blocks).

    y is divided by 2**y_exp as the in-memory sweep does (extreme magnitudes), so a redraw's blocks
    equal that sweep's blocks for the same folds.
    """
    ncols = degs[-1] + 1
    lo, hi = float(x.min()), float(x.max())
    offset, scale = _basis.domain_map(lo, hi)
    t = _basis.to_window(x, offset, scale)
    y_exp = pow2_exponent(y)
    ys = np.ldexp(y, -y_exp) if y_exp else y
    common = {
        "ncols": ncols,
        "offset": offset,
        "scale": scale,
        "domain": (lo, hi),
        "y_range": (float(ys.min()), float(ys.max())),
        "scheme": f"{folds}-fold cross-validation, redrawn",
        "y_exp": y_exp,
    }
    if int(units.max()) + 1 <= EXACT_REDRAW_LIMIT:
        return (*_exact_redraws(t, ys, w, units, folds, ncols), common)
    return (*_mini_block_redraws(t, ys, w, units, folds, ncols, rng), common)


def _check_stability_args(draws, seed, folds, repeats, plan: VerdictFolds) -> tuple[int, int, int, int]:
    """Draws, seed, folds and repeats as whole numbers; folds and repeats default to the verdict's."""
    seed = check_seed(seed)
    try:
        draws = int(draws)
        folds = plan.folds if folds is None else int(folds)
        repeats = plan.repeats if repeats in (None, "auto") else int(repeats)
    except (TypeError, ValueError):
        raise FitError("Draws, seed, folds and repeats must be whole numbers.") from None
    if draws < 1 or repeats < 1:
        raise FitError(f"Draws and repeats must be at least 1, not {draws} and {repeats}.")
    if folds < 2:
        raise FitError(f"Cross-validation needs at least 2 folds, not {folds}.")
    if folds > plan.n_units:
        raise FitError(
            f"Cannot make {folds} folds from {plan.n_units} {plan.held_out}; use at most {plan.n_units} folds."
        )
    return draws, seed, folds, repeats


def _one_factor_counts(x, y, w, units, rng, *, draws, repeats, folds, degs, common) -> np.ndarray | None:
    """Verdict counts from one factorisation of all rows (``_redraw``) when every fold is small, else None.

    The redraws are the same partitions, dealt from ``rng`` in the same order, as ``_exact_redraws``.
    """
    from ._redraw import HAT_FOLD_ROWS, full_factor, redraw_verdicts  # here: a fit never needs it

    n_units = int(units.max()) + 1
    sizes = np.sort(np.bincount(units))[::-1]
    if n_units > EXACT_REDRAW_LIMIT or int(sizes[: math.ceil(n_units / folds)].sum()) > HAT_FOLD_ROWS:
        return None
    t = _basis.to_window(x, common["offset"], common["scale"])
    y_exp = common["y_exp"]
    ys = np.ldexp(y, -y_exp) if y_exp else y
    fac = full_factor(t, ys, w, degs)
    if fac is None:
        return None
    labels = kfold_deals(rng, n_units, folds, draws * repeats)[:, units].reshape(draws, repeats, units.size)
    verdicts, clear = redraw_verdicts(fac, labels, folds, degs, common["scheme"], y_exp)
    splits = _splits(folds)
    for i in np.flatnonzero(~clear):  # near ties: decided by the sweep's own arithmetic
        parts = [(_fold_blocks(t, ys, w, lab, folds, common["ncols"]), splits) for lab in labels[i]]
        verdicts[i] = _sweep_verdict(parts, degs, common)
    return np.bincount(np.searchsorted(degs, verdicts), minlength=len(degs)).astype(np.int64)


def _fold_blocks(t, y, w, fold: np.ndarray, folds: int, ncols: int) -> dict[int, Block]:
    """Each fold's rows reduced to its factor, as a sweep reduces them."""
    return {
        j: block_factor(t[idx], y[idx], ncols, None if w is None else w[idx])
        for j, idx in enumerate(_groups_of(fold, folds))
    }


def _sweep_verdict(parts, degs, common) -> int:
    with warnings.catch_warnings():  # a degree that fails in a split is reported by the sweep, not warned
        warnings.simplefilter("ignore", RuntimeWarning)
        return sweep_from_blocks(parts, degs, diagnostics=False, **common).recommended_degree


def _count_verdicts(redraw, rng, *, draws, repeats, folds, degs, common, fixed: bool) -> np.ndarray:
    """How often each degree is the verdict over ``draws`` redraws (one sweep when every redraw is the same)."""
    counts = np.zeros(len(degs), dtype=np.int64)
    splits = _splits(folds)
    for _ in range(1 if fixed else draws):
        parts = [(redraw(rng), splits) for _ in range(repeats)]
        counts[degs.index(_sweep_verdict(parts, degs, common))] += draws if fixed else 1
    return counts


def verdict_stability(
    x,
    y,
    *,
    draws: int = 200,
    seed: int = 0,
    weights=None,
    groups=None,
    degrees=None,
    folds: int | None = None,
    repeats="auto",
    replicates="auto",
    replicate_tolerance: float = 0.0,
) -> VerdictStability:
    """Share of ``draws`` redraws of the folds in which each degree would be recommended.

    The units, folds, repeats and degrees are the verdict's (``fitting.verdict_sweep``, through the
    same ``verdict_folds``): rows dealt to min(10, n) folds, 5 repeats up to 5,000 rows; whole x
    levels (``replicate_levels`` with ``replicate_tolerance``, x units) when x has replicates and
    ``replicates`` is "auto"; each group on its own when ``groups`` are given. ``folds`` and
    ``repeats`` override them. Each redraw deals the units to the folds in equal shares as KFold
    does and applies ``sweep_from_blocks``'s one-standard-error rule. With rows as units (up to
    5,000 of them), the first redraw is the verdict's own folds for the same seed. When every fold
    holds one unit, every redraw is the same partition (up to the order of the folds), so one sweep
    decides them all. See the module docstring for the design.
    """
    x, y, w = validate_xyw(x, y, weights)
    plan = verdict_folds(x, groups=groups, replicates=replicates, replicate_tolerance=replicate_tolerance)
    draws, seed, folds, repeats = _check_stability_args(draws, seed, folds, repeats, plan)
    units, held_out, n_units = plan.units, plan.held_out, plan.n_units
    degs, notes = normalise_degrees(VERDICT_DEGREES if degrees is None else degrees)
    notes += list(plan.notes)
    cap, why = _carry_cap(x, n_units, held_out, folds)
    if degs[-1] > cap:
        notes.append(f"Degrees above {cap} were left out: {why}.")
        degs = [d for d in degs if d <= cap] or [cap]
    rng = np.random.RandomState(seed)
    fixed = folds == n_units
    with single_thread_blas():
        redraw, method, minis, common = _redraw_setup(x, y, w, units, folds, degs, rng)
        counts = None
        if not fixed and minis is None and _ONE_FACTOR:
            kw = dict(draws=draws, repeats=repeats, folds=folds, degs=degs, common=common)
            counts = _one_factor_counts(x, y, w, units, rng, **kw)
        if counts is None:
            counts = _count_verdicts(
                redraw, rng, draws=draws, repeats=repeats, folds=folds, degs=degs, common=common, fixed=fixed
            )
    if fixed:
        method = "one unit per fold: every redraw is the same partition, so one sweep decides them all"
    d = np.asarray(degs, dtype=np.int64)
    imax = int(np.argmax(counts))
    return VerdictStability(
        degrees=d,
        counts=counts,
        shares=counts / draws,
        draws=draws,
        seed=seed,
        folds=folds,
        repeats=repeats,
        held_out=held_out,
        method=method,
        mini_blocks=minis,
        modal_degree=int(d[imax]),
        modal_share=float(counts[imax] / draws),
        sentence=_stability_sentence(d, counts, draws),
        notes=tuple(notes),
    )
