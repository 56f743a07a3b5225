"""Degree sweeps over files too large to hold in memory: CSV or Parquet, chunk by chunk.

How it works
------------
The in-memory sweep (``_sweep``) reduces each fold's rows to the triangular
factor R of its augmented design [A | y] and does everything else on those
small factors. This module builds the same factors without ever holding more
than one chunk of rows:

1. The domain map t = (x - offset) / scale needs the range of x first. A
   Parquet source gives it from its row-group statistics; a CSV is read twice,
   a fast scan of the two columns (row count, dropped rows, ranges) and then
   the fitting pass. The scan costs about as much as parsing the file once,
   and keeps the map exact, so the factors equal those of the in-memory path
   to rounding. (When Parquet statistics are missing, or turn out wider than
   the rows actually used because the extreme rows were dropped, a scan or a
   second pass with the exact map is made; ``info["passes"]`` says how many.)
2. Each chunk's rows get a fold label from a hash of their global row index
   and the seed (``fold_labels``), so no row count is needed up front and the
   split does not depend on the chunk size. Each label's rows are reduced to a
   ``Block`` and merged into that label's running factor by TSQR,
   ``qr_r(vstack([R_old, R_chunk]))``.
3. ``sweep_from_blocks`` turns the per-label factors into the ``DegreeSweep``
   of the in-memory path.

With ``engine="dask"`` the per-label factors of each Parquet row group, or
each byte range of a CSV, are computed on a ``dask.distributed`` cluster (a
local one on 127.0.0.1 by default) and merged on the client the same way.

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

Dropped rows
------------
A row is dropped (and counted in ``info["rows_dropped"]``) when x or y is
missing, not a number or infinite, or when the CSV line has the wrong number of
fields. A dropped row keeps its row index when the parser yields it, so the
folds of the other rows do not move.
"""

from __future__ import annotations

import glob as _glob
import io
import math
import os
import time
from dataclasses import dataclass, field
from typing import Callable, Iterator

import numpy as np

from . import _basis
from ._errors import ColumnError, DegreescopeError, FitError, IntakeError
from ._polyfit import qr_r
from ._sweep import (
    MAX_DEGREE,
    Block,
    DegreeSweep,
    Split,
    block_factor,
    cap_degrees,
    holdout_fraction,
    normalise_degrees,
    sweep_from_blocks,
)

__all__ = ["sweep_source", "fold_labels", "holdout_mask"]

_GAMMA = np.uint64(0x9E3779B97F4A7C15)
_M1 = np.uint64(0xBF58476D1CE4E5B9)
_M2 = np.uint64(0x94D049BB133111EB)
_PARQUET_SUFFIXES = (".parquet", ".parq", ".pq")
#: a label whose rows hold more distinct x values than this cannot limit the degree
_DISTINCT_LIMIT = MAX_DEGREE + 1
#: bytes per CSV block handed to the dask workers
_DASK_CSV_BLOCK = 32 << 20
#: how long to wait for a remote dask scheduler
_CONNECT_TIMEOUT = "20s"

Progress = Callable[[int, "int | None"], None]


# ----------------------------------------------------------------------------
# folds from a hash of the row index


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
    try:
        k = int(k)
    except (TypeError, ValueError):
        raise FitError(f"Folds must be a whole number, not {k!r}.") from None
    if k < 2:
        raise FitError(f"Cross-validation needs at least 2 folds, not {k}; 5 or 10 are common.")
    return (_row_hash(row_index, seed) % np.uint64(k)).astype(np.int64)


def holdout_mask(row_index: np.ndarray, fraction: float, seed: int) -> np.ndarray:
    """True for the rows held out for testing: hash (top 53 bits, as a fraction) below ``fraction``."""
    u = (_row_hash(row_index, seed) >> np.uint64(11)).astype(np.float64) * (1.0 / 9007199254740992.0)
    return u < float(fraction)


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
    try:
        seed = int(seed)
    except (TypeError, ValueError):
        raise FitError(f"The seed must be a whole number, not {seed!r}.") from None
    if holdout is not None:
        return _Labeller("holdout", 2, holdout_fraction(holdout), seed)
    if isinstance(folds, bool) or np.ndim(folds) != 0:
        raise FitError("For a file source, folds must be a whole number; fold labels per row need the in-memory sweep.")
    try:
        k = int(folds)
    except (TypeError, ValueError):
        raise FitError(f"Folds must be a whole number, not {folds!r}.") from None
    if k < 2:
        raise FitError(f"Cross-validation needs at least 2 folds, not {k}; 5 or 10 are common.")
    return _Labeller("folds", k, 0.0, seed)


