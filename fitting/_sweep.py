"""A degree x fold validation sweep that costs about one fit.

How it works
------------
Rows are split into blocks (one per fold, or train/test for a holdout). Each
block's rows are reduced once to the triangular factor R_b of its augmented,
weighted design [A | y] (Chebyshev basis on a common domain map, all degrees up
to the highest at once). Everything else is done on these small factors:

* Nested degrees share one factor: the leading (d + 1) x (d + 1) block of R
  belongs to degree d, the first d + 1 entries of its last column are Q^T y,
  and the rest of that column holds the residual of degree d.
* A training set's factor is the R of the stacked factors of its blocks (TSQR),
  so no row is touched twice.
* A test block's squared error for coefficients c is ||R_test [-c; 1]||^2, since
  Q is orthogonal: the test error needs no pass over the test rows either.

The results equal a plain refit on every (degree, fold) to rounding error;
tests check this against scikit-learn's KFold and PredefinedSplit. The shuffled folds
and holdouts are scikit-learn's KFold, RepeatedKFold and ShuffleSplit row for row
(``kfold_labels``, ``shuffle_holdout_labels``), made without importing scikit-learn.

Extreme magnitudes: y is divided by an exact power of two before any sum of
squares (``_polyfit.pow2_exponent``) and every reported error is multiplied back.

BLAS runs single-threaded for the duration of ``sweep_degrees`` (see
``_linalg.single_thread_blas``): its LAPACK calls are tall-skinny or tiny, and
multi-threaded BLAS on a loaded machine made a 10-fold sweep 30x slower.
Callers of ``sweep_from_blocks`` and ``block_factor`` may do the same.

Recommendation
--------------
By default the one-standard-error rule: the smallest degree whose mean test
RMSE is within one standard error (across folds) of the minimum. With a
single holdout there is no standard error; the degree with the lowest test
RMSE is recommended instead, and the result says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Iterable

import numpy as np
from numpy.typing import ArrayLike

from . import _basis
from ._errors import FitError
from ._linalg import condition_of, qr_r, single_thread_blas, solve_upper, solve_upper_transposed, t_quantile
from ._polyfit import pow2_exponent, validate_xyw
from ._validate import MAX_DEGREE, MAX_SEED, check_degrees, check_folds, check_holdout, check_repeats, check_seed

__all__ = [
    "DegreeSweep",
    "sweep_degrees",
    "Block",
    "Split",
    "sweep_from_blocks",
    "block_factor",
    "normalise_degrees",
    "cap_degrees",
    "check_holdout_sizes",
    "holdout_fraction",
    "kfold_labels",
    "kfold_deal",
    "kfold_deals",
    "shuffle_holdout_labels",
    "fold_labels",
    "holdout_mask",
    "MAX_DEGREE",
    "MAX_SEED",
]

# thresholds for diagnoses: common practice, no source; chosen for this tool
CONDITION_LIMIT = 1e8  # condition number of the mapped Chebyshev design
OSCILLATION_FACTOR = 0.5  # curve beyond the y range by more than half the range
BAND_INFLATION_LIMIT = 3.0  # confidence band (1 SE) above 3x the residual SD between points
NO_SE_RISE = 0.10  # with no SE, a 10 % rise over the minimum counts as a rise

# the names the streaming sweep imports from here
holdout_fraction = check_holdout
normalise_degrees = check_degrees


@dataclass
class Block:
    """The reduced form of a set of rows: R of [A | y] (weighted) and sums for R²."""

    r: np.ndarray  # (P + 1, P + 1) upper triangular
    n: int
    wsum: float
    wysum: float

    @staticmethod
    def merge(blocks: Iterable[Block]) -> Block:
        blocks = [b for b in blocks if b.n > 0]
        if not blocks:
            raise FitError("A training or test set is empty; use fewer folds or a different split.")
        if len(blocks) == 1:
            return blocks[0]
        r = qr_r(np.vstack([b.r for b in blocks]))
        return Block(
            r=r, n=sum(b.n for b in blocks), wsum=sum(b.wsum for b in blocks), wysum=sum(b.wysum for b in blocks)
        )


@dataclass(frozen=True)
class Split:
    """One train/test split, given as block labels."""

    test: tuple[int, ...]
    train: tuple[int, ...]


def block_factor(t: np.ndarray, y: np.ndarray, ncols: int, w: np.ndarray | None = None) -> Block:
    """Reduce rows (mapped x ``t``, y, weights) to a Block with ``ncols`` basis columns."""
    n = t.shape[0]
    rows = np.empty((ncols + 1, n))
    _basis.chebyshev_rows(t, ncols, out=rows[:ncols])
    rows[ncols] = y
    if w is not None:
        rows *= np.sqrt(w)
        wsum, wysum = float(w.sum()), float(w @ y)
    else:
        wsum, wysum = float(n), float(y.sum())
    if n == 0:
        return Block(r=np.zeros((ncols + 1, ncols + 1)), n=0, wsum=0.0, wysum=0.0)
    return Block(r=qr_r(rows.T), n=n, wsum=wsum, wysum=wysum)


# ----------------------------------------------------------------------------
# the result


@dataclass(frozen=True, eq=False)
class DegreeSweep:
    """Train and test error for every degree, with a recommendation.

    Arrays are indexed like ``degrees``; ``*_folds`` arrays are
    (n_degrees, n_splits). A degree that failed holds NaN and is explained in
    ``failed_degrees``.
    """

    degrees: np.ndarray
    train_rmse: np.ndarray
    test_rmse: np.ndarray
    test_rmse_se: np.ndarray
    train_rmse_folds: np.ndarray
    test_rmse_folds: np.ndarray
    train_r2: np.ndarray
    test_r2: np.ndarray
    aic: np.ndarray
    bic: np.ndarray
    condition_numbers: np.ndarray
    overfit: np.ndarray
    recommended_degree: int
    recommendation_rule: str
    recommendation: str
    min_test_degree: int
    aic_degree: int
    bic_degree: int
    overfitting_from: int | None
    scheme: str
    n_splits: int
    rows_used: int
    n_train_min: int
    warnings: tuple[str, ...]
    degree_warnings: dict[int, tuple[str, ...]]
    failed_degrees: dict[int, str]
    test_mask: np.ndarray | None = None  # single split only: which rows were held out
    domain: tuple[float, float] = (0.0, 1.0)
    # stable form of the display fit for each degree (holdout: its training rows; folds: all rows)
    offset: float = 0.0
    scale: float = 1.0
    display_coefficients: dict[int, np.ndarray] = field(default_factory=dict)
    display_r: np.ndarray | None = None
    display_n: int = 0
    display_domain: tuple[float, float] = (0.0, 1.0)
    # display_r holds y divided by 2**y_exp (extreme magnitudes); every reported number is in y's units
    y_exp: int = 0
    # the rule that chose the verdict, as a sentence (set by ``verdict_sweep``)
    verdict_rule: str = ""

    def index(self, degree: int) -> int:
        hits = np.nonzero(self.degrees == int(degree))[0]
        if hits.size == 0:
            raise FitError(f"Degree {degree} is not in this sweep ({self.degrees.min()}–{self.degrees.max()}).")
        return int(hits[0])

    # -- the display fit ----------------------------------------------------
    def _display_parts(self, degree: int):
        if degree not in self.display_coefficients:
            raise FitError(f"Degree {degree} has no fit in this sweep: {self.failed_degrees.get(degree, 'not swept')}.")
        p = degree + 1
        r = self.display_r[:p, :p]
        rss = float(np.sum(self.display_r[p:, -1] ** 2))
        dof = self.display_n - p
        sd = math.ldexp(math.sqrt(rss / dof), self.y_exp) if dof > 0 else float("nan")
        return self.display_coefficients[degree], r, sd, dof

    def curve(self, degree: int, x: ArrayLike) -> np.ndarray:
        """The display fit of ``degree`` evaluated at x."""
        coef, _, _, _ = self._display_parts(degree)
        return _basis.chebyshev_values(_basis.to_window(x, self.offset, self.scale), coef)

    def band(self, degree: int, x: ArrayLike, kind: str = "confidence", level: float = 0.95, weight=None):
        """(lower, upper) confidence or prediction band of the display fit (double precision).

        ``weight`` (optional, one per x or a scalar): the weight (inverse variance) of a new reading
        at each x, as a named weighting rule gives it (``weight_at``); the prediction band then uses
        the variance s²/w(x0) for the new reading. Without it a new reading has weight 1. A NaN
        weight (the rule is undefined there) gives a NaN band at that x.
        """
        coef, r, sd, dof = self._display_parts(degree)
        x = np.asarray(x, dtype=np.float64)
        t = _basis.to_window(x, self.offset, self.scale)
        yhat = _basis.chebyshev_values(t, coef)
        if dof <= 0:
            nan = np.full_like(yhat, np.nan)
            return nan, nan.copy()
        a = _basis.chebyshev_vander(np.atleast_1d(t), degree + 1)
        u = solve_upper_transposed(r, a.T)
        se = sd * np.sqrt(np.sum(u * u, axis=0))
        if kind == "prediction":
            if weight is not None:
                w = np.asarray(weight, dtype=np.float64)
                with np.errstate(divide="ignore", invalid="ignore"):
                    sd = np.where(np.isfinite(w) & (w > 0), sd / np.sqrt(w), np.nan)
            se = np.hypot(se, sd)  # no square leaves double precision
        elif kind != "confidence":
            raise FitError(f'Interval kind must be "confidence" or "prediction", not {kind!r}.')
        q = t_quantile(level, dof)
        return yhat - q * se, yhat + q * se

    def warnings_for(self, degree: int) -> tuple[str, ...]:
        """Plain-word diagnoses that stand at ``degree``."""
        return self.degree_warnings.get(int(degree), ())

    def to_dict(self) -> dict[str, Any]:
        def arr(a):
            return [None if not np.isfinite(v) else float(v) for v in np.asarray(a, dtype=float)]

        return {
            "degrees": [int(d) for d in self.degrees],
            "train_rmse": arr(self.train_rmse),
            "test_rmse": arr(self.test_rmse),
            "test_rmse_se": None if self.n_splits < 2 else arr(self.test_rmse_se),
            "test_rmse_folds": [arr(row) for row in self.test_rmse_folds],
            "train_r2": arr(self.train_r2),
            "test_r2": arr(self.test_r2),
            "aic": arr(self.aic),
            "bic": arr(self.bic),
            "condition_numbers": arr(self.condition_numbers),
            "recommended_degree": self.recommended_degree,
            "recommendation_rule": self.recommendation_rule,
            "recommendation": self.recommendation,
            "min_test_degree": self.min_test_degree,
            "aic_degree": self.aic_degree,
            "bic_degree": self.bic_degree,
            "overfitting_from": self.overfitting_from,
            "scheme": self.scheme,
            "n_splits": self.n_splits,
            "rows_used": self.rows_used,
            "warnings": list(self.warnings),
            "degree_warnings": {str(k): list(v) for k, v in self.degree_warnings.items()},
            "failed_degrees": {str(k): v for k, v in self.failed_degrees.items()},
            "verdict_rule": self.verdict_rule,
        }


# ----------------------------------------------------------------------------
# splitting


def _partition(x, *, folds, holdout, ordered, repeats, seed):
    """Return (partitions, scheme): each partition is an int label per row (-1: always in
    training) with a list of Splits over those labels.
    """
    if holdout is not None:
        return _holdout_partition(x, holdout, ordered=ordered, repeats=repeats, seed=seed)
    if ordered:
        raise FitError("An ordered split needs a holdout fraction; for folds, leave ordered off.")
    if np.ndim(folds) == 0:
        return _kfold_partition(x.size, folds, repeats=repeats, seed=seed)
    return _label_partition(x.size, folds)


def _holdout_partition(x, holdout, *, ordered, repeats, seed):
    n = x.size
    frac = check_holdout(holdout)
    n_test = int(math.ceil(frac * n))
    check_holdout_sizes(frac, n, n - n_test, n_test)
    one = [Split(test=(1,), train=(0,))]
    if ordered:
        labels = np.zeros(n, dtype=np.int64)
        labels[np.argsort(x, kind="stable")[n - n_test :]] = 1
        scheme = f"ordered holdout: the highest {frac:.0%} of x held out"
        if repeats > 1:
            scheme += " (repeats have no effect on an ordered holdout)"
        return [(labels, one)], scheme
    parts = [(labels, one) for labels in shuffle_holdout_labels(n, n_test, repeats=repeats, seed=seed)]
    scheme = f"{frac:.0%} random holdout (seed {seed}" + (f", {repeats} repeats)" if repeats > 1 else ")")
    return parts, scheme


def check_holdout_sizes(frac: float, n: int, n_train: int, n_test: int) -> None:
    """Raise FitError when a holdout leaves no test row or fewer than 2 training rows (shared with streaming)."""
    if n_test < 1 or n_train < 2:
        raise FitError(
            f"A {frac:.0%} holdout of {n} rows leaves {n_train} for training and {n_test} for testing; "
            "use a different fraction or more data."
        )


def _kfold_partition(n: int, folds, *, repeats, seed):
    k = check_folds(folds, n)
    splits = [Split(test=(j,), train=tuple(o for o in range(k) if o != j)) for j in range(k)]
    parts = [(labels, splits) for labels in kfold_labels(n, k, repeats=repeats, seed=seed)]
    scheme = f"{k}-fold cross-validation (seed {seed}" + (f", {repeats} repeats)" if repeats > 1 else ")")
    return parts, scheme


def kfold_labels(n: int, k: int, *, repeats: int = 1, seed: int = 0) -> list[np.ndarray]:
    """For each repeat, a fold label (0 .. k - 1) per row.

    The same folds as scikit-learn's KFold(n_splits=k, shuffle=True, random_state=seed)
    for one repeat and RepeatedKFold(n_splits=k, n_repeats=repeats, random_state=seed)
    for more: one numpy RandomState(seed) shuffles 0 .. n - 1 once per repeat, and fold j
    takes the next n // k rows of the shuffle (one more for the first n % k folds).
    scikit-learn is not imported, so the command line starts fast.
    """
    rng = np.random.RandomState(seed)
    return [kfold_deal(rng, n, k) for _ in range(int(repeats))]


def kfold_deal(rng: np.random.RandomState, n: int, k: int) -> np.ndarray:
    """One shuffle of ``kfold_labels``: a fold label per item, sizes n // k (+1 for the first n % k folds).

    ``rng.shuffle`` of 0 .. n - 1, then fold j takes the next run of positions, as KFold does.
    Verdict stability deals its units with it, so its first redraw is the verdict's own folds.
    """
    return kfold_deals(rng, n, k, 1)[0]


def kfold_deals(rng: np.random.RandomState, n: int, k: int, count: int) -> np.ndarray:
    """``count`` successive ``kfold_deal`` results, one per row: (count, n) fold labels.

    ``rng.permutation(n)`` is ``rng.shuffle`` of 0 .. n - 1, so the stream of draws is the same.
    """
    sizes = np.full(k, n // k, dtype=np.int64)
    sizes[: n % k] += 1
    dealt = np.repeat(np.arange(k, dtype=np.int64), sizes)
    labels = np.empty((count, n), dtype=np.int64)
    for row in labels:
        row[rng.permutation(n)] = dealt
    return labels


def shuffle_holdout_labels(n: int, n_test: int, *, repeats: int = 1, seed: int = 0) -> list[np.ndarray]:
    """For each repeat, 1 for a held-out row and 0 for a training row.

    The same test rows as scikit-learn's ShuffleSplit(n_splits=repeats, test_size=n_test,
    random_state=seed): one RandomState(seed) draws a permutation per repeat and the
    first n_test rows of it are held out. scikit-learn is not imported.
    """
    rng = np.random.RandomState(seed)
    out = []
    for _ in range(int(repeats)):
        labels = np.zeros(n, dtype=np.int64)
        labels[rng.permutation(n)[:n_test]] = 1
        out.append(labels)
    return out


# the streaming sweep's folds: a splitmix64 hash of the global row index and the seed (see ``_stream``)
_GAMMA = np.uint64(0x9E3779B97F4A7C15)
_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)


def _row_hash(row_index: np.ndarray, seed: int) -> np.ndarray:
    """splitmix64 output number i + 1 for the generator state ``seed``, vectorised (uint64)."""
    idx = np.asarray(row_index)
    if idx.dtype.kind not in "iu":
        raise FitError("Row indices must be whole numbers.")
    if idx.dtype.kind == "i" and idx.size and int(idx.min()) < 0:
        raise FitError("Row indices must be 0 or more.")
    z = idx.astype(np.uint64) + np.uint64(1)
    with np.errstate(over="ignore"):
        z *= _GAMMA
        z += np.uint64(int(seed) & 0xFFFFFFFFFFFFFFFF)
        z ^= z >> np.uint64(30)
        z *= _M1
        z ^= z >> np.uint64(27)
        z *= _M2
        z ^= z >> np.uint64(31)
    return z


def fold_labels(row_index: np.ndarray, k: int, seed: int) -> np.ndarray:
    """Fold label 0 .. k-1 (int64) of each global row index: the splitmix64 hash of the index and seed, mod k.

    Deterministic: the same index and seed always give the same label,
    whatever the chunking. Each fold gets n/k rows in expectation.
    """
    k = check_folds(k, None)  # any number of rows: the hash does not count them
    return (_row_hash(row_index, seed) % np.uint64(k)).astype(np.int64)


def holdout_mask(row_index: np.ndarray, fraction: float, seed: int) -> np.ndarray:
    """True for the rows held out for testing: hash (top 53 bits, as a fraction) below ``fraction``."""
    u = (_row_hash(row_index, seed) >> np.uint64(11)).astype(np.float64) * (1.0 / 9007199254740992.0)
    return u < float(fraction)


def _label_partition(n: int, folds):
    raw = np.asarray(folds).ravel()
    if raw.size != n:
        raise FitError(f"Expected one fold label per row; got {raw.size} labels for {n} rows.")
    if raw.dtype.kind in "iu":
        uniq = np.unique(raw[raw >= 0])
        labels = np.full(n, -1, dtype=np.int64)
        for j, u in enumerate(uniq):
            labels[raw == u] = j
    else:
        uniq, labels = np.unique(raw.astype(str), return_inverse=True)
        labels = labels.astype(np.int64)
    k = uniq.size
    if k < 2:
        raise FitError(
            f"Grouped or predefined folds need at least 2 distinct labels; found {k}. Choose another group column."
        )
    always = (-1,) if (labels == -1).any() else ()
    splits = [Split(test=(j,), train=tuple(o for o in range(k) if o != j) + always) for j in range(k)]
    return [(labels, splits)], f"{k} predefined or grouped folds"


# ----------------------------------------------------------------------------
# the sweep


def sweep_degrees(
    x: ArrayLike,
    y: ArrayLike,
    *,
    degrees: Iterable[int] = range(0, 13),
    folds: int | ArrayLike = 10,
    holdout: float | None = None,
    ordered: bool = False,
    repeats: int = 1,
    seed: int = 0,
    weights: ArrayLike | None = None,
) -> DegreeSweep:
    """Train and test RMSE for every degree, by k-fold cross-validation or holdout.

    Parameters
    ----------
    x, y : array-like of float.
    degrees : iterable of int, default=range(0, 13)
        Degrees above what the training sets can carry are left out, with a warning.
    folds : int or array-like, default=10
        Number of shuffled folds (scikit-learn's KFold with ``shuffle=True`` and
        ``random_state=seed``), or one fold label per row (predefined or grouped
        folds; integer label -1 keeps a row in training, as in PredefinedSplit).
    holdout : float, default=None
        Test fraction for a holdout instead of folds.
    ordered : bool, default=False
        With ``holdout``: hold out the highest x values, to see how each degree extrapolates.
    repeats : int, default=1
        Repeat the shuffled folds or the random holdout with new shuffles.
    seed : int, default=0
        The same seed gives the same split, every time.
    weights : array-like of positive floats, default=None
    """
    with single_thread_blas():
        return _sweep_degrees(
            x,
            y,
            degrees=degrees,
            folds=folds,
            holdout=holdout,
            ordered=ordered,
            repeats=repeats,
            seed=seed,
            weights=weights,
        )


def _sweep_degrees(x, y, *, degrees, folds, holdout, ordered, repeats, seed, weights) -> DegreeSweep:
    x, y, w = validate_xyw(x, y, weights)
    repeats = check_repeats(repeats)
    seed = check_seed(seed)
    degs, notes = check_degrees(degrees)
    parts, scheme = _partition(x, folds=folds, holdout=holdout, ordered=ordered, repeats=repeats, seed=seed)
    # cap the degrees by the distinct x values of the smallest training set
    degs = cap_degrees(degs, _carryable_degree(x, parts), notes)
    ncols = degs[-1] + 1
    offset, scale = _basis.domain_map(float(x.min()), float(x.max()))
    t = _basis.to_window(x, offset, scale)
    y_exp = pow2_exponent(y)  # extreme magnitudes: y / 2**y_exp, exact, undone in every reported number
    ys = np.ldexp(y, -y_exp) if y_exp else y
    partitions = []
    for labels, splits in parts:
        blocks = {}
        for lab in np.unique(labels):
            idx = np.nonzero(labels == lab)[0]
            blocks[int(lab)] = block_factor(t[idx], ys[idx], ncols, None if w is None else w[idx])
        partitions.append((blocks, splits))
    display_block = test_mask = None
    display_domain = (float(x.min()), float(x.max()))
    if holdout is not None:
        blocks0, splits0 = partitions[0]
        display_block = Block.merge(blocks0[b] for b in splits0[0].train)
        test_mask = parts[0][0] == 1
        display_domain = (float(x[~test_mask].min()), float(x[~test_mask].max()))
    return sweep_from_blocks(
        partitions,
        degs,
        ncols=ncols,
        offset=offset,
        scale=scale,
        domain=(float(x.min()), float(x.max())),
        y_range=(float(ys.min()), float(ys.max())),
        scheme=scheme,
        notes=notes,
        single_split_rule=(holdout is not None and repeats == 1) or (holdout is not None and ordered),
        display_block=display_block,
        display_domain=display_domain,
        test_mask=test_mask,
        y_exp=y_exp,
    )


def cap_degrees(degs: list[int], cap: int, notes: list[str]) -> list[int]:
    """Degrees up to ``cap`` (what the smallest training set can carry); a note says what was left out."""
    if degs[-1] <= cap:
        return degs
    dropped = [d for d in degs if d > cap]
    notes.append(
        f"Degrees {_span(dropped)} were left out: the smallest training set has only {cap + 1} distinct x "
        f"values, so degree {cap} is the highest it can carry."
    )
    return [d for d in degs if d <= cap] or [cap]


def _span(ds: list[int]) -> str:
    return f"{ds[0]}" if len(ds) == 1 else f"{ds[0]}–{ds[-1]}"


def _carryable_degree(x: np.ndarray, parts) -> int:
    """Highest degree every training set (and the full data) can carry: distinct x - 1."""
    uniq, inv = np.unique(x, return_inverse=True)
    best = uniq.size - 1
    for labels, splits in parts:
        lab_ids, lab_inv = np.unique(labels, return_inverse=True)
        max_test_rows = max(int(np.isin(labels, s.test).sum()) for s in splits)
        if uniq.size - max_test_rows - 1 >= MAX_DEGREE:
            continue  # cannot bind: plenty of distinct values remain in every training set
        counts = np.zeros((uniq.size, lab_ids.size), dtype=np.int64)
        np.add.at(counts, (inv, lab_inv), 1)
        for s in splits:
            cols = [int(np.searchsorted(lab_ids, b)) for b in s.train if b in lab_ids]
            distinct = int((counts[:, cols].sum(axis=1) > 0).sum())
            best = min(best, distinct - 1)
    return max(best, 0)


def sweep_from_blocks(
    partitions,
    degs: list[int],
    *,
    ncols: int,
    offset: float,
    scale: float,
    domain: tuple[float, float],
    y_range: tuple[float, float],
    scheme: str,
    notes: list[str] | None = None,
    single_split_rule: bool = False,
    display_block: Block | None = None,
    display_domain: tuple[float, float] | None = None,
    test_mask: np.ndarray | None = None,
    y_exp: int = 0,
    diagnostics: bool = True,
) -> DegreeSweep:
    """Everything after the rows have been reduced to Blocks (shared with the streaming path).

    ``partitions`` is a list of (blocks: dict label -> Block, splits: list[Split]).
    When the blocks hold y / 2**y_exp (``y_range`` in the same units), every reported
    error is multiplied back by 2**y_exp.

    ``diagnostics=False`` computes only what the recommendation needs (train and test
    errors, the one-standard-error rule, where overfitting sets in): the full-data factor,
    AIC and BIC, condition numbers, the display fit and its oscillation and band checks are
    skipped. Their fields are then NaN (``aic``, ``bic``, ``condition_numbers``) or empty
    (no display fit, so ``curve`` and ``band`` raise); ``aic_degree`` and ``bic_degree``
    fall back to the recommendation. The default computes everything.
    """
    sc = _score_splits(partitions, degs, ncols, y_exp)
    dlo, dhi = display_domain or domain
    geo = dict(offset=offset, scale=scale, display_domain=(dlo, dhi), y_range=y_range)
    diag = _diagnose(partitions[0][0], display_block, degs, ncols, geo, sc, y_exp, diagnostics)
    rec = _recommend(degs, sc, scheme, single_split_rule)
    deg_notes = diag["notes"]
    overfit, over_from = _overfitting(degs, sc, rec, deg_notes)
    _failed_notes(deg_notes, sc["failed"])
    aic, bic = diag["aic"], diag["bic"]
    aic_deg, bic_deg = _criterion_degree(degs, aic, aic, rec), _criterion_degree(degs, aic, bic, rec)
    return DegreeSweep(
        degrees=np.asarray(degs, dtype=np.int64),
        **_score_fields(sc),
        aic=aic,
        bic=bic,
        condition_numbers=diag["conds"],
        overfit=overfit,
        recommended_degree=rec["degree"],
        recommendation_rule=rec["rule"],
        recommendation=rec["why"][0].upper() + rec["why"][1:] + ".",
        min_test_degree=rec["dmin"],
        aic_degree=aic_deg,
        bic_degree=bic_deg,
        overfitting_from=over_from,
        scheme=scheme,
        n_splits=sc["nspl"],
        rows_used=diag["rows_used"],
        n_train_min=int(sc["n_train_min"] or 0),
        warnings=tuple(notes or []),
        degree_warnings={d: tuple(v) for d, v in deg_notes.items() if v},
        failed_degrees=sc["failed"],
        test_mask=test_mask,
        domain=domain,
        offset=offset,
        scale=scale,
        display_coefficients=diag["disp_coef"],
        display_r=diag["disp_r"],
        display_n=diag["disp_n"],
        display_domain=(dlo, dhi),
        y_exp=y_exp,
    )


def _score_splits(partitions, degs: list[int], ncols: int, y_exp: int = 0) -> dict[str, Any]:
    """Train and test RMSE and R² for every (degree, split), as (n_degrees, n_splits) arrays, and their summary."""
    ndeg = len(degs)
    all_splits = [(blocks, s) for blocks, splits in partitions for s in splits]
    nspl = len(all_splits)
    tr_rmse, te_rmse, tr_r2, te_r2 = (np.full((ndeg, nspl), np.nan) for _ in range(4))
    failed: dict[int, str] = {}
    n_train_min = None
    for j, (blocks, s) in enumerate(all_splits):
        train = Block.merge(blocks[b] for b in s.train if b in blocks)
        test = Block.merge(blocks[b] for b in s.test if b in blocks)
        n_train_min = train.n if n_train_min is None else min(n_train_min, train.n)
        coefs = _train_split(train, degs, ncols, j, failed, (tr_rmse, tr_r2))
        res = test.r @ coefs
        trss = np.sum(res * res, axis=0)
        ok = ~np.isnan(tr_rmse[:, j])
        te_rmse[ok, j] = np.sqrt(trss[ok] / test.wsum)
        tts = _tss(test)
        if tts > 0:
            te_r2[ok, j] = 1.0 - trss[ok] / tts
    # a degree that failed in any split is reported for that degree only
    for d in failed:
        i = degs.index(d)
        tr_rmse[i] = te_rmse[i] = tr_r2[i] = te_r2[i] = np.nan
    out = dict(failed=failed, n_train_min=n_train_min, nspl=nspl)
    with np.errstate(invalid="ignore"):
        # means and SEs in the scaled units (squares stay inside double precision), then scaled back exactly
        test_rmse, se = _test_summary(te_rmse)
        scaled = dict(
            tr_rmse=tr_rmse,
            te_rmse=te_rmse,
            train_rmse=np.nanmean(tr_rmse, axis=1) if nspl else np.full(ndeg, np.nan),
            test_rmse=test_rmse,
            se=se,
        )
        out["train_r2"] = np.mean(tr_r2, axis=1)
        out["test_r2"] = np.nanmean(te_r2, axis=1) if np.isfinite(te_r2).any() else np.full(ndeg, np.nan)
    out.update({k: np.ldexp(v, y_exp) if y_exp else v for k, v in scaled.items()})
    return out


def _test_summary(te_rmse: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Mean test RMSE over the splits (last axis) and its standard error (NaN with a single split)."""
    nspl = te_rmse.shape[-1]
    mean = np.mean(te_rmse, axis=-1)
    se = np.std(te_rmse, axis=-1, ddof=1) / math.sqrt(nspl) if nspl > 1 else np.full(mean.shape, np.nan)
    return mean, se


