"""Degree sweeps over files too large to hold in memory: CSV or Parquet, chunk by chunk.

How it works
------------
The in-memory sweep (``_sweep``) reduces each fold's rows to the triangular
factor R of its augmented design [A | y] and does everything else on those
small factors. This module builds the same factors without ever holding more
than one chunk of rows:

1. The domain map t = (x - offset) / scale needs the range of x first: from a
   Parquet source's row-group statistics, or from a fast scan of a CSV's two
   columns (row count, dropped rows, ranges; about one parse of the file). The
   map is exact, so the factors equal those of the in-memory path to rounding.
   When the statistics are missing, or wider than the rows used, a scan or a
   second pass is made (``_run_passes``; ``info["passes"]`` says how many).
2. Each chunk's rows get a fold label from a hash of their global row index
   and the seed (``fold_labels``), so no row count is needed up front and the
   split does not depend on the chunk size. Each label's rows are reduced to a
   ``Block`` and merged into that label's running factor by TSQR,
   ``qr_r(vstack([R_old, R_chunk]))``.
3. ``sweep_from_blocks`` turns the per-label factors into the ``DegreeSweep``
   of the in-memory path.

With ``engine="dask"`` the per-label factors of each Parquet row group, or
each byte range of a CSV, are computed on a ``dask.distributed`` cluster (a
local one on 127.0.0.1 by default) and merged on the client the same way
(``_dask.py``).

Folds
-----
Row i (0-based, counted over the data rows the parser yields, in file order;
files of a folder or glob in sorted path order) goes to fold
``splitmix64(seed + (i + 1) * 0x9E3779B97F4A7C15) mod k``; with a holdout it
is held out when the top 53 bits of that hash, as a fraction of 2**53, fall
below the holdout fraction. The same seed gives the same split on every run,
engine and chunk size. These folds are *not* the shuffles of scikit-learn's
KFold that the in-memory sweep uses, so a streamed sweep and an in-memory
sweep with the same seed differ by the luck of the split; given the same
labels (``sweep_degrees(x, y, folds=fold_labels(...))``) they agree to
rounding. The folds are balanced only in expectation (each holds n/k rows
give or take about sqrt(n/k)).

Extreme magnitudes
------------------
As in the in-memory sweep, y beyond 2**±100 is divided by an exact power of two
(``_polyfit.pow2_exponent`` of the largest |y|, known from the scan) before any
sum of squares, and every reported error is multiplied back (``y_exp`` of
``sweep_from_blocks``).

Dropped rows
------------
A row is dropped (and counted in ``info["rows_dropped"]``) when x or y is
missing, not a number or infinite, or when the CSV line has the wrong number of
fields. A dropped row keeps its row index when the parser yields it, so the
folds of the other rows do not move.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from . import _basis
from ._errors import ColumnError, FitError
from ._linalg import qr_r, single_thread_blas
from ._polyfit import pow2_exponent
from ._sweep import (
    Block,
    DegreeSweep,
    Split,
    block_factor,
    cap_degrees,
    check_holdout_sizes,
    fold_labels,
    holdout_mask,
    sweep_from_blocks,
)
from ._validate import MAX_DEGREE, check_degrees, check_folds, check_holdout, check_seed
from .intake import FileSource, NeedsText, parquet_x_range, pick_source_columns, resolve_source, source_chunks

__all__ = ["sweep_source", "fold_labels", "holdout_mask"]

#: a label whose rows hold more distinct x values than this cannot limit the degree
_DISTINCT_LIMIT = MAX_DEGREE + 1

Progress = Callable[[int, "int | None"], None]


# ----------------------------------------------------------------------------
# folds from a hash of the row index (``_sweep.fold_labels`` and ``_sweep.holdout_mask``)


@dataclass(frozen=True)
class _Labeller:
    """How rows get labels: k hashed folds, or a hashed holdout (label 1 = test)."""

    kind: str  # "folds" or "holdout"
    k: int
    fraction: float
    seed: int

    @property
    def n_labels(self) -> int:
        return self.k if self.kind == "folds" else 2

    def labels(self, row_index: np.ndarray) -> np.ndarray:
        if self.kind == "folds":
            return fold_labels(row_index, self.k, self.seed)
        return holdout_mask(row_index, self.fraction, self.seed).astype(np.int64)


def _make_labeller(folds, holdout, seed) -> _Labeller:
    """The split settings, checked as the in-memory sweep checks them (``_validate``)."""
    seed = check_seed(seed)
    if holdout is not None:
        return _Labeller("holdout", 2, check_holdout(holdout), seed)
    if isinstance(folds, bool) or np.ndim(folds) != 0:
        raise FitError("For a file source, folds must be a whole number; fold labels per row need the in-memory sweep.")
    # the rows are not counted yet: ``_splits`` checks the folds against them after the pass
    return _Labeller("folds", check_folds(folds, None), 0.0, seed)


# ----------------------------------------------------------------------------
# reducing chunks to per-label factors


@dataclass
class _Stats:
    """What a pass learns besides the factors (mergeable; all plain numbers)."""

    rows_read: int = 0  # rows the parser yielded (each has a row index)
    rows_skipped: int = 0  # lines the parser could not split into the right fields
    rows_used: int = 0
    xmin: float = math.inf
    xmax: float = -math.inf
    ymin: float = math.inf
    ymax: float = -math.inf
    label_xmin: dict = field(default_factory=dict)
    label_xmax: dict = field(default_factory=dict)
    distinct: dict = field(default_factory=dict)  # label -> sorted distinct x (None once above the limit)

    def merge(self, other: _Stats) -> None:
        self.rows_read += other.rows_read
        self.rows_skipped += other.rows_skipped
        self.rows_used += other.rows_used
        self.xmin, self.xmax = min(self.xmin, other.xmin), max(self.xmax, other.xmax)
        self.ymin, self.ymax = min(self.ymin, other.ymin), max(self.ymax, other.ymax)
        for lab, v in other.label_xmin.items():
            self.label_xmin[lab] = min(self.label_xmin.get(lab, math.inf), v)
        for lab, v in other.label_xmax.items():
            self.label_xmax[lab] = max(self.label_xmax.get(lab, -math.inf), v)
        for lab, v in other.distinct.items():
            self.distinct[lab] = _union_distinct(self.distinct.get(lab, np.empty(0)), v)


def _union_distinct(a, b):
    if a is None or b is None:
        return None
    u = np.union1d(a, b)
    return None if u.size > _DISTINCT_LIMIT else u


@dataclass(frozen=True)
class _Plan:
    """Everything a worker needs to reduce a chunk (picklable)."""

    ncols: int
    offset: float
    scale: float
    labeller: _Labeller
    y_exp: int = 0  # the blocks hold y / 2**y_exp (extreme magnitudes, as ``_polyfit.pow2_exponent``)


def _clean(xa: np.ndarray, ya: np.ndarray, start: int):
    ok = np.isfinite(xa) & np.isfinite(ya)
    idx = np.arange(start, start + xa.shape[0], dtype=np.int64)
    if not ok.all():
        xa, ya, idx = xa[ok], ya[ok], idx[ok]
    return xa, ya, idx


def _scan_chunk(xa: np.ndarray, ya: np.ndarray, invalid: int, stats: _Stats) -> None:
    """Count rows and take ranges (first pass: no factors)."""
    stats.rows_read += xa.shape[0]
    stats.rows_skipped += invalid
    ok = np.isfinite(xa) & np.isfinite(ya)
    used = int(ok.sum())
    stats.rows_used += used
    if used:
        _take_ranges(stats, xa[ok], ya[ok])


def _take_ranges(stats: _Stats, xs: np.ndarray, ys: np.ndarray) -> None:
    stats.xmin, stats.xmax = min(stats.xmin, float(xs.min())), max(stats.xmax, float(xs.max()))
    stats.ymin, stats.ymax = min(stats.ymin, float(ys.min())), max(stats.ymax, float(ys.max()))


def _reduce_chunk(
    xa: np.ndarray, ya: np.ndarray, start: int, invalid: int, plan: _Plan, blocks: dict, stats: _Stats
) -> None:
    """Fold one chunk into the running per-label factors ``blocks`` and the ``stats``."""
    n_read = xa.shape[0]
    stats.rows_read += n_read
    stats.rows_skipped += invalid
    xa, ya, idx = _clean(xa, ya, start)
    n = xa.shape[0]
    if n == 0:
        return
    stats.rows_used += n
    _take_ranges(stats, xa, ya)
    labels = plan.labeller.labels(idx)
    nl = plan.labeller.n_labels
    small = labels.astype(np.uint16) if nl < 65536 else labels
    order = np.argsort(small, kind="stable")
    counts = np.bincount(labels, minlength=nl)
    xs, ys = xa[order], ya[order]
    if plan.y_exp:
        ys = np.ldexp(ys, -plan.y_exp)  # exact; stats keep y's own units
    t = _basis.to_window(xs, plan.offset, plan.scale)
    ends = np.cumsum(counts)
    begin = 0
    for lab in range(nl):
        end = int(ends[lab])
        if end == begin:
            continue
        xl = xs[begin:end]
        new = block_factor(t[begin:end], ys[begin:end], plan.ncols)
        old = blocks.get(lab)
        blocks[lab] = new if old is None else Block.merge([old, new])
        stats.label_xmin[lab] = min(stats.label_xmin.get(lab, math.inf), float(xl.min()))
        stats.label_xmax[lab] = max(stats.label_xmax.get(lab, -math.inf), float(xl.max()))
        have = stats.distinct.get(lab, np.empty(0))
        if have is not None:
            stats.distinct[lab] = _union_distinct(have, np.unique(xl))
        begin = end


def _merge_blocks(into: dict, other: dict) -> None:
    for lab, b in other.items():
        into[lab] = b if lab not in into else Block.merge([into[lab], b])


def _shrink(b: Block, p: int, ncols: int) -> Block:
    """Factor of [A_p | y] (first p basis columns) from the factor of [A | y]: re-triangularise."""
    cols = list(range(p)) + [ncols]
    return Block(r=qr_r(b.r[:, cols].copy()), n=b.n, wsum=b.wsum, wysum=b.wysum)


# ----------------------------------------------------------------------------
# the public function


def sweep_source(
    source,
    *,
    x=None,
    y=None,
    degrees=range(0, 13),
    folds=10,
    holdout=None,
    seed=0,
    engine="numpy",
    scheduler=None,
    chunk_rows=1_000_000,
    progress: Progress | None = None,
) -> tuple[DegreeSweep, dict]:
    """Degree sweep of a CSV or Parquet source that need not fit in memory.

    Parameters
    ----------
    source : str or path
        A CSV file (``#`` comment lines and blank lines before the header are
        skipped), a Parquet file, a folder of Parquet files, or a glob pattern
        of Parquet files.
    x, y : str or int, default=None
        Column names (or positions). By default the first two numeric columns.
    degrees : iterable of int, default=range(0, 13)
    folds : int, default=10
        Number of folds, assigned by a hash of the row index and ``seed`` (see
        ``fold_labels``; not the in-memory KFold shuffle).
    holdout : float, default=None
        Test fraction for a single holdout instead of folds.
    seed : int, default=0
        The same seed gives the same split, every time and on every engine.
    engine : {"numpy", "dask"}, default="numpy"
        ``"dask"`` computes the per-partition factors with dask.distributed
        (``pip install ".[dask]"``).
    scheduler : str or distributed.Client, default=None
        With ``engine="dask"``: a scheduler address (``"tcp://host:8786"``) or a
        Client. None starts a two-worker local cluster inside this process that
        listens on no network port and is closed at the end. Workers of a
        remote cluster must see ``source`` at the same path.
    chunk_rows : int, default=1_000_000
        Rows reduced at a time (numpy engine); memory grows with it, results do not change.
    progress : callable, default=None
        Called as ``progress(rows_done, rows_total)`` after each chunk. While
        a CSV is first scanned the total is not known yet and the calls are
        ``progress(rows_scanned, None)``; the fitting pass then counts from 0
        again with the total known.

    Returns
    -------
    (DegreeSweep, dict)
        The dict holds ``rows_used``, ``rows_dropped``, ``rows_read``,
        ``chunks`` (numpy) or ``partitions`` (dask), ``passes``, ``engine``,
        ``seconds``, ``format``, ``files``, ``x`` and ``y``.
    """
    started = time.perf_counter()
    labeller = _make_labeller(folds, holdout, seed)
    degs, notes = check_degrees(degrees)
    try:
        chunk_rows = int(chunk_rows)
    except (TypeError, ValueError):
        raise FitError(f"chunk_rows must be a whole number, not {chunk_rows!r}.") from None
    if chunk_rows < 1:
        raise FitError(f"chunk_rows must be at least 1, not {chunk_rows}.")
    if engine not in ("numpy", "dask"):
        raise FitError(f'The engine must be "numpy" or "dask", not {engine!r}.')
    if progress is not None and not callable(progress):
        raise FitError("progress must be a function of (rows_done, rows_total), or None.")

    src = resolve_source(source)
    xname, yname = pick_source_columns(src, x, y)
    ncols = degs[-1] + 1
    with single_thread_blas():
        if engine == "dask":
            from ._dask import run_dask  # dask is optional: imported only when asked for

            blocks, stats, info = run_dask(src, xname, yname, ncols, labeller, scheduler, progress)
        else:
            blocks, stats, info = _run_numpy(src, xname, yname, ncols, labeller, chunk_rows, progress)

    geometry = (info["offset"], info["scale"], info["y_exp"])
    result = _finish(blocks, stats, degs, ncols, labeller, geometry, notes, (xname, yname))
    rows_dropped = stats.rows_read - stats.rows_used + stats.rows_skipped
    out = {
        "rows_used": stats.rows_used,
        "rows_dropped": rows_dropped,
        "rows_read": stats.rows_read + stats.rows_skipped,
        "engine": engine,
        "passes": info["passes"],
        "format": src.kind,
        "files": len(src.paths),
        "x": xname,
        "y": yname,
        "seconds": time.perf_counter() - started,
    }
    out["partitions" if engine == "dask" else "chunks"] = info["pieces"]
    return result, out


def _no_rows_error(xname: str, yname: str) -> ColumnError:
    return ColumnError(
        f"The columns {xname!r} and {yname!r} hold no rows where both are finite numbers; choose other columns."
    )


def _finish(blocks, stats, degs, ncols, labeller, geometry, notes, names) -> DegreeSweep:
    """The DegreeSweep of the per-label factors: splits, the distinct-x degree cap, the statistics.

    ``geometry`` is (offset, scale, y_exp) of the blocks; y's range is handed on in the blocks' units.
    """
    offset, scale, y_exp = geometry
    if stats.rows_used == 0:
        raise _no_rows_error(*names)
    if stats.xmax <= stats.xmin:
        raise FitError("x has fewer than two distinct values; a curve needs at least two. Choose another x column.")
    splits, scheme = _splits(blocks, stats, labeller, notes)
    present = sorted(blocks)
    cap = _distinct_cap(stats, [present] + [s.train for s in splits])
    if degs[-1] > cap:
        degs = cap_degrees(degs, cap, notes)
        p = degs[-1] + 1
        blocks = {lab: _shrink(b, p, ncols) for lab, b in blocks.items()}
        ncols = p
    display_block = None
    display_domain = (stats.xmin, stats.xmax)
    if labeller.kind == "holdout":
        display_block = blocks[0]
        display_domain = (stats.label_xmin[0], stats.label_xmax[0])
    return sweep_from_blocks(
        [(blocks, splits)],
        degs,
        ncols=ncols,
        offset=offset,
        scale=scale,
        domain=(stats.xmin, stats.xmax),
        y_range=(math.ldexp(stats.ymin, -y_exp), math.ldexp(stats.ymax, -y_exp)),
        scheme=scheme,
        notes=notes,
        single_split_rule=labeller.kind == "holdout",
        display_block=display_block,
        display_domain=display_domain,
        test_mask=None,
        y_exp=y_exp,
    )


def _splits(blocks, stats, labeller, notes) -> tuple[list[Split], str]:
    """The train/test splits over the labels that received rows, and the scheme's wording."""
    present = sorted(blocks)
    if labeller.kind == "folds":
        check_folds(labeller.k, stats.rows_used)
        if len(present) < 2:
            raise FitError("Fewer than 2 folds received rows; use fewer folds or more data.")
        empty = [lab for lab in range(labeller.k) if lab not in blocks]
        if empty:
            notes.append(
                f"{len(empty)} of {labeller.k} folds received no rows and were left out; "
                f"use fewer folds for so few rows."
            )
        splits = [Split(test=(j,), train=tuple(o for o in present if o != j)) for j in present]
        return splits, f"{labeller.k}-fold cross-validation by row hash (seed {labeller.seed})"
    n_train, n_test = (blocks[lab].n if lab in blocks else 0 for lab in (0, 1))
    check_holdout_sizes(labeller.fraction, stats.rows_used, n_train, n_test)
    return [Split(test=(1,), train=(0,))], f"{labeller.fraction:.0%} holdout by row hash (seed {labeller.seed})"