# ----------------------------------------------------------------------------
# the source: which files, which format, which columns


@dataclass
class _Source:
    kind: str  # "csv" or "parquet"
    paths: list[str]
    names: list[str]  # all column names
    numeric: list[str]  # names of the numeric columns (as inferred or stored)
    skip_rows: int = 0  # CSV: lines before the header
    data_offset: int = 0  # CSV: byte offset of the first data line


def _is_parquet_file(path: str) -> bool:
    if path.lower().endswith(_PARQUET_SUFFIXES):
        return True
    try:
        with open(path, "rb") as fh:
            return fh.read(4) == b"PAR1"
    except OSError:
        return False


def _resolve(source) -> _Source:
    if isinstance(source, (list, tuple)):
        raise IntakeError("Give one CSV file, one Parquet file, a folder or a glob pattern, not a list.")
    try:
        src = os.fspath(source)
    except TypeError:
        raise IntakeError(
            f"The source must be a file path, folder or glob pattern, not {type(source).__name__}."
        ) from None
    if os.path.isdir(src):
        paths = sorted(
            p
            for p in _glob.glob(os.path.join(src, "**", "*"), recursive=True)
            if os.path.isfile(p) and p.lower().endswith(_PARQUET_SUFFIXES)
        )
        if not paths:
            raise IntakeError(
                f"The folder {src} holds no Parquet files (*.parquet); point at a file or another folder."
            )
        return _parquet_source(paths)
    if os.path.isfile(src):
        if _is_parquet_file(src):
            return _parquet_source([src])
        return _csv_source(src)
    if _glob.has_magic(src):
        paths = sorted(p for p in _glob.glob(src, recursive=True) if os.path.isfile(p))
        if not paths:
            raise IntakeError(f"No files match the pattern {src}; check the pattern.")
        if not all(_is_parquet_file(p) for p in paths):
            raise IntakeError(f"A pattern must match Parquet files only; {src} also matches other files.")
        return _parquet_source(paths)
    raise IntakeError(f"There is no file or folder at {src}; check the path.")


def _parquet_source(paths: list[str]) -> _Source:
    import pyarrow as pa
    import pyarrow.parquet as pq

    schema = None
    for p in paths:
        try:
            s = pq.read_schema(p)
        except (pa.ArrowException, OSError) as exc:
            raise IntakeError(f"{p} cannot be read as Parquet ({_first_line(exc)}).") from None
        if schema is None:
            schema = s
        elif s.names != schema.names:
            raise IntakeError(
                f"{p} has other columns than {paths[0]}; a folder or pattern must hold files of one layout."
            )
    numeric = [f.name for f in schema if pa.types.is_integer(f.type) or pa.types.is_floating(f.type)]
    return _Source("parquet", paths, list(schema.names), numeric)


def _csv_header(path: str) -> tuple[int, int]:
    """(lines to skip, byte offset of the header line): skips ``#`` comment lines and blank lines."""
    skip = 0
    offset = 0
    with open(path, "rb") as fh:
        for raw in fh:
            text = raw.decode("utf-8", errors="replace")
            if skip == 0:
                text = text.lstrip("\ufeff")
            if text.strip() == "" or text.lstrip().startswith("#"):
                skip += 1
                offset += len(raw)
                if skip > 10_000:
                    break
                continue
            return skip, offset
    raise IntakeError(f"{path} has no header line and no data; load a file with a header row and data rows.")


def _refuse_binary_head(path: str) -> None:
    """The in-memory reader's binary checks, on the first 64 KiB: a spreadsheet, image or NUL-filled
    file is refused at once instead of being scanned for a header line."""
    from ._intake import _SIGNATURES, _binary_error

    with open(path, "rb") as fh:
        head = fh.read(1 << 16)
    name = os.path.basename(path) or path
    for sig, what in _SIGNATURES:
        if head.startswith(sig):
            raise _binary_error(name, what)
    if b"\x00" in head:
        raise _binary_error(name, "it contains NUL bytes")


