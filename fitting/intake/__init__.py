"""Reading the measurement tables people send: CSV-like text in any common dialect, and workbooks.

``read_table(source)`` takes the bytes of an upload or a path, works out how the text
is written, and returns a :class:`Table`: a pandas DataFrame with one float64 column per
numeric column (text columns kept as strings), and an :class:`IntakeReport` that says
what was found and what was left out. ``Table.select(x, y, weights=..., group=...)``
returns a :class:`Selection` of plain numpy arrays with an exact account of every row
that was not used.

Size limit: ``DEFAULT_MAX_BYTES`` is 512 MiB (512 * 1024 * 1024 bytes). A larger input
raises ``FileTooLargeError`` before anything is decoded; pass ``max_bytes=`` to
``read_table`` to raise or lower the limit.

Errors: every failure the content can cause is an ``IntakeError`` (``FileTooLargeError``
for size), an unknown or text-only column named in ``select`` is a ``ColumnError``, and
an x without two distinct values is a ``FitError``. All come from ``fitting._errors`` and
are one sentence that says what to do. Decoding and parser errors are translated.

The rules, in the order they are applied
----------------------------------------
1.  Input. A path is opened read-only (``"rb"``) and only read; it must be a regular
    file. The size is checked against ``max_bytes`` first.
    A workbook (name ending .xlsx, .xlsm, .xls or .ods, or the bytes of an Office
    Open XML, OpenDocument or legacy Office file) is read as described under
    "Workbooks" below and then follows rules 5-15 like text. A file whose bytes are
    not what its name says (a renamed image) is refused, and so is a
    password-protected workbook.
2.  Binary content is refused with "looks like a spreadsheet or binary file; export it
    as CSV": known signatures (other ZIP archives; PNG, JPEG, GIF, PDF, gzip, 7-Zip,
    Parquet, SQLite), NUL bytes in text that is not UTF-16/32 (a file of NUL bytes
    only is called that, not "empty"), bytes that no candidate encoding accepts, and
    text in which more than 1 % of the first 64 KiB are control characters.
3.  Encoding. A byte-order mark decides: UTF-8 -> ``"utf-8-sig"``; UTF-16 LE or BE ->
    ``"utf-16"``; UTF-32 -> ``"utf-32"``. Without one: NUL bytes in every other position
    of the first 4 KiB mean UTF-16 without a mark (``"utf-16-le"`` / ``"utf-16-be"``);
    otherwise strict UTF-8 (``"utf-8"``, which covers plain ASCII), else Windows-1252
    (``"cp1252"``, a superset of the printable Latin-1 range: 0xB0 is "°", 0xB5 is "µ").
    A trailing Ctrl-Z and stray U+FEFF characters are removed.
4.  Lines. CR LF, CR and LF all end a line. Line numbers are 1-based physical lines of
    the file, as an editor shows them.
5.  Line kinds, decided line by line before quotes are considered, and skipped
    everywhere (never counted as rows):
      blank   - empty, or only whitespace and delimiters (",,,");
      rule    - only ``- = _ : + |``, delimiters and whitespace, with a run of three
                ``-`` or ``=`` (e.g. "|---|---|", "=====");
      comment - first visible characters ``#`` or ``//``, or ``;`` when ``;`` is not the
                delimiter. A line that starts with a spreadsheet error code (``#N/A``,
                ``#DIV/0!``, ``#VALUE!``, ``#REF!``, ``#NAME?``, ``#NUM!``, ``#NULL!``) is
                data, not a comment.
    A data row whose fields are all empty is treated as blank too.
6.  Delimiter: one of ``,`` ``;`` tab ``|``, chosen on a sample (the first 64 KiB, at
    most 500 lines; grown up to 1 MiB when it holds fewer than 20 lines, and up to
    20,000 lines when it holds no table). For each candidate the modal field count k
    (ties: the larger) must be at least 2; the winner has the largest (number-like
    cells - text cells) over the sample lines with k fields; ties go to more lines with
    k fields, then to the order ``,`` ``;`` tab ``|``. At most ``MAX_COLUMNS`` (10,000)
    columns are taken; a wider file raises IntakeError.
7.  Header. In the sample a column is numeric when it has at least as many number-like
    cells as text cells. A *data row* has at least k fields (extras are ignored here)
    and, in every numeric column, a number or a missing marker, with at least one number.
    The data starts at the first run of three consecutive data rows (or of as many
    as the sample holds). The header is the non-blank, non-comment line just before
    that run, if it has k fields, or fewer when the sample's data rows are empty beyond
    its last name (a trailing delimiter). If every non-empty cell of that line is in
    brackets ("(s)", "[mV]") it is a units line and the header is the line above it.
    Without such a line, the last comment line before the data becomes the header if
    it splits into k cells none of which is a number ("# t [s], U [mV]"). Otherwise the
    file has no header: columns are named "column 1", "column 2", ... and
    ``header_line`` is 0. Every non-blank line above the header (above the data when
    there is no header) is skipped as metadata, and a note says so.
8.  Decimal mark, by a vote of the sample's numeric cells. In a number with both marks
    the last one is the decimal mark ("1.250,5"); a mark repeated in one number is digit
    grouping ("1,250,000"); a single mark is the decimal mark when an exponent follows
    ("4,5e2") or when it is not followed by exactly three digits after one to three
    digits without a leading zero ("3,41", "0,125", ",5", "1234,567"); "1,250" and
    "1.250" are ambiguous. "," wins when it has more votes than ".", else "."; when no
    cell decides, an ambiguous "1,250" in a ";"-delimited file counts for ",".
    Digit grouping is accepted with the other mark ("," when the decimal mark is ".",
    "." when it is ",") or a space (also no-break spaces), in groups of exactly three
    digits: "1,250.0", "1.250,5", "1 250". ``thousands`` in the report is the grouping
    mark actually used most (None if none).
9.  A number is, after trimming whitespace and removing quotes: an optional sign
    (``+``, ``-`` or the minus sign U+2212), digits with the decimal mark, an optional
    exponent (``1.2E-3``, ``4,5e2``), or grouped digits as above; or ``inf`` /
    ``infinity`` / ``∞`` with an optional sign, in any case. Values beyond the float
    range become infinite. Anything else in a numeric column is "not a number": it is
    read as missing and counted in a note.
10. Missing markers (any case, after trimming): empty, ``NA``, ``N/A``, ``n.a.``,
    ``#N/A``, ``#NA``, ``-``, ``--``, ``null``, ``None``, ``missing``, and NaN in every
    form a float parser takes (``NaN``, ``-nan``, ``+nan``, ``nan(0x1)``).
11. Rows. After the header, every remaining line (a quoted field may join several
    lines into one row) is a data row and counts in ``rows_read``. A row with more
    fields than the header is truncated (a note counts those whose extra fields are
    not empty); a row with fewer is padded with empty fields (noted).
12. Rows removed at intake (``IntakeReport.dropped``), first match wins:
      "repeated header" - the trimmed cells equal the trimmed header names;
      "summary row"     - the first non-empty cell starts with a summary word: mean,
                          average, avg, total, subtotal, sum, std, stdev, std dev,
                          standard deviation, sd, min, minimum, max, maximum, median,
                          count, variance, range, rsd, cv, summary, statistics,
                          and mittelwert, summe, gesamt, stabw, standardabweichung,
                          moyenne, somme, écart-type;
      "note row"        - the first non-empty cell starts with "note:", "notes:",
                          "remark:", "comment:" (and plurals) or "nb:";
      "text row"        - no cell is a number and some cell holds text.
13. Columns. A column is numeric when, over the rows kept, it has at least one number
    and at least as many numbers as non-missing text cells; its values are float64
    (NaN where missing or not a number). Other columns keep their trimmed text (NaN
    when empty). A column without a header name whose cells are all empty is dropped
    (a trailing delimiter). Names are trimmed with inner whitespace collapsed; a
    missing name becomes "column N" (N = position); a repeated name becomes "name (2)",
    "name (3)". Units come from the original name: a final "(unit)" or "[unit]", or
    "quantity / unit"; a unit that is only digits is not a unit.
14. Frame. ``Table.frame`` holds the rows kept at intake in file order, with a plain
    RangeIndex; ``Table.line_numbers`` gives the file line of each. A text column whose
    cells mostly look like dates or clock times is named in a note (times are not read
    as numbers).
15. Selection. ``Table.select`` keeps the rows where x and y (and weights) are finite.
    Each other row is counted once, under the first reason that applies: "missing or
    non-numeric x", "infinite x", "missing or non-numeric y", "infinite y", "missing or
    non-numeric weights", "infinite weights", "negative weights". Its ``dropped`` holds
    the intake reasons too, so ``rows_used + rows_dropped == rows_read`` always. A
    text group column gives an object array of str ("" where empty), a numeric one a
    float array (NaN where missing). Fewer than two distinct x values is a FitError.
    Every reason lists its line numbers (``DropInfo.lines``: all of them, or the first
    10,000 with the full ``count``). Column names match exactly, else
    case-insensitively when only one column matches (an ambiguous match is refused,
    naming the candidates). x, y and group must be three different columns.
    Default columns: x is the first numeric column and y the next one, passing over
    small-integer counters (whole numbers 0..m or 1..m, m <= 12, each used twice on
    average, like an injection or replicate number); ``Selection.choice_note`` says
    which column was passed over and why.
16. Messages echo user text (a column name, a cell, a file name) cut to 60
    characters with an ellipsis. A table wider than ``MAX_COLUMNS`` is refused with
    its exact column count, counted on the whole line. Sizes are rounded ("2.0 MiB")
    unless the file and the limit would read the same; then exact bytes are given.

Workbooks
---------
Workbooks are opened with python-calamine (``.xlsx``, ``.xlsm``, ``.xls``, ``.ods``).
``sheet=`` picks a sheet by name or 0-based index; by default the first sheet that
yields two numeric columns is read. ``IntakeReport.sheet`` and ``sheet_names`` (also
``Table.sheet`` / ``Table.sheet_names``) record the choice so a front end can offer
the others. Each row of the sheet, from row 1, becomes one tab-delimited line, so line
numbers are the spreadsheet's row numbers and the rules above apply unchanged (title
rows above the header, units in headers, missing markers, text cells, notes and
summary rows, the report). Number cells are written with Python's shortest
round-trip ``repr`` and read back by the same correctly rounded conversion, so every
value arrives bit for bit (a test checks this); text cells that hold numbers decide
the decimal mark, which the number cells then follow. Dates and times are written
in ISO form and get the same note and refusal as in a CSV. Booleans read as text.
Line breaks and tabs inside a text cell become spaces. Formulas are read as the
value the workbook saved with them; calamine does not say whether a cell held a
formula, so for ``.xlsx`` / ``.xlsm`` the sheet's XML is searched for formulas saved
without a value (files written by programs that do not calculate) and a note counts
them; in ``.xls`` and ``.ods`` such cells simply read as empty.

Speed: a clean file (one row per line, every column numeric) is parsed straight into
float64 by Arrow's CSV reader (``pyarrow.csv``, the reader behind pandas'
``engine="pyarrow"``; used directly because it also takes a decimal comma). The result
is accepted only when every column is a float column with at least one value, no row
is entirely empty, and the row count equals the line count; otherwise the general path
reads the file, so the two cannot disagree (a test compares them on every corpus file
and the fuzz tests on random input). The general path splits and classifies lines with
Arrow compute kernels, splits fields vectorised (with Python's C ``csv`` module when
the text holds quotes), and parses numbers column-wise with the same Arrow
string-to-float conversion; rarer checks (markers, grouping, summary rows) run only on
the cells that can match. On a 2-core machine a clean 1,000,000-row, 25 MB file reads
in about 0.2 s; a messy one of that size in well under 2 s, except that quoted fields
(the csv-module path) take about 3 s per million rows.
"""