def _distinct_cap(stats, label_sets) -> int:
    """The highest degree every training set (and all rows) can carry: distinct x values - 1."""

    cap = MAX_DEGREE
    for labels in label_sets:
        u = np.empty(0)
        for lab in labels:
            u = _union_distinct(u, stats.distinct.get(lab, np.empty(0)))
            if u is None:
                break
        if u is not None:
            cap = min(cap, u.size - 1)
    return max(cap, 0)


# ----------------------------------------------------------------------------
# the pass loop both engines share: fix the x range, then reduce until it holds


def _run_passes(engine, src: FileSource, x: str, y: str, ncols: int, labeller: _Labeller):
    """Scan for the x and y ranges (or take Parquet statistics), then reduce; redo when a range moved.

    ``engine.scan(as_text)`` returns the merged scan statistics, or None when a column
    holds text and must be read as strings; ``engine.reduce(plan, as_text, total)``
    returns (per-label blocks, statistics, pieces). The x range fixes the domain map and
    the y range the power of two y is divided by (``_y_exponent``); Parquet statistics give
    only x, so a y beyond 2**±100 there costs a second pass.
    """
    passes = 0
    as_text = False
    y_exp = 0
    rng = parquet_x_range(src, x, y) if src.kind == "parquet" else None
    if rng is not None:
        total, lo, hi = rng
    else:
        scan = None
        while scan is None:
            passes += 1
            scan = engine.scan(as_text)
            as_text = as_text or scan is None
        if scan.rows_used == 0:
            raise _no_rows_error(x, y)
        total, lo, hi, y_exp = scan.rows_read, scan.xmin, scan.xmax, _y_exponent(scan)
    while True:
        passes += 1
        offset, scale = _basis.domain_map(lo, hi)
        blocks, stats, pieces = engine.reduce(_Plan(ncols, offset, scale, labeller, y_exp), as_text, total)
        if stats.rows_used and ((stats.xmin, stats.xmax) != (lo, hi) or _y_exponent(stats) != y_exp):
            # the statistics covered rows that were dropped, or y needs another scale: redo with the exact ones
            lo, hi, y_exp = stats.xmin, stats.xmax, _y_exponent(stats)
            if hi > lo:
                continue
        break
    return blocks, stats, {"offset": offset, "scale": scale, "y_exp": y_exp, "passes": passes, "pieces": pieces}