def _csv_source(path: str) -> _Source:
    import pyarrow as pa
    import pyarrow.csv as pcsv

    _refuse_binary_head(path)
    skip, offset = _csv_header(path)
    try:
        reader = pcsv.open_csv(
            path,
            read_options=pcsv.ReadOptions(skip_rows=skip, block_size=1 << 20),
            parse_options=pcsv.ParseOptions(invalid_row_handler=_skip_invalid_row),
        )
        schema = reader.schema
        try:
            first = reader.read_next_batch()
        except StopIteration:
            first = None
        reader.close()
    except (pa.ArrowException, OSError, UnicodeDecodeError) as exc:
        raise IntakeError(f"{path} cannot be read as CSV ({_first_line(exc)}).") from None
    numeric = []
    for f in schema:
        if pa.types.is_integer(f.type) or pa.types.is_floating(f.type):
            numeric.append(f.name)
        elif pa.types.is_string(f.type) and first is not None:
            # a number column with a few bad cells reads as text: call it numeric when most cells are numbers
            col = first.column(f.name).drop_null()
            if len(col):
                parsed = np.isfinite(_as_float(col)).mean()
                if parsed >= 0.5:
                    numeric.append(f.name)
    with open(path, "rb") as fh:
        fh.seek(offset)
        header = fh.readline()
    return _Source("csv", [path], list(schema.names), numeric, skip_rows=skip, data_offset=offset + len(header))


def _skip_invalid_row(row) -> str:
    """pyarrow invalid-row handler: drop lines with the wrong number of fields."""
    return "skip"


def _pick_columns(src: _Source, x, y) -> tuple[str, str]:
    def check(name, what):
        if isinstance(name, int) and not isinstance(name, bool):
            if not 0 <= name < len(src.names):
                raise ColumnError(
                    f"There is no column number {name} for {what}; the file has {len(src.names)} columns."
                )
            return src.names[name]
        if name not in src.names:
            shown = ", ".join(repr(n) for n in src.names[:12])
            raise ColumnError(f"There is no column {name!r} for {what}; the columns are {shown}.")
        return name

    if x is None or y is None:
        free = [c for c in src.numeric if c not in (x, y)]
        if x is None:
            if not free:
                raise ColumnError("The file has no numeric column left for x; name the x column.")
            x = free.pop(0)
        if y is None:
            if not free:
                raise ColumnError("The file has fewer than two numeric columns; name the x and y columns.")
            y = free.pop(0)
    x, y = check(x, "x"), check(y, "y")
    if x == y:
        raise ColumnError(f"x and y are both {x!r}; choose two different columns.")
    return x, y


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return (text[0] if text else type(exc).__name__).rstrip(".")


# ----------------------------------------------------------------------------
# reading chunks: (x float64, y float64, rows the parser skipped)


def _as_float(arr) -> np.ndarray:
    """A pyarrow array as float64 (nulls and unparseable text become NaN)."""
    import pyarrow as pa

    if pa.types.is_integer(arr.type) or pa.types.is_floating(arr.type) or pa.types.is_decimal(arr.type):
        return np.asarray(arr.cast(pa.float64()).to_numpy(zero_copy_only=False), dtype=np.float64)
    if pa.types.is_null(arr.type):
        return np.full(len(arr), np.nan)
    import pandas as pd

    return pd.to_numeric(pd.Series(arr.to_numpy(zero_copy_only=False)), errors="coerce").to_numpy(
        dtype=np.float64, na_value=np.nan
    )


class _Counter:
    def __init__(self):
        self.invalid = 0

    def __call__(self, row) -> str:
        self.invalid += 1
        return "skip"