from __future__ import annotations

import csv
from dataclasses import replace

import pandas as pd
import pyarrow as pa

from .._errors import IntakeError
from ._assemble import assemble, unit_of
from ._decode import decode, empty_error, load
from ._dialect import OneColumnError, detect_dialect, offset_of_line
from ._parse import parse_fast, parse_general
from ._patterns import DEFAULT_MAX_BYTES, MAX_COLUMNS
from ._results import LISTED_LINES, DropInfo, IntakeReport, Selection, Table
from ._sources import (
    PARQUET_SUFFIXES,
    FileSource,
    NeedsText,
    csv_ranges,
    first_line,
    parquet_x_range,
    pick_source_columns,
    read_piece,
    resolve_source,
    source_chunks,
)
from ._tokens import QuoteError
from ._wording import ECHO_LIMIT, echo
from ._workbook import WORKBOOK_SUFFIXES, read_workbook, workbook_kind

__all__ = [
    "DEFAULT_MAX_BYTES",
    "ECHO_LIMIT",
    "LISTED_LINES",
    "MAX_COLUMNS",
    "WORKBOOK_SUFFIXES",
    "DropInfo",
    "IntakeReport",
    "Selection",
    "Table",
    "read_table",
    "read_values",
    "unit_of",
    # file sources of the streaming sweep (fitting._stream)
    "PARQUET_SUFFIXES",
    "FileSource",
    "NeedsText",
    "csv_ranges",
    "first_line",
    "parquet_x_range",
    "pick_source_columns",
    "read_piece",
    "resolve_source",
    "source_chunks",
]