def _y_exponent(stats: _Stats) -> int:
    """The power of two the in-memory sweep divides these rows' y by (``pow2_exponent`` of max |y|)."""
    return pow2_exponent(np.array([stats.ymin, stats.ymax])) if stats.rows_used else 0


# ----------------------------------------------------------------------------
# the numpy engine: one process, chunk by chunk


@dataclass
class _NumpyPasses:
    src: FileSource
    x: str
    y: str
    chunk_rows: int
    progress: Progress | None

    def scan(self, as_text: bool) -> _Stats | None:
        scan = _Stats()
        try:
            for xa, ya, invalid in source_chunks(self.src, self.x, self.y, max(self.chunk_rows, 1 << 20), as_text):
                _scan_chunk(xa, ya, invalid, scan)
                if self.progress is not None:
                    self.progress(scan.rows_read, None)
        except NeedsText:
            return None
        return scan

    def reduce(self, plan: _Plan, as_text: bool, total):
        blocks: dict = {}
        stats = _Stats()
        pieces = start = 0
        for xa, ya, invalid in source_chunks(self.src, self.x, self.y, self.chunk_rows, as_text):
            _reduce_chunk(xa, ya, start, invalid, plan, blocks, stats)
            start += xa.shape[0]
            pieces += 1
            if self.progress is not None:
                self.progress(stats.rows_read, total)
        return blocks, stats, pieces


def _run_numpy(src, x, y, ncols, labeller, chunk_rows, progress):
    return _run_passes(_NumpyPasses(src, x, y, chunk_rows, progress), src, x, y, ncols, labeller)