def _csv_chunks(
    src: _Source, x: str, y: str, chunk_rows: int, as_text: bool
) -> Iterator[tuple[np.ndarray, np.ndarray, int]]:
    import pyarrow as pa
    import pyarrow.csv as pcsv

    path = src.paths[0]
    block = int(min(max(chunk_rows * 24, 1 << 16), 64 << 20))
    kind = pa.string() if as_text else pa.float64()
    counter = _Counter()
    try:
        reader = pcsv.open_csv(
            path,
            read_options=pcsv.ReadOptions(skip_rows=src.skip_rows, block_size=block),
            parse_options=pcsv.ParseOptions(invalid_row_handler=counter),
            convert_options=pcsv.ConvertOptions(include_columns=[x, y], column_types={x: kind, y: kind}),
        )
        seen = 0
        for batch in reader:
            new_invalid = counter.invalid - seen
            seen = counter.invalid
            yield _as_float(batch.column(x)), _as_float(batch.column(y)), new_invalid
    except pa.ArrowInvalid as exc:
        if not as_text and "conversion error" in str(exc).lower():
            raise _NeedsText() from None
        raise IntakeError(f"{path} cannot be read as CSV ({_first_line(exc)}).") from None
    except (pa.ArrowException, OSError) as exc:
        raise IntakeError(f"{path} cannot be read as CSV ({_first_line(exc)}).") from None


class _NeedsText(Exception):
    """A column holds text; read it as strings and convert per value."""


def _parquet_chunks(src: _Source, x: str, y: str, chunk_rows: int) -> Iterator[tuple[np.ndarray, np.ndarray, int]]:
    import pyarrow as pa
    import pyarrow.parquet as pq

    for p in src.paths:
        try:
            pf = pq.ParquetFile(p)
            for batch in pf.iter_batches(batch_size=max(int(chunk_rows), 1), columns=[x, y], use_threads=True):
                yield _as_float(batch.column(x)), _as_float(batch.column(y)), 0
        except (pa.ArrowException, OSError) as exc:
            raise IntakeError(f"{p} cannot be read as Parquet ({_first_line(exc)}).") from None


def _rechunk(chunks, chunk_rows: int):
    """Re-cut a stream of (x, y, invalid) into pieces of at most ``chunk_rows`` rows."""
    for xa, ya, invalid in chunks:
        n = xa.shape[0]
        if n <= chunk_rows:
            yield xa, ya, invalid
            continue
        for a in range(0, n, chunk_rows):
            yield xa[a : a + chunk_rows], ya[a : a + chunk_rows], invalid if a == 0 else 0


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
        xs, ys = xa[ok], ya[ok]
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
    stats.xmin, stats.xmax = min(stats.xmin, float(xa.min())), max(stats.xmax, float(xa.max()))
    stats.ymin, stats.ymax = min(stats.ymin, float(ya.min())), max(stats.ymax, float(ya.max()))
    labels = plan.labeller.labels(idx)
    nl = plan.labeller.n_labels
    small = labels.astype(np.uint16) if nl < 65536 else labels
    order = np.argsort(small, kind="stable")
    counts = np.bincount(labels, minlength=nl)
    xs, ys = xa[order], ya[order]
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
    degs, notes = normalise_degrees(degrees)
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

    src = _resolve(source)
    xname, yname = _pick_columns(src, x, y)
    ncols = degs[-1] + 1
    with _one_blas_thread():
        if engine == "dask":
            blocks, stats, info = _run_dask(src, xname, yname, ncols, labeller, scheduler, progress)
        else:
            blocks, stats, info = _run_numpy(src, xname, yname, ncols, labeller, chunk_rows, progress)

    result = _finish(blocks, stats, degs, ncols, labeller, info["offset"], info["scale"], notes, xname, yname)
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


def _one_blas_thread():
    """Run BLAS/LAPACK on one thread while reducing chunks.

    The QR of a tall, 14-column chunk gains almost nothing from BLAS threads,
    and their spinning competes with pyarrow's parser threads and any other
    work on the machine: on 2 busy cores the 10M-row sweep took 5.3 s with the
    default threads and 2.5 s with one. threadpoolctl comes with scikit-learn.
    """
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - scikit-learn depends on it
        import contextlib

        return contextlib.nullcontext()
    return threadpool_limits(limits=1, user_api="blas")