def read_table(
    source,
    *,
    max_bytes: int = DEFAULT_MAX_BYTES,
    name: str | None = None,
    sheet: str | int | None = None,
    fast_path: bool = True,
) -> Table:
    """Read a table of measurements from CSV-like text or a workbook, as bytes or a path.

    Parameters
    ----------
    source : bytes, bytearray, memoryview, str or os.PathLike
        The content itself (bytes-like) or the path of a file, which is opened
        read-only and never modified.
    max_bytes : int, default=DEFAULT_MAX_BYTES (512 MiB)
        Inputs larger than this raise FileTooLargeError.
    name : str, optional
        Display name used in the report and in messages; defaults to the file name,
        or "upload" for bytes. Its suffix (".xlsx", ".ods", ...) marks a workbook.
    sheet : str or int, optional
        For a workbook: the sheet's name or 0-based index. By default the first sheet
        with two numeric columns.
    fast_path : bool, default=True
        False reads every text file by the general path, never by Arrow's CSV reader
        (slower; both give the same Table, which the tests check).

    Returns
    -------
    Table
        ``frame`` (float64 numeric columns, text columns as str), ``report``
        (IntakeReport) and ``line_numbers``.

    Raises
    ------
    IntakeError
        The content is not a table of numbers (see the module docstring's rules);
        FileTooLargeError, a subclass, when it is over ``max_bytes``.

    Examples
    --------
    >>> t = read_table(b"# bench run 4\\nt (s);U (mV)\\n0;1,5\\n1;2,25\\n2;n/a\\n", name="run4.csv")
    >>> t.report.header_line, t.report.decimal, t.report.units
    (2, ',', {'t (s)': 's', 'U (mV)': 'mV'})
    >>> t.frame["U (mV)"].tolist()
    [1.5, 2.25, nan]
    >>> t.line_numbers.tolist()
    [3, 4, 5]
    """
    return _read(source, max_bytes=max_bytes, name=name, sheet=sheet, fast=fast_path)


