"""File sources of the streaming sweep: which files, which columns, and their rows chunk by chunk.

A CSV source is read by Arrow's streaming CSV reader with plain rules (``#`` comment
and blank lines before one header line; every later line one row) and refused at once
when its first bytes are binary, by the same checks as ``read_table``. Parquet sources
are a file, a folder of files, or a glob pattern. Every reader yields ``(x float64,
y float64, rows the parser skipped)`` per chunk.
"""

from __future__ import annotations

import glob as _glob
import io
import math
import os
from dataclasses import dataclass
from typing import Iterator

import numpy as np

from .._errors import ColumnError, IntakeError
from ._decode import refuse_binary_head
from ._wording import echo, echo_list

PARQUET_SUFFIXES = (".parquet", ".parq", ".pq")
"""File-name endings of Parquet files."""


@dataclass
class FileSource:
    kind: str  # "csv" or "parquet"
    paths: list[str]
    names: list[str]  # all column names
    numeric: list[str]  # names of the numeric columns (as inferred or stored)
    skip_rows: int = 0  # CSV: lines before the header
    data_offset: int = 0  # CSV: byte offset of the first data line


def _is_parquet_file(path: str) -> bool:
    if path.lower().endswith(PARQUET_SUFFIXES):
        return True
    try:
        with open(path, "rb") as fh:
            return fh.read(4) == b"PAR1"
    except OSError:
        return False


def resolve_source(source) -> FileSource:
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
            if os.path.isfile(p) and p.lower().endswith(PARQUET_SUFFIXES)
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


def _parquet_source(paths: list[str]) -> FileSource:
    import pyarrow as pa
    import pyarrow.parquet as pq

    schema = None
    for p in paths:
        try:
            s = pq.read_schema(p)
        except (pa.ArrowException, OSError) as exc:
            raise IntakeError(f"{p} cannot be read as Parquet ({first_line(exc)}).") from None
        if schema is None:
            schema = s
        elif s.names != schema.names:
            raise IntakeError(
                f"{p} has other columns than {paths[0]}; a folder or pattern must hold files of one layout."
            )
    numeric = [f.name for f in schema if pa.types.is_integer(f.type) or pa.types.is_floating(f.type)]
    return FileSource("parquet", paths, list(schema.names), numeric)


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
    """``read_table``'s binary checks on the first 64 KiB: a spreadsheet, image or NUL-filled
    file is refused at once instead of being scanned for a header line."""
    with open(path, "rb") as fh:
        head = fh.read(1 << 16)
    refuse_binary_head(head, os.path.basename(path) or path)


def _csv_source(path: str) -> FileSource:
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
        raise IntakeError(f"{path} cannot be read as CSV ({first_line(exc)}).") from None
    numeric = []
    for f in schema:
        if pa.types.is_integer(f.type) or pa.types.is_floating(f.type):
            numeric.append(f.name)
        elif pa.types.is_string(f.type) and first is not None:
            # a number column with a few bad cells reads as text: call it numeric when most cells are numbers
            col = first.column(f.name).drop_null()
            if len(col):
                parsed = np.isfinite(as_float(col)).mean()
                if parsed >= 0.5:
                    numeric.append(f.name)
    with open(path, "rb") as fh:
        fh.seek(offset)
        header = fh.readline()
    return FileSource("csv", [path], list(schema.names), numeric, skip_rows=skip, data_offset=offset + len(header))


def _skip_invalid_row(row) -> str:
    """pyarrow invalid-row handler: drop lines with the wrong number of fields."""
    return "skip"


def pick_source_columns(src: FileSource, x, y) -> tuple[str, str]:
    def check(name, what):
        if isinstance(name, int) and not isinstance(name, bool):
            if not 0 <= name < len(src.names):
                raise ColumnError(
                    f"There is no column number {name} for {what}; the file has {len(src.names)} columns."
                )
            return src.names[name]
        if name not in src.names:
            raise ColumnError(f"There is no column {echo(name)} for {what}; the columns are {echo_list(src.names)}.")
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
        raise ColumnError(f"x and y are both {echo(x)}; choose two different columns.")
    return x, y


def first_line(exc: BaseException) -> str:
    text = str(exc).strip().splitlines()
    return (text[0] if text else type(exc).__name__).rstrip(".")


# ----------------------------------------------------------------------------
# reading chunks: (x float64, y float64, rows the parser skipped)


def as_float(arr) -> np.ndarray:
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
    src: FileSource, x: str, y: str, chunk_rows: int, as_text: bool
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
            yield as_float(batch.column(x)), as_float(batch.column(y)), new_invalid
    except pa.ArrowInvalid as exc:
        if not as_text and "conversion error" in str(exc).lower():
            raise NeedsText() from None
        raise IntakeError(f"{path} cannot be read as CSV ({first_line(exc)}).") from None
    except (pa.ArrowException, OSError) as exc:
        raise IntakeError(f"{path} cannot be read as CSV ({first_line(exc)}).") from None


class NeedsText(Exception):
    """A column holds text; read it as strings and convert per value."""


def _parquet_chunks(src: FileSource, x: str, y: str, chunk_rows: int) -> Iterator[tuple[np.ndarray, np.ndarray, int]]:
    import pyarrow as pa
    import pyarrow.parquet as pq

    for p in src.paths:
        try:
            pf = pq.ParquetFile(p)
            for batch in pf.iter_batches(batch_size=max(int(chunk_rows), 1), columns=[x, y], use_threads=True):
                yield as_float(batch.column(x)), as_float(batch.column(y)), 0
        except (pa.ArrowException, OSError) as exc:
            raise IntakeError(f"{p} cannot be read as Parquet ({first_line(exc)}).") from None


def _rechunk(chunks, chunk_rows: int):
    """Re-cut a stream of (x, y, invalid) into pieces of at most ``chunk_rows`` rows."""
    for xa, ya, invalid in chunks:
        n = xa.shape[0]
        if n <= chunk_rows:
            yield xa, ya, invalid
            continue
        for a in range(0, n, chunk_rows):
            yield xa[a : a + chunk_rows], ya[a : a + chunk_rows], invalid if a == 0 else 0


def source_chunks(src: FileSource, x, y, chunk_rows, as_text):
    if src.kind == "csv":
        return _rechunk(_csv_chunks(src, x, y, chunk_rows, as_text), chunk_rows)
    return _rechunk(_parquet_chunks(src, x, y, chunk_rows), chunk_rows)


def parquet_x_range(src: FileSource, x: str, y: str):
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


def csv_ranges(src: FileSource, block: int) -> list[tuple[int, int]]:
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


def read_piece(kind: str, path: str, part, x: str, y: str, names: list[str], as_text: bool):
    """The (x, y, invalid) arrays of one partition: a Parquet row group or a CSV byte range."""
    import pyarrow as pa

    if kind == "parquet":
        import pyarrow.parquet as pq

        try:
            table = pq.ParquetFile(path).read_row_group(int(part), columns=[x, y])
        except (pa.ArrowException, OSError) as exc:
            raise IntakeError(f"{path} cannot be read as Parquet ({first_line(exc)}).") from None
        return as_float(table.column(x).combine_chunks()), as_float(table.column(y).combine_chunks()), 0
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
            raise NeedsText() from None
        raise IntakeError(f"{path} cannot be read as CSV ({first_line(exc)}).") from None
    return as_float(table.column(x).combine_chunks()), as_float(table.column(y).combine_chunks()), counter.invalid