def _finish(blocks, stats, degs, ncols, labeller, offset, scale, notes, xname, yname) -> DegreeSweep:
    if stats.rows_used == 0:
        raise ColumnError(
            f"The columns {xname!r} and {yname!r} hold no rows where both are finite numbers; choose other columns."
        )
    if stats.xmax <= stats.xmin:
        raise FitError("x has fewer than two distinct values; a curve needs at least two. Choose another x column.")
    present = sorted(blocks)
    if labeller.kind == "folds":
        if labeller.k > stats.rows_used:
            raise FitError(
                f"Cannot make {labeller.k} folds from {stats.rows_used} rows; use at most {stats.rows_used} folds (10 is common)."
            )
        if len(present) < 2:
            raise FitError("Fewer than 2 folds received rows; use fewer folds or more data.")
        empty = [lab for lab in range(labeller.k) if lab not in blocks]
        if empty:
            notes.append(
                f"{len(empty)} of {labeller.k} folds received no rows and were left out; use fewer folds for so few rows."
            )
        splits = [Split(test=(j,), train=tuple(o for o in present if o != j)) for j in present]
        scheme = f"{labeller.k}-fold cross-validation by row hash (seed {labeller.seed})"
    else:
        n_test = blocks[1].n if 1 in blocks else 0
        n_train = blocks[0].n if 0 in blocks else 0
        if n_test < 1 or n_train < 2:
            raise FitError(
                f"A {labeller.fraction:.0%} holdout of {stats.rows_used} rows leaves {n_train} for training and "
                f"{n_test} for testing; use a different fraction or more data."
            )
        splits = [Split(test=(1,), train=(0,))]
        scheme = f"{labeller.fraction:.0%} holdout by row hash (seed {labeller.seed})"

    # cap the degrees by the distinct x values of the smallest training set (as the in-memory sweep does)
    def distinct_of(labels):
        u = np.empty(0)
        for lab in labels:
            u = _union_distinct(u, stats.distinct.get(lab, np.empty(0)))
            if u is None:
                return None
        return u.size

    cap = MAX_DEGREE
    for lab_set in [present] + [s.train for s in splits]:
        d = distinct_of(lab_set)
        if d is not None:
            cap = min(cap, d - 1)
    cap = max(cap, 0)
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
        y_range=(stats.ymin, stats.ymax),
        scheme=scheme,
        notes=notes,
        single_split_rule=labeller.kind == "holdout",
        display_block=display_block,
        display_domain=display_domain,
        test_mask=None,
    )


# ----------------------------------------------------------------------------
# the numpy engine: one process, chunk by chunk


def _chunks(src: _Source, x, y, chunk_rows, as_text):
    if src.kind == "csv":
        return _rechunk(_csv_chunks(src, x, y, chunk_rows, as_text), chunk_rows)
    return _rechunk(_parquet_chunks(src, x, y, chunk_rows), chunk_rows)


def _parquet_range(src: _Source, x: str, y: str):
    """(rows, lo, hi) of x from row-group statistics, or None when they cannot be trusted."""
    import pyarrow.parquet as pq

    total, lo, hi = 0, math.inf, -math.inf
    for p in src.paths:
        md = pq.ParquetFile(p).metadata
        names = [md.schema.column(i).name for i in range(md.num_columns)]
        if x not in names or y not in names:
            return None
        ix = names.index(x)
        for g in range(md.num_row_groups):
            rg = md.row_group(g)
            total += rg.num_rows
            if rg.num_rows == 0:
                continue
            st = rg.column(ix).statistics
            if st is None or not st.has_min_max:
                return None
            try:
                a, b = float(st.min), float(st.max)
            except (TypeError, ValueError):
                return None
            if not (math.isfinite(a) and math.isfinite(b)):
                return None
            lo, hi = min(lo, a), max(hi, b)
    if total == 0 or not hi > lo:
        return None
    return total, lo, hi