def read_values(
    source, *, max_bytes: int = DEFAULT_MAX_BYTES, name: str | None = None, sheet: str | int | None = None
) -> Table:
    """Read a table that may hold a single column of numbers, such as x values to predict at.

    A file with two or more columns is read exactly as ``read_table`` reads it. A file
    with one column of values is read by the same rules (encodings, comment lines,
    header, decimal mark, missing markers, summary rows): every non-blank line gets a
    filler field after a ``;`` for the parse, and the filler column, always the last,
    is removed again. The report then names no delimiter (``""``). A workbook sheet
    with one column is read the same way (``sheet=`` as for ``read_table``).

    Parameters
    ----------
    source : bytes, bytearray, memoryview, str or os.PathLike
        As for ``read_table``.
    max_bytes : int, default=DEFAULT_MAX_BYTES (512 MiB)
    name : str, optional
    sheet : str or int, optional
        For a workbook, as for ``read_table``.

    Returns
    -------
    Table

    Examples
    --------
    >>> t = read_values(b"x (mm)\\n0.5\\n1.25\\n2\\n")
    >>> t.report.columns, t.frame["x (mm)"].tolist(), t.report.delimiter
    (['x (mm)'], [0.5, 1.25, 2.0], '')
    """
    try:
        return read_table(source, max_bytes=max_bytes, name=name, sheet=sheet)
    except OneColumnError:
        first = None
    except IntakeError as exc:  # a workbook's sheets report "no two numeric columns" instead
        first = exc
    data, display = load(source, max_bytes, name)
    kind = workbook_kind(data, display)
    if kind is None and first is not None:
        raise first
    try:
        if kind is not None:
            table = read_workbook(data, display, kind, sheet, _with_filler)
        else:
            text, label = decode(data, display)
            del data
            table = _guarded(display, lambda: _with_filler(text, display, label, fast=True))
    except IntakeError:
        if first is not None:
            raise first from None
        raise
    filler = table.report.columns[-1]
    report = replace(
        table.report,
        delimiter="",
        columns=table.report.columns[:-1],
        numeric_columns=[c for c in table.report.numeric_columns if c != filler],
        units={k: v for k, v in table.report.units.items() if k != filler},
    )
    return replace(table, frame=table.frame.drop(columns=[filler]), report=report)