def recommend_from_test_errors(
    degs: list[int],
    te_rmse: np.ndarray,
    scheme: str,
    y_exp: int = 0,
    error: np.ndarray | None = None,
    maybe_failed: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """The recommended degree of each sweep in a stack of test RMSEs (sweeps, degrees, splits), NaN where failed.

    The summary (mean and standard error over the splits) and the rule (``_decide``, the
    one-standard-error rule with several splits) are those of ``sweep_from_blocks``; verdict
    stability's fast redraws use this instead of building a whole DegreeSweep per redraw.

    ``error`` (sweeps, degrees) bounds the error of every test RMSE of a degree (in the scaled units),
    and ``maybe_failed`` (sweeps, degrees) marks degrees that might instead have failed; the second
    result says, per sweep, whether the decision stands for any values within those bounds, failed or
    not (``_decision_is_clear``); without ``error`` every decision is taken as it stands.
    """
    with np.errstate(invalid="ignore"):
        test_rmse, se = _test_summary(te_rmse)
    nspl, nd = te_rmse.shape[-1], te_rmse.shape[1]
    # without error bounds a sweep with no validated degree raises, as in sweep_from_blocks
    decidable = np.isfinite(test_rmse).any(axis=1) if error is not None else np.ones(len(test_rmse), dtype=bool)
    k = np.flatnonzero(decidable)
    out = np.full(len(test_rmse), degs[0], dtype=np.int64)  # a sweep with nothing to decide by: not clear
    if k.size == 0:
        return out, decidable
    irec, imin, _ = _decide(np.ldexp(test_rmse[k], y_exp), np.ldexp(se[k], y_exp), nspl, False)
    out[k] = np.asarray(degs, dtype=np.int64)[irec]
    clear = decidable.copy()
    if error is not None:
        ok = _decision_is_clear(test_rmse[k], se[k], error[k], irec, imin)
        if maybe_failed is not None:  # a degree up to the verdict, or the minimum, might have failed instead
            mf = maybe_failed[k]
            ok &= ~((mf & (np.arange(nd)[None, :] <= irec[:, None])).any(axis=1) | mf[np.arange(k.size), imin])
        clear[k] = ok
    return out, clear


def _decision_is_clear(mean, se, err, irec: np.ndarray, imin: np.ndarray) -> np.ndarray:
    """Per sweep (rows), True when the one-standard-error rule picks the same degree for every mean test RMSE
    within ``err`` of ``mean`` (each split's RMSE within ``err``, so the SE within 2 ``err``): the minimum is
    clear of the other degrees, every lower degree clear of the limit (minimum + SE) and the recommended
    degree clear inside it.
    """
    rows, cols = np.arange(mean.shape[0]), np.arange(mean.shape[1])[None, :]
    finite = np.isfinite(mean)
    m_min, e_min = mean[rows, imin], err[rows, imin]
    with np.errstate(invalid="ignore"):
        rival = ((mean - err <= (m_min + e_min)[:, None]) & finite & (cols != imin[:, None])).any(axis=1)
        limit, slack = m_min + se[rows, imin], 3.0 * e_min
        near = ((mean - err <= (limit + slack)[:, None]) & finite & (cols < irec[:, None])).any(axis=1)
        outside = (irec != imin) & ~(mean[rows, irec] + err[rows, irec] < limit - slack)
    return ~(rival | near | outside)


def _failed_notes(deg_notes: dict[int, list[str]], failed: dict[int, str]) -> None:
    for d, msg in failed.items():
        deg_notes[d].insert(0, f"degree {d}: could not be validated: {msg}.")


def _criterion_degree(degs: list[int], aic: np.ndarray, crit: np.ndarray, rec: dict[str, Any]) -> int:
    """The degree with the lowest criterion (where AIC is finite), or the recommendation when none is."""
    finite_aic = np.isfinite(aic)
    return degs[int(np.nanargmin(np.where(finite_aic, crit, np.inf)))] if finite_aic.any() else rec["degree"]


def _score_fields(sc: dict[str, Any]) -> dict[str, np.ndarray]:
    """The DegreeSweep fields that come straight from the scores."""
    return dict(
        train_rmse=sc["train_rmse"],
        test_rmse=sc["test_rmse"],
        test_rmse_se=sc["se"],
        train_rmse_folds=sc["tr_rmse"],
        test_rmse_folds=sc["te_rmse"],
        train_r2=sc["train_r2"],
        test_r2=sc["test_r2"],
    )


def _train_split(train: Block, degs: list[int], ncols: int, j: int, failed: dict[int, str], into) -> np.ndarray:
    """Coefficients (as columns [-c; 1]) of every degree on one training set; fills train RMSE and R² column j."""
    tr_rmse, tr_r2 = into
    eps = np.finfo(np.float64).eps
    rt = train.r
    rinv = _triangular_inverse(rt[:ncols, :ncols])
    dg = np.abs(np.diag(rt))[:ncols]
    # smallest and largest |R_ii| of every leading block, and the squared residual column, once per split
    dg_lo, dg_hi = np.minimum.accumulate(dg), np.maximum.accumulate(dg)
    sq = rt[:, ncols] ** 2
    coefs = np.zeros((ncols + 1, len(degs)))
    coefs[ncols] = 1.0
    tss = _tss(train)
    for i, d in enumerate(degs):
        p = d + 1
        if dg_lo[d] <= 1e3 * max(train.n, p) * eps * dg_hi[d]:
            failed.setdefault(d, f"the training set of split {j + 1} is rank deficient at degree {d}")
            continue
        # the inverse of a leading block of a triangular matrix is the leading block of its inverse
        coefs[:p, i] = -(rinv[:p, :p] @ rt[:p, ncols])
        rss = float(np.add.reduce(sq[p:]))
        tr_rmse[i, j] = math.sqrt(max(rss, 0.0) / train.wsum)
        tr_r2[i, j] = 1.0 - rss / tss if tss > 0 else np.nan
    return coefs


def _diagnose(blocks, display_block, degs, ncols, geometry, sc, y_exp, diagnostics: bool) -> dict[str, Any]:
    """The full-data diagnostics, the display factor and the rows used; only the rows used when skipped."""
    if not diagnostics:
        nan = np.full(len(degs), np.nan)
        rows = sum(b.n for b in blocks.values())
        notes: dict[int, list[str]] = {d: [] for d in degs}
        return dict(
            aic=nan, bic=nan.copy(), conds=nan.copy(), notes=notes, disp_coef={}, rows_used=rows, disp_r=None, disp_n=0
        )
    full = Block.merge(blocks.values())
    disp = display_block if display_block is not None else full
    diag = _full_data_diagnostics(full, disp, degs, ncols, geometry, sc["failed"], sc["n_train_min"], y_exp)
    return dict(diag, rows_used=full.n, disp_r=disp.r, disp_n=disp.n)


def _full_data_diagnostics(full, disp, degs, ncols, geometry, failed, n_train_min, y_exp=0) -> dict[str, Any]:
    """AIC and BIC on the full data, conditioning, and the display fit's oscillation and band checks."""
    ndeg, n = len(degs), full.n
    aic, bic, conds = (np.full(ndeg, np.nan) for _ in range(3))
    deg_notes: dict[int, list[str]] = {d: [] for d in degs}
    disp_coef: dict[int, np.ndarray] = {}
    grid = np.linspace(*geometry["display_domain"], 801)
    grid_t = _basis.to_window(grid, geometry["offset"], geometry["scale"])
    grid_a = _basis.chebyshev_vander(grid_t, ncols)
    disp_inv = _triangular_inverse(disp.r[:ncols, :ncols]) if np.abs(np.diag(disp.r))[:ncols].min() > 0 else None
    for i, d in enumerate(degs):
        p = d + 1
        conds[i] = condition_of(full.r[:p, :p])
        rss = float(np.sum(full.r[p:, ncols] ** 2))
        if rss > 0 and n > 0:
            # log of the RSS in y's units: log(rss / wsum) + 2 y_exp log 2
            loglik = n * (math.log(rss / full.wsum) + 2 * y_exp * math.log(2.0))
            aic[i] = loglik + 2 * p
            bic[i] = loglik + p * math.log(n)
        if d in failed or disp_inv is None:
            continue
        ri = disp_inv[:p, :p]
        c = ri @ disp.r[:p, ncols]
        disp_coef[d] = np.ldexp(c, y_exp) if y_exp else c
        if conds[i] > CONDITION_LIMIT:
            deg_notes[d].append(
                f"degree {d}: the fit is ill-conditioned (condition number {conds[i]:.2g} even after mapping x to "
                "[-1, 1]); its coefficients are poorly determined."
            )
        _oscillation_note(deg_notes[d], d, _basis.chebyshev_values(grid_t, c), grid, geometry["y_range"])
        if disp.n - p > 0:
            u = ri.T @ grid_a[:, :p].T
            inflation = float(np.sqrt(np.max(np.sum(u * u, axis=0))))
            if inflation > BAND_INFLATION_LIMIT:
                deg_notes[d].append(
                    f"degree {d}: the uncertainty of the curve explodes between data points (its standard error "
                    f"reaches {_ratio(inflation, 1.0)} the residual scatter)."
                )
        if n_train_min is not None and d >= n_train_min - 1:
            deg_notes[d].append(
                f"degree {d}: the curve has as many coefficients as the smallest training set has rows "
                f"({n_train_min}), so it interpolates the points; training error means nothing here."
            )
    return dict(aic=aic, bic=bic, conds=conds, notes=deg_notes, disp_coef=disp_coef)


def _oscillation_note(notes: list[str], d: int, curve: np.ndarray, grid: np.ndarray, y_range) -> None:
    ylo, yhi = y_range
    yspan = (yhi - ylo) if yhi > ylo else 1.0
    over = max(float(curve.max()) - yhi, ylo - float(curve.min()), 0.0)
    if over > OSCILLATION_FACTOR * yspan:
        where = float(grid[int(np.argmax(np.maximum(curve - yhi, ylo - curve)))])
        notes.append(
            f"degree {d}: between data points the curve swings {_ratio(over, yspan)} the data's y range beyond it "
            f"(near x = {where:.4g}), a sign of oscillation."
        )


def _decide(test_rmse: np.ndarray, se: np.ndarray, nspl: int, single_split_rule: bool):
    """(index of the recommended degree, index of the lowest mean test RMSE, whether the rule used the SE).

    The one rule: the smallest degree whose mean test RMSE is within one standard error of the lowest
    (one-standard-error rule); with a single split, or no SE, the lowest test RMSE itself. ``test_rmse``
    and ``se`` are one sweep's (degrees,), giving whole numbers, or a stack (sweeps, degrees), giving arrays.
    """
    t2, s2 = np.atleast_2d(test_rmse), np.atleast_2d(se)
    finite = np.isfinite(t2)
    if not finite.any(axis=1).all():
        raise FitError("No degree could be validated; check the data for duplicated x values or use fewer folds.")
    rows = np.arange(t2.shape[0])
    imin = np.argmin(np.where(finite, t2, np.inf), axis=1)
    by_se = (nspl > 1) & np.isfinite(s2[rows, imin]) & (not single_split_rule)
    with np.errstate(invalid="ignore"):
        within = finite & (t2 <= (t2[rows, imin] + s2[rows, imin])[:, None])
    irec = np.where(by_se, np.argmax(within, axis=1), imin)
    if np.ndim(test_rmse) == 1:
        return int(irec[0]), int(imin[0]), bool(by_se[0])
    return irec, imin, by_se


def _recommend(degs: list[int], sc: dict[str, Any], scheme: str, single_split_rule: bool) -> dict[str, Any]:
    """The recommended degree (``_decide``), its rule and the sentence that explains it."""
    test_rmse, se, nspl = sc["test_rmse"], sc["se"], sc["nspl"]
    irec, imin, by_se = _decide(test_rmse, se, nspl, single_split_rule)
    dmin = degs[imin]
    if by_se:
        rule = "one-standard-error"
        why = (
            f"degree {degs[irec]} is the smallest degree whose mean test RMSE ({test_rmse[irec]:.4g}) is within one "
            f"standard error ({se[imin]:.2g}) of the minimum ({test_rmse[imin]:.4g} at degree {dmin}), "
            f"by {scheme}"
        )
        if irec == imin:
            why = (
                f"degree {dmin} has the lowest mean test RMSE ({test_rmse[imin]:.4g}, standard error {se[imin]:.2g}) "
                f"and no smaller degree comes within one standard error of it, by {scheme}"
            )
    else:
        rule = "minimum-test-error"
        why = (
            f"degree {dmin} has the lowest test RMSE ({test_rmse[imin]:.4g}) on a single {scheme}; "
            "a single split has no standard error, so this choice is noisy. Prefer k-fold cross-validation"
        )
    has_se = nspl > 1 and bool(np.isfinite(se[imin]))
    finite = np.isfinite(test_rmse)
    return dict(degree=degs[irec], rule=rule, why=why, imin=imin, dmin=dmin, has_se=has_se, finite=finite)


def _overfitting(degs: list[int], sc: dict[str, Any], rec: dict[str, Any], deg_notes) -> tuple[np.ndarray, int | None]:
    """Where overfitting sets in, and which degrees are overfit.

    Overfitting sets in at the lowest degree above the minimum whose test error exceeds
    the minimum by more than its SE while training error keeps falling; every higher
    degree is judged overfit from there on.
    """
    test_rmse, train_rmse = sc["test_rmse"], sc["train_rmse"]
    imin, dmin, finite = rec["imin"], rec["dmin"], rec["finite"]
    ndeg = len(degs)
    overfit = np.zeros(ndeg, dtype=bool)
    margin = sc["se"][imin] if rec["has_se"] else NO_SE_RISE * test_rmse[imin]
    rises = np.array(
        [
            i > imin
            and bool(finite[i])
            and test_rmse[i] > test_rmse[imin] + margin
            and train_rmse[i] < train_rmse[imin]
            for i in range(ndeg)
        ]
    )
    over_from = degs[int(np.argmax(rises))] if rises.any() else None
    if over_from is None:
        return overfit, None
    for i in range(degs.index(over_from), ndeg):
        if not finite[i]:
            continue
        overfit[i] = True
        ratio = _ratio(test_rmse[i], test_rmse[imin])
        if rises[i]:
            msg = (
                f"degree {degs[i]}: test error is {ratio} its minimum (degree {dmin}) while training error "
                "keeps falling — the curve is chasing noise."
            )
        else:
            msg = (
                f"degree {degs[i]}: past degree {over_from}, where overfitting sets in; its test error "
                f"({ratio} the minimum at degree {dmin}) is no better, so the extra terms fit noise."
            )
        deg_notes[degs[i]].insert(0, msg)
    return overfit, over_from


def _ratio(num: float, den: float) -> str:
    """num / den for a sentence: 3.4×, 42×, 4.2e+08×; "many times" when the minimum ``den`` is 0 (an exact fit)."""
    if not den > 0:
        return "many times"
    r = num / den
    if r < 10:
        return f"{r:.1f}×"
    if r < 10_000:
        return f"{r:.0f}×"
    return f"{r:.2g}×"


def _triangular_inverse(r: np.ndarray) -> np.ndarray:
    """Inverse of an upper-triangular matrix (inf/nan where singular, checked by callers).

    Fortran-ordered, as LAPACK returns it: the products that read its leading blocks then add in the
    same order as they always have (a C-ordered copy of the same numbers rounds differently there).
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        return np.asfortranarray(solve_upper(r, np.eye(r.shape[0])))


def _tss(b: Block) -> float:
    """Weighted total sum of squares about the mean, from the factor (no cancellation)."""
    if b.n == 0 or b.wsum <= 0:
        return float("nan")
    m = b.wysum / b.wsum
    # T_0 = 1 is the first column, so [A | y] @ (-m e_0 + e_last) = y - m
    v = b.r[:, -1] - m * b.r[:, 0]
    return float(v @ v)