def _run_numpy(src, x, y, ncols, labeller, chunk_rows, progress):
    passes = 0
    as_text = False
    total = None
    rng = _parquet_range(src, x, y) if src.kind == "parquet" else None
    if rng is not None:
        total, lo, hi = rng
    else:
        while True:
            scan = _Stats()
            passes += 1
            try:
                for xa, ya, invalid in _chunks(src, x, y, max(chunk_rows, 1 << 20), as_text):
                    _scan_chunk(xa, ya, invalid, scan)
                    if progress is not None:
                        progress(scan.rows_read, None)
            except _NeedsText:
                as_text = True
                continue
            break
        if scan.rows_used == 0:
            raise ColumnError(
                f"The columns {x!r} and {y!r} hold no rows where both are finite numbers; choose other columns."
            )
        total, lo, hi = scan.rows_read, scan.xmin, scan.xmax
    while True:
        offset, scale = _basis.domain_map(lo, hi)
        plan = _Plan(ncols, offset, scale, labeller)
        blocks: dict = {}
        stats = _Stats()
        pieces = 0
        passes += 1
        start = 0
        for xa, ya, invalid in _chunks(src, x, y, chunk_rows, as_text):
            _reduce_chunk(xa, ya, start, invalid, plan, blocks, stats)
            start += xa.shape[0]
            pieces += 1
            if progress is not None:
                progress(stats.rows_read, total)
        if stats.rows_used and (stats.xmin, stats.xmax) != (lo, hi):
            # the statistics covered rows that were dropped: redo with the exact map
            lo, hi = stats.xmin, stats.xmax
            if hi > lo:
                continue
        break
    return blocks, stats, {"offset": offset, "scale": scale, "passes": passes, "pieces": pieces}


# ----------------------------------------------------------------------------
# the dask engine: one task per Parquet row group or CSV byte range


def _dask_client(scheduler):
    try:
        import distributed
    except ImportError:
        raise FitError('The dask engine needs dask and distributed; install them with pip install ".[dask]".') from None
    if scheduler is None:
        # Workers are threads of this process and talk to the scheduler in memory
        # (inproc://); the only sockets are the small HTTP status servers, which
        # distributed always starts: bind them to loopback on free ports, or they
        # would take 0.0.0.0 and port 8787.
        cluster = distributed.LocalCluster(
            n_workers=2,
            threads_per_worker=1,
            processes=False,
            dashboard_address="127.0.0.1:0",
            worker_dashboard_address="127.0.0.1:0",
        )
        client = distributed.Client(cluster, set_as_default=False)
        return client, [client, cluster]
    if isinstance(scheduler, distributed.Client):
        return scheduler, []
    if isinstance(scheduler, str):
        try:
            client = distributed.Client(scheduler, set_as_default=False, timeout=_CONNECT_TIMEOUT)
        except (OSError, TimeoutError) as exc:
            raise FitError(
                f"Cannot reach the dask scheduler at {scheduler} ({_first_line(exc)}); check the address."
            ) from None
        return client, [client]
    raise FitError(
        f"The scheduler must be an address such as tcp://host:8786 or a distributed.Client, not {scheduler!r}."
    )


def _csv_ranges(src: _Source, block: int) -> list[tuple[int, int]]:
    """Byte ranges of the data lines, each ending at a line end (quoted line breaks are not supported)."""
    path = src.paths[0]
    size = os.path.getsize(path)
    cuts = [src.data_offset]
    with open(path, "rb") as fh:
        pos = src.data_offset + block
        while pos < size:
            fh.seek(pos)
            fh.readline()
            nxt = fh.tell()
            if nxt >= size:
                break
            cuts.append(nxt)
            pos = nxt + block
    cuts.append(size)
    return [(a, b) for a, b in zip(cuts[:-1], cuts[1:], strict=False) if b > a]


def _read_piece(kind: str, path: str, part, x: str, y: str, names: list[str], as_text: bool):
    """The (x, y, invalid) arrays of one partition: a Parquet row group or a CSV byte range."""
    import pyarrow as pa

    if kind == "parquet":
        import pyarrow.parquet as pq

        try:
            table = pq.ParquetFile(path).read_row_group(int(part), columns=[x, y])
        except (pa.ArrowException, OSError) as exc:
            raise IntakeError(f"{path} cannot be read as Parquet ({_first_line(exc)}).") from None
        return _as_float(table.column(x).combine_chunks()), _as_float(table.column(y).combine_chunks()), 0
    import pyarrow.csv as pcsv

    a, b = part
    with open(path, "rb") as fh:
        fh.seek(a)
        data = fh.read(b - a)
    counter = _Counter()
    ktype = pa.string() if as_text else pa.float64()
    try:
        table = pcsv.read_csv(
            io.BytesIO(data),
            read_options=pcsv.ReadOptions(
                column_names=names, block_size=max(len(data) + 1, 1 << 16), use_threads=False
            ),
            parse_options=pcsv.ParseOptions(invalid_row_handler=counter),
            convert_options=pcsv.ConvertOptions(include_columns=[x, y], column_types={x: ktype, y: ktype}),
        )
    except pa.ArrowInvalid as exc:
        if not as_text and "conversion error" in str(exc).lower():
            raise _NeedsText() from None
        raise IntakeError(f"{path} cannot be read as CSV ({_first_line(exc)}).") from None
    return _as_float(table.column(x).combine_chunks()), _as_float(table.column(y).combine_chunks()), counter.invalid