def _with_filler(text: str, display: str, encoding: str, *, fast: bool = True, delimiters=None, decimal=None) -> Table:
    """``parse_text`` with a filler field after every non-blank line (";0", or a tab and 0 in a workbook)."""
    mark = "\t" if delimiters == ("\t",) else ";"
    filled = "\n".join(ln if not ln.strip() else ln + mark + "0" for ln in _lines(text).split("\n"))
    return parse_text(filled, display, encoding, fast=fast, delimiters=delimiters, decimal=decimal)


def _read(source, *, max_bytes: int, name: str | None, sheet, fast: bool) -> Table:
    if isinstance(max_bytes, bool) or not isinstance(max_bytes, int) or max_bytes <= 0:
        raise ValueError(f"max_bytes must be a positive integer, got {max_bytes!r}")
    data, display = load(source, max_bytes, name)
    kind = workbook_kind(data, display)
    if kind is not None:
        return read_workbook(data, display, kind, sheet, parse_text)
    if sheet is not None:
        raise IntakeError(f"{echo(display)} is text, not a workbook, so it has no sheets; leave out sheet=.")
    if not data.strip(b" \t\r\n\x0c\xef\xbb\xbf\xff\xfe"):
        raise empty_error(display)
    text, encoding = decode(data, display)
    del data
    return _guarded(display, lambda: parse_text(text, display, encoding, fast=fast))


def _guarded(display: str, parse) -> Table:
    """Run a parse, translating a stray quote and parser errors into one IntakeError sentence."""
    try:
        return parse()
    except QuoteError as exc:
        raise IntakeError(
            f'{echo(display)} has a quote character (") on line {exc.line} that opens a field which '
            f"never closes, so the rest of the file would be one cell; remove the stray quote "
            f"or close it."
        ) from None
    except (UnicodeError, csv.Error, pa.ArrowException, pd.errors.ParserError) as exc:
        raise IntakeError(
            f"{echo(display)} could not be read as a table ({type(exc).__name__}: {echo(str(exc), 200)}); "
            f"check that it is a CSV export of measurements."
        ) from exc


def _lines(text: str) -> str:
    return text.replace("\r\n", "\n").replace("\r", "\n")


def parse_text(
    text: str,
    display: str,
    encoding: str,
    *,
    fast: bool = True,
    delimiters: tuple[str, ...] | None = None,
    decimal: str | None = None,
) -> Table:
    """Rules 4-14 on decoded text: the dialect, then the fast or the general parse, then the Table.

    ``delimiters`` limits the delimiter candidates and ``decimal`` fixes the decimal
    mark (both used for workbooks, whose cells arrive tab-separated).
    """
    text = _lines(text)
    if not text.strip():
        raise empty_error(display)
    kw = {} if delimiters is None else {"delimiters": delimiters}
    dialect = detect_dialect(text, display, **kw)
    if decimal is not None:
        dialect.decimal = decimal
    region = text[offset_of_line(text, dialect.data_start) :]
    del text
    result = parse_fast(region, dialect) if fast else None
    if result is None:
        result = parse_general(region, dialect)
    return assemble(display, encoding, dialect, result)