def _dask_scan_task(kind, path, part, x, y, names, as_text):
    try:
        xa, ya, invalid = _read_piece(kind, path, part, x, y, names, as_text)
    except _NeedsText:
        return "text"
    s = _Stats()
    _scan_chunk(xa, ya, invalid, s)
    return s


def _dask_reduce_task(kind, path, part, start, x, y, names, as_text, plan):
    xa, ya, invalid = _read_piece(kind, path, part, x, y, names, as_text)
    blocks: dict = {}
    stats = _Stats()
    _reduce_chunk(xa, ya, int(start), invalid, plan, blocks, stats)
    return blocks, stats


def _run_dask(src, x, y, ncols, labeller, scheduler, progress):
    import pyarrow.parquet as pq

    client, to_close = _dask_client(scheduler)
    try:
        if src.kind == "parquet":
            pieces = []
            for p in src.paths:
                md = pq.ParquetFile(p).metadata
                pieces += [(p, g, md.row_group(g).num_rows) for g in range(md.num_row_groups)]
        else:
            pieces = [(src.paths[0], r, None) for r in _csv_ranges(src, _DASK_CSV_BLOCK)]
        passes = 0
        as_text = False
        rng = _parquet_range(src, x, y) if src.kind == "parquet" else None
        counts = [n for _, _, n in pieces]
        if rng is not None:
            total, lo, hi = rng
        else:
            while True:
                passes += 1
                futs = [
                    client.submit(_dask_scan_task, src.kind, p, part, x, y, src.names, as_text, pure=False)
                    for p, part, _ in pieces
                ]
                scans = client.gather(futs)
                if any(isinstance(s, str) for s in scans):
                    as_text = True
                    continue
                break
            scan = _Stats()
            for s in scans:
                scan.merge(s)
            if scan.rows_used == 0:
                raise ColumnError(
                    f"The columns {x!r} and {y!r} hold no rows where both are finite numbers; choose other columns."
                )
            counts = [s.rows_read for s in scans]
            total, lo, hi = scan.rows_read, scan.xmin, scan.xmax
        starts = np.concatenate([[0], np.cumsum(counts)[:-1]]).astype(np.int64)
        import distributed

        while True:
            passes += 1
            offset, scale = _basis.domain_map(lo, hi)
            plan = _Plan(ncols, offset, scale, labeller)
            futs = [
                client.submit(_dask_reduce_task, src.kind, p, part, int(s0), x, y, src.names, as_text, plan, pure=False)
                for (p, part, _), s0 in zip(pieces, starts, strict=False)
            ]
            blocks: dict = {}
            stats = _Stats()
            for fut in distributed.as_completed(futs, loop=client.loop):
                b, s = fut.result()
                _merge_blocks(blocks, b)
                stats.merge(s)
                if progress is not None:
                    progress(stats.rows_read, total)
            if stats.rows_used and (stats.xmin, stats.xmax) != (lo, hi):
                lo, hi = stats.xmin, stats.xmax
                if hi > lo:
                    continue
            break
        return blocks, stats, {"offset": offset, "scale": scale, "passes": passes, "pieces": len(pieces)}
    except DegreescopeError:
        raise
    except Exception as exc:  # a worker or scheduler failure: one sentence, with its first line
        raise FitError(
            f"The dask computation failed ({_first_line(exc)}); check the cluster and the source path."
        ) from None
    finally:
        for obj in to_close:
            obj.close()
