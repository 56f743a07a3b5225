"""Reading the measurement tables people send: CSV-like text in any common dialect.

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
2.  Binary content is refused with "looks like a spreadsheet or binary file; export it
    as CSV": known signatures (ZIP, which includes .xlsx and .ods; legacy .xls and other
    OLE2 files; PNG, JPEG, GIF, PDF, gzip, 7-Zip, Parquet, SQLite), NUL bytes in text
    that is not UTF-16/32, bytes that no candidate encoding accepts, and text in which
    more than 1 % of the first 64 KiB are control characters.
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
import io
import math
import os
import re
import stat
from collections import Counter
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

from ._errors import ColumnError, FileTooLargeError, FitError, IntakeError

__all__ = [
    "read_values",
    "DEFAULT_MAX_BYTES",
    "MAX_COLUMNS",
    "DropInfo",
    "IntakeReport",
    "Selection",
    "Table",
    "read_table",
]

DEFAULT_MAX_BYTES = 512 * 1024 * 1024
"""Default size limit of ``read_table``: 512 MiB."""

_SAMPLE_CHARS = 64 * 1024
_SAMPLE_LINES = 500
_SAMPLE_MAX_CHARS = 1024 * 1024
_SAMPLE_MAX_CELLS = 100_000
MAX_COLUMNS = 10_000
"""The most columns ``read_table`` takes; wider files raise IntakeError."""
_MIN_SAMPLE_LINES = 20
_RUN = 3
_FIRST_LINES = 5
_DELIMITERS = (",", ";", "\t", "|")
_DELIMITER_WORDS = {",": "comma", ";": "semicolon", "\t": "tab", "|": "pipe"}

_MISSING = frozenset(["", "na", "n/a", "n.a.", "#n/a", "#na", "-", "--", "nan", "-nan", "null", "none", "missing"])
_MISSING_ARROW = pa.array(sorted(_MISSING), pa.large_string())
# Every spelling of NaN that Arrow's float conversion accepts ("+nan", "nan(0x1)") is a
# missing marker as well, so the fast and the general path cannot disagree on it.
_NAN_FORMS = "(?i)^[+-]?nan(?:\\([0-9a-z_]*\\))?$"
# Exact spellings handed to Arrow's CSV reader as nulls on the fast path; any other case
# of a marker makes the fast path give up and the general path (any case) take over.
_ARROW_NULLS = sorted({v for m in _MISSING for v in (m, m.upper(), m.title())})

_SIGNATURES = (
    (b"PK\x03\x04", "a ZIP archive, such as an .xlsx or .ods spreadsheet"),
    (b"PK\x05\x06", "an empty ZIP archive"),
    (b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1", "a legacy Office file, such as an .xls spreadsheet"),
    (b"\x89PNG\r\n\x1a\n", "a PNG image"),
    (b"\xff\xd8\xff", "a JPEG image"),
    (b"GIF87a", "a GIF image"),
    (b"GIF89a", "a GIF image"),
    (b"%PDF-", "a PDF document"),
    (b"\x1f\x8b", "a gzip archive"),
    (b"7z\xbc\xaf\x27\x1c", "a 7-Zip archive"),
    (b"PAR1", "a Parquet file"),
    (b"SQLite format 3\x00", "an SQLite database"),
)

# Whitespace characters written literally so that Python's re and Arrow's RE2 agree.
_WS = " \t\x0b\x0c\u00a0\u1680\u2000-\u200a\u202f\u205f\u3000"
_CONTROL = re.compile("[\x00-\x08\x0b\x0e-\x19\x1b-\x1f\x7f-\x9f]")
_SHEET_ERROR = "(?i)^#(?:n/?a(?:[^a-z]|$)|value!|div/0!|ref!|name\\?|num!|null!|spill!|calc!)"
_SHEET_ERROR_RE = re.compile(_SHEET_ERROR)
_NAN_FORMS_RE = re.compile(_NAN_FORMS)
_SUMMARY = (
    "(?i)^(?:mean|average|avg|grand total|total|totals|subtotal|sum|std|stdev|std\\.? ?dev"
    "|standard deviation|sd|min|minimum|max|maximum|median|count|variance|range|%?rsd|cv"
    "|summary|statistics|mittelwert|summe|gesamt|stabw|standardabweichung|moyenne|somme"
    "|écart-type|ecart-type)(?:[^a-z0-9]|$)"
)
_NOTE = "(?i)^(?:note|notes|remark|remarks|comment|comments|nb)[" + _WS + "]*:"

# Permissive shape of a number, used only to judge the sample (delimiter, header, decimal).
_NUMLIKE = re.compile(
    "[+\\-\u2212]?(?:\\d{1,3}(?:[,. \u00a0\u202f]\\d{3})+(?:[.,]\\d*)?|\\d+(?:[.,]\\d*)?|[.,]\\d+)"
    "(?:[eE][+\\-\u2212]?\\d+)?|[+\\-\u2212]?(?:inf|infinity|\u221e)",
    re.IGNORECASE | re.ASCII,
)
_UNIT_BRACKET = re.compile(r"^(?P<name>.*?)\s*(?:\((?P<p>[^()]*)\)|\[(?P<b>[^\[\]]*)\])$")
_UNIT_SLASH = re.compile(r"^(?P<name>.*\S)\s+/\s+(?P<u>\S.*)$")
_BRACKETED = re.compile(r"^(?:\([^()]*\)|\[[^\[\]]*\])$")


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class DropInfo:
    """How many rows one reason removed, and the file lines of the first five."""

    count: int
    first_lines: list[int]

    def to_dict(self) -> dict[str, Any]:
        return {"count": int(self.count), "first_lines": [int(v) for v in self.first_lines]}


@dataclass(frozen=True)
class IntakeReport:
    """What ``read_table`` found in a file, and what it left out."""

    source_name: str
    encoding: str
    delimiter: str
    decimal: str
    thousands: str | None
    header_line: int
    rows_read: int
    columns: list[str]
    numeric_columns: list[str]
    units: dict[str, str]
    dropped: dict[str, DropInfo]
    notes: list[str]

    def to_dict(self) -> dict[str, Any]:
        """A JSON-safe dict of the report."""
        return {
            "source_name": self.source_name,
            "encoding": self.encoding,
            "delimiter": self.delimiter,
            "decimal": self.decimal,
            "thousands": self.thousands,
            "header_line": int(self.header_line),
            "rows_read": int(self.rows_read),
            "columns": list(self.columns),
            "numeric_columns": list(self.numeric_columns),
            "units": dict(self.units),
            "dropped": {k: v.to_dict() for k, v in self.dropped.items()},
            "notes": list(self.notes),
        }

    def summary_lines(self) -> list[str]:
        """Plain sentences for the dashboard and the command line."""
        grouping = f", digit grouping {_mark_word(self.thousands)}" if self.thousands else ""
        out = [
            f"Read '{self.source_name}' as {self.encoding} text, "
            + (
                f"{_DELIMITER_WORDS.get(self.delimiter, repr(self.delimiter))}-delimited, "
                if self.delimiter
                else "one column, "
            )
            + f"decimal mark {_mark_word(self.decimal)}{grouping}."
        ]
        where = f"Header on line {self.header_line}" if self.header_line else "No header line"
        cols = ", ".join(self.numeric_columns)
        out.append(
            f"{where}; {_plural(self.rows_read, 'data row')}; "
            f"{_plural(len(self.numeric_columns), 'numeric column')}: {cols}."
        )
        for reason, info in self.dropped.items():
            out.append(f"Left out {_plural(info.count, reason)} ({_lines_phrase(info.first_lines, info.count)}).")
        out.extend(self.notes)
        return out


@dataclass(frozen=True)
class Selection:
    """The x, y (and weights, group) arrays chosen from a Table, with the rows left out."""

    x: np.ndarray
    y: np.ndarray
    weights: np.ndarray | None
    group: np.ndarray | None
    x_name: str
    y_name: str
    x_unit: str | None
    y_unit: str | None
    rows_used: int
    rows_dropped: int
    dropped: dict[str, DropInfo]
    weights_name: str | None = None
    group_name: str | None = None
    line_numbers: np.ndarray | None = field(default=None, repr=False, compare=False)

    def to_dict(self, *, include_arrays: bool = False) -> dict[str, Any]:
        """A JSON-safe dict of names, units and row counts.

        ``include_arrays=True`` adds x, y, weights, group and the file line numbers as
        lists (NaN and infinities as null); off by default, as they can be millions long.
        """
        out: dict[str, Any] = {
            "x_name": self.x_name,
            "y_name": self.y_name,
            "x_unit": self.x_unit,
            "y_unit": self.y_unit,
            "weights_name": self.weights_name,
            "group_name": self.group_name,
            "rows_used": int(self.rows_used),
            "rows_dropped": int(self.rows_dropped),
            "dropped": {k: v.to_dict() for k, v in self.dropped.items()},
        }
        if include_arrays:
            out["x"] = _json_list(self.x)
            out["y"] = _json_list(self.y)
            out["weights"] = None if self.weights is None else _json_list(self.weights)
            out["group"] = None if self.group is None else _json_list(self.group)
            out["line_numbers"] = None if self.line_numbers is None else [int(v) for v in self.line_numbers]
        return out


@dataclass(frozen=True, eq=False)
class Table:
    """A parsed table: ``frame`` (numeric columns float64, text columns str) and ``report``."""

    frame: pd.DataFrame
    report: IntakeReport
    _line_numbers: np.ndarray = field(repr=False)

    @property
    def line_numbers(self) -> np.ndarray:
        """The file line number (1-based) of each row of ``frame``, read-only."""
        view = self._line_numbers.view()
        view.flags.writeable = False
        return view

    def default_xy(self) -> tuple[str, str]:
        """The first two numeric columns."""
        num = self.report.numeric_columns
        return num[0], num[1]

    def select(self, x=None, y=None, *, weights=None, group=None) -> Selection:
        """Choose x and y (default: the first two numeric columns), optional weights and group.

        When only x is given, y is the first other numeric column. Rows where x, y or
        the weights are missing, not numbers or infinite are left out and counted by
        reason (see the module docstring, rule 15); negative weights are left out as
        well. ``group`` may name any column; a text group gives an object array of str
        ("" where empty), a numeric group a float array (NaN where missing). Raises
        ColumnError for an unknown or text column, FitError when fewer than two distinct
        x values remain.
        """
        num = self.report.numeric_columns
        if x is None and y is None:
            x, y = self.default_xy()
        elif x is None:
            y = self._column(y, "y", numeric=True)
            x = next(c for c in num if c != y)
        elif y is None:
            x = self._column(x, "x", numeric=True)
            y = next(c for c in num if c != x)
        x = self._column(x, "x", numeric=True)
        y = self._column(y, "y", numeric=True)
        w_name = None if weights is None else self._column(weights, "weights", numeric=True)
        g_name = None if group is None else self._column(group, "group", numeric=False)

        frame = self.frame
        xv = frame[x].to_numpy(dtype=np.float64)
        yv = frame[y].to_numpy(dtype=np.float64)
        checks = [
            ("missing or non-numeric x", np.isnan(xv)),
            ("infinite x", np.isinf(xv)),
            ("missing or non-numeric y", np.isnan(yv)),
            ("infinite y", np.isinf(yv)),
        ]
        wv = None
        if w_name is not None:
            wv = frame[w_name].to_numpy(dtype=np.float64)
            with np.errstate(invalid="ignore"):
                checks += [
                    ("missing or non-numeric weights", np.isnan(wv)),
                    ("infinite weights", np.isinf(wv)),
                    ("negative weights", wv < 0),
                ]
        lines = self._line_numbers
        dropped = dict(self.report.dropped)
        taken = np.zeros(len(frame), dtype=bool)
        for reason, mask in checks:
            hit = mask & ~taken
            n = int(hit.sum())
            if n:
                dropped[reason] = DropInfo(n, [int(v) for v in lines[hit][:_FIRST_LINES]])
                taken |= hit
        keep = ~taken
        xs = np.ascontiguousarray(xv[keep])
        distinct = np.unique(xs).size
        if distinct < 2:
            if xs.size == 0:
                raise FitError(
                    f"No row has finite numbers in both '{x}' and '{y}', so there is nothing "
                    f"to fit; choose other x and y columns."
                )
            raise FitError("x has fewer than two distinct values; a curve needs at least two. Choose another x column.")
        group_arr = None
        if g_name is not None:
            col = frame[g_name]
            if g_name in self.report.numeric_columns:
                group_arr = np.ascontiguousarray(col.to_numpy(dtype=np.float64)[keep])
            else:
                group_arr = col.fillna("").to_numpy(dtype=object)[keep]
        units = self.report.units
        return Selection(
            x=xs,
            y=np.ascontiguousarray(yv[keep]),
            weights=None if wv is None else np.ascontiguousarray(wv[keep]),
            group=group_arr,
            x_name=x,
            y_name=y,
            x_unit=units.get(x),
            y_unit=units.get(y),
            rows_used=int(keep.sum()),
            rows_dropped=int(sum(d.count for d in dropped.values())),
            dropped=dropped,
            weights_name=w_name,
            group_name=g_name,
            line_numbers=lines[keep].copy(),
        )

    def _column(self, name, role: str, *, numeric: bool) -> str:
        cols = self.report.columns
        if not isinstance(name, str) or name not in cols:
            raise ColumnError(
                f"There is no column named {name!r} to use as {role}; the available columns "
                f"are: {', '.join(repr(c) for c in cols)}."
            )
        if numeric and name not in self.report.numeric_columns:
            raise ColumnError(
                f"Column {name!r} holds text, not numbers, so it cannot be {role}; choose one "
                f"of the numeric columns: {', '.join(repr(c) for c in self.report.numeric_columns)}."
            )
        return name


# --------------------------------------------------------------------------- entry point


def read_table(source, *, max_bytes: int = DEFAULT_MAX_BYTES, name: str | None = None) -> Table:
    """Read a CSV-like table from bytes (an upload's content) or a path.

    Parameters
    ----------
    source : bytes, bytearray, memoryview, str or os.PathLike
        The content itself (bytes-like) or the path of a file, which is opened
        read-only and never modified.
    max_bytes : int, default=DEFAULT_MAX_BYTES (512 MiB)
        Inputs larger than this raise FileTooLargeError.
    name : str, optional
        Display name used in the report and in messages; defaults to the file name,
        or "upload" for bytes.

    The rules for encodings, delimiters, headers, numbers, missing values and dropped
    rows are in the module docstring.
    """
    return _read(source, max_bytes=max_bytes, name=name, fast=True)


class _OneColumnError(IntakeError):
    """The text has a single column of values (no delimiter between fields)."""


def read_values(source, *, max_bytes: int = DEFAULT_MAX_BYTES, name: str | None = None) -> Table:
    """Read a table that may hold a single column of numbers, such as x values to predict at.

    A file with two or more columns is read exactly as ``read_table`` reads it. A file
    with one column of values is read by the same rules (encodings, comment lines,
    header, decimal mark, missing markers, summary rows): every non-blank line gets a
    filler field after a ``;`` for the parse, and the filler column, always the last,
    is removed again. The report then names no delimiter (``""``).
    """
    try:
        return read_table(source, max_bytes=max_bytes, name=name)
    except _OneColumnError:
        pass
    data, display = _load(source, max_bytes, name)
    text, label = _decode(data, display)
    filled = "\n".join(ln if not ln.strip() else ln.rstrip("\r") + ";0" for ln in text.split("\n"))
    try:
        table = _parse(filled.encode("utf-8"), display, fast=True)
    except _QuoteError as exc:
        raise IntakeError(
            f"'{display}' has a quote character (\") on line {exc.line} that opens a field which "
            f"never closes; remove the stray quote or close it."
        ) from None
    filler = table.report.columns[-1]
    report = replace(
        table.report,
        encoding=label,
        delimiter="",
        columns=table.report.columns[:-1],
        numeric_columns=[c for c in table.report.numeric_columns if c != filler],
        units={k: v for k, v in table.report.units.items() if k != filler},
    )
    return replace(table, frame=table.frame.drop(columns=[filler]), report=report)


def _read(source, *, max_bytes: int, name: str | None, fast: bool) -> Table:
    if isinstance(max_bytes, bool) or not isinstance(max_bytes, int) or max_bytes <= 0:
        raise ValueError(f"max_bytes must be a positive integer, got {max_bytes!r}")
    data, display = _load(source, max_bytes, name)
    try:
        return _parse(data, display, fast=fast)
    except _QuoteError as exc:
        raise IntakeError(
            f"'{display}' has a quote character (\") on line {exc.line} that opens a field which "
            f"never closes, so the rest of the file would be one cell; remove the stray quote "
            f"or close it."
        ) from None
    except (UnicodeError, csv.Error, pa.ArrowException, pd.errors.ParserError) as exc:
        raise IntakeError(
            f"'{display}' could not be read as a table ({type(exc).__name__}: {exc}); "
            f"check that it is a CSV export of measurements."
        ) from exc


def _load(source, max_bytes: int, name: str | None) -> tuple[bytes, str]:
    if isinstance(source, (bytes, bytearray, memoryview)):
        data = bytes(source)
        display = name or "upload"
        if len(data) > max_bytes:
            raise _too_large(display, len(data), max_bytes)
        return data, display
    if isinstance(source, (str, os.PathLike)):
        path = os.fspath(source)
        if isinstance(path, bytes):
            path = os.fsdecode(path)
        display = name or os.path.basename(path) or path
        try:
            mode = os.stat(path).st_mode
            if stat.S_ISDIR(mode):
                raise IsADirectoryError(path)
            if not stat.S_ISREG(mode):  # before open(): opening a FIFO blocks until a writer comes
                raise IntakeError(f"'{display}' is not a regular file; choose a CSV file.")
            with open(path, "rb") as fh:
                st = os.fstat(fh.fileno())
                if not stat.S_ISREG(st.st_mode):
                    raise IntakeError(f"'{display}' is not a regular file; choose a CSV file.")
                if st.st_size > max_bytes:
                    raise _too_large(display, st.st_size, max_bytes)
                data = fh.read(max_bytes + 1)
        except FileNotFoundError:
            raise IntakeError(f"There is no file at '{path}'; check the path and try again.") from None
        except IsADirectoryError:
            raise IntakeError(f"'{path}' is a folder, not a file; choose a CSV file inside it.") from None
        except PermissionError:
            raise IntakeError(
                f"'{path}' cannot be opened for reading (permission denied); copy it somewhere "
                f"readable or ask for access."
            ) from None
        except OSError as exc:
            raise IntakeError(f"'{path}' cannot be read ({exc.strerror or exc}); check the file.") from None
        if len(data) > max_bytes:
            raise _too_large(display, len(data), max_bytes)
        return data, display
    raise TypeError(f"read_table takes bytes or a path (str or os.PathLike), not {type(source).__name__}")


def _too_large(display: str, size: int, limit: int) -> FileTooLargeError:
    err = FileTooLargeError(
        f"'{display}' is {_size_text(size)} ({size:,} bytes), over the {_size_text(limit)} size "
        f"limit; split the file, or raise the limit with max_bytes to at least {size:,} bytes."
    )
    err.size_bytes = size
    err.limit_bytes = limit
    return err


def _parse(data: bytes, display: str, *, fast: bool) -> Table:
    if not data.strip(b" \t\r\n\x0c\x00\xef\xbb\xbf\xff\xfe"):
        raise IntakeError(f"'{display}' is empty; choose a file with a header line and rows of numbers.")
    text, encoding = _decode(data, display)
    del data
    text = text.replace("\r\n", "\n").replace("\r", "\n")
    if not text.strip():
        raise IntakeError(f"'{display}' is empty; choose a file with a header line and rows of numbers.")
    layout = _layout(text, display)
    region_start = _offset_of_line(text, layout.data_start)
    region = text[region_start:]
    del text
    result = _parse_fast(region, layout) if fast else None
    if result is None:
        result = _parse_general(region, layout)
    return _finish(display, encoding, layout, result)


# --------------------------------------------------------------------------- decoding


def _binary_error(display: str, what: str) -> IntakeError:
    return IntakeError(
        f"'{display}' looks like a spreadsheet or binary file ({what}), not CSV text; "
        f"export it as CSV from the program that made it and load that file."
    )


def _decode(data: bytes, display: str) -> tuple[str, str]:
    for sig, what in _SIGNATURES:
        if data.startswith(sig):
            raise _binary_error(display, what)
    if data.startswith(b"\xef\xbb\xbf"):
        label, codec, body = "utf-8-sig", "utf-8", data[3:]
    elif data.startswith(b"\xff\xfe\x00\x00"):
        label, codec, body = "utf-32", "utf-32-le", data[4:]
    elif data.startswith(b"\x00\x00\xfe\xff"):
        label, codec, body = "utf-32", "utf-32-be", data[4:]
    elif data.startswith(b"\xff\xfe"):
        label, codec, body = "utf-16", "utf-16-le", data[2:]
    elif data.startswith(b"\xfe\xff"):
        label, codec, body = "utf-16", "utf-16-be", data[2:]
    elif b"\x00" in data:
        head = data[:4096]
        half = len(head) // 2
        even, odd = head[0::2].count(0), head[1::2].count(0)
        if half and odd > 0.3 * half and even == 0:
            label = codec = "utf-16-le"
        elif half and even > 0.3 * half and odd == 0:
            label = codec = "utf-16-be"
        else:
            raise _binary_error(display, "it contains NUL bytes")
        body = data
    else:
        label = codec = "utf-8"
        body = data
        try:
            text = body.decode("utf-8")
        except UnicodeDecodeError:
            label = codec = "cp1252"
            try:
                text = body.decode("cp1252")
            except UnicodeDecodeError:
                raise _binary_error(display, "its bytes are not text in UTF-8, UTF-16 or Windows-1252") from None
        return _clean_text(text, display), label
    try:
        text = body.decode(codec)
    except UnicodeDecodeError:
        raise _binary_error(display, f"its bytes are not valid {label} text") from None
    return _clean_text(text, display), label


def _clean_text(text: str, display: str) -> str:
    if "\x00" in text:
        raise _binary_error(display, "it contains NUL characters")
    head = text[:_SAMPLE_CHARS]
    if head and len(_CONTROL.findall(head)) > 0.01 * len(head):
        raise _binary_error(display, "it is full of control characters")
    if "\ufeff" in text:
        text = text.replace("\ufeff", "")
    return text.rstrip("\x1a")


# --------------------------------------------------------------------------- sample analysis


@dataclass
class _Layout:
    delimiter: str
    k: int
    decimal: str
    header_names: list[str] | None
    header_line: int
    units_line: int
    unit_cells: list[str] | None
    header_from_comment: int  # line of the comment used as header, else 0
    data_start: int  # 1-based line where the data region begins
    skipped: list[int]  # non-blank lines above the header / data


def _comment_re(delimiter: str | None) -> str:
    semi = "|;" if delimiter not in (";", None) else ""
    return f"^(?:#|//{semi})"


def _blank_re(d: str) -> str:
    return "^[" + _WS + re.escape(d) + "]*$"


def _rule_re(d: str) -> str:
    cls = "[" + _WS + "\\-=_:+|" + re.escape(d) + "]"
    return f"^{cls}*(?:---|===){cls}*$"


def _split_line(line: str, d: str) -> list[str]:
    if '"' not in line:
        return line.split(d)
    try:
        return next(csv.reader([line], delimiter=d, skipinitialspace=True), [""])
    except csv.Error:
        return line.split(d)


def _sample_records(lines: list[str], keep: list[int], d: str) -> list[tuple[int, list[str]]]:
    """Records of the kept sample lines, each with the index of its first line.

    Quoted fields may run over several lines, as in the main parse.
    """
    if not any('"' in lines[i] for i in keep):
        return [(i, lines[i].split(d)) for i in keep]
    try:
        reader = csv.reader(
            (lines[i] for i in keep),
            delimiter=d,
            quotechar='"',
            doublequote=True,
            skipinitialspace=True,
            strict=False,
        )
        out, prev = [], 0
        for rec in reader:
            out.append((keep[prev], rec))
            prev = reader.line_num
        return out
    except csv.Error:
        return [(i, lines[i].split(d)) for i in keep]


def _cell_kind(cell: str) -> str:
    c = cell.strip()
    if c.lower() in _MISSING or _NAN_FORMS_RE.match(c):
        return "miss"
    if _NUMLIKE.fullmatch(c):
        return "num"
    return "text"


def _sample_lines(text: str, chars: int) -> list[str]:
    """The first lines of the text: 64 KiB and at most 500 lines, grown (up to 1 MiB)
    until it holds 20 complete lines."""
    while True:
        complete = chars >= len(text)
        lines = text[:chars].split("\n")
        if not complete and len(lines) > 1:
            lines.pop()
        if complete or len(lines) >= _MIN_SAMPLE_LINES or chars >= _SAMPLE_MAX_CHARS:
            return lines[:_SAMPLE_LINES] if chars == _SAMPLE_CHARS else lines
        chars *= 4


_RETRY_LINES = 20_000


def _layout(text: str, display: str) -> _Layout:
    """Analyse the sample; when it holds no usable table, look again at up to 20,000 lines."""
    lines = _sample_lines(text, _SAMPLE_CHARS)
    try:
        return _layout_from(lines, display)
    except IntakeError:
        if len(lines) >= min(text.count("\n") + 1, _RETRY_LINES):
            raise
    end = _offset_of_line(text, _RETRY_LINES + 1)
    wider = text[:end].split("\n")[:_RETRY_LINES]
    return _layout_from(wider, display)


def _layout_from(lines: list[str], display: str) -> _Layout:
    hard_comment = re.compile(_comment_re(None))
    stripped = [ln.strip() for ln in lines]
    candidates: list[tuple[tuple, str, int, list]] = []
    for order, d in enumerate(_DELIMITERS):
        comment = re.compile(_comment_re(d))
        blank = re.compile(_blank_re(d))
        rule = re.compile(_rule_re(d))
        keep = []
        for i, s in enumerate(stripped):
            if not s or blank.match(s) or rule.match(s):
                continue
            if comment.match(s) and not _SHEET_ERROR_RE.match(s):
                continue
            keep.append(i)
        recs = [(i, cells) for i, cells in _sample_records(lines, keep, d) if any(c.strip() for c in cells)]
        if not recs:
            continue
        counts = Counter(len(c) for _, c in recs)
        k = max(counts.items(), key=lambda kv: (kv[1], kv[0]))[0]
        if k < 2:
            continue
        score = budget = 0
        for _, cells in recs:
            if len(cells) == k and budget < _SAMPLE_MAX_CELLS:
                kinds = [_cell_kind(c) for c in cells]
                score += kinds.count("num") - kinds.count("text")
                budget += k
        candidates.append(((score, counts[k], -order), d, k, recs))
    if not candidates:
        any_line = [s for s in stripped if s and not (hard_comment.match(s) and not _SHEET_ERROR_RE.match(s))]
        if not any_line:
            raise IntakeError(
                f"'{display}' holds no table: every line is blank or a comment; choose a file "
                f"with a header line and rows of numbers."
            )
        raise _OneColumnError(
            f"'{display}' has only one column of values (no comma, semicolon, tab or '|' "
            f"between fields); a curve needs two numeric columns, so export x and y as "
            f"separate columns."
        )
    _, d, k, recs = max(candidates, key=lambda c: c[0])
    if k > MAX_COLUMNS:
        raise IntakeError(
            f"'{display}' has {k:,} columns, more than the {MAX_COLUMNS:,} this reader takes; "
            f"export only the columns you need (x, y, and any weights or group)."
        )

    def fit(cells: list[str]) -> list[str] | None:
        return cells[:k] if len(cells) >= k else None

    kinds = []
    for _, cells in recs:
        f = fit(cells)
        kinds.append(None if f is None else [_cell_kind(c) for c in f])
    numeric = []
    for j in range(k):
        n_num = sum(1 for kd in kinds if kd is not None and kd[j] == "num")
        n_text = sum(1 for kd in kinds if kd is not None and kd[j] == "text")
        if n_num >= 1 and n_num >= n_text:
            numeric.append(j)
    if not numeric:
        if len(recs) == 1:
            raise IntakeError(
                f"'{display}' has a header line (line {recs[0][0] + 1}) but no data rows; "
                f"add rows of numbers below the header, or choose another file."
            )
        raise IntakeError(
            f"'{display}' contains no rows of numbers; check that it is a CSV export of "
            f"measurements with one value per cell."
        )

    def is_data(kd) -> bool:
        if kd is None:
            return False
        return all(kd[j] != "text" for j in numeric) and any(kd[j] == "num" for j in numeric)

    data_flags = [is_data(kd) for kd in kinds]
    n_data = sum(data_flags)
    run = min(_RUN, n_data)
    start = None
    for r in (run, 1):
        for b in range(len(recs) - r + 1):
            if all(data_flags[b : b + r]):
                start = b
                break
        if start is not None:
            break
    assert start is not None  # numeric columns exist, so at least one data row does

    data_rows = [recs[b][1] for b in range(start, len(recs)) if data_flags[b]]

    def header_ok(cells: list[str]) -> bool:
        h = len(cells)
        while h and not cells[h - 1].strip():
            h -= 1
        if h == 0:
            return False
        if len(cells) == k:
            return True
        return h <= k and all(not c.strip() for row in data_rows for c in row[h:k])

    def as_k(cells: list[str]) -> list[str]:
        return (list(cells) + [""] * k)[:k]

    header_names = None
    header_line = units_line = from_comment = 0
    unit_cells = None
    if start > 0 and header_ok(recs[start - 1][1]):
        cand_i, cand = recs[start - 1]
        nonempty = [c.strip() for c in cand if c.strip()]
        if (
            start > 1
            and nonempty
            and all(_BRACKETED.match(c) for c in nonempty)
            and header_ok(recs[start - 2][1])
            and not data_flags[start - 2]
        ):
            units_line = cand_i + 1
            unit_cells = as_k(cand)
            cand_i, cand = recs[start - 2]
        header_names = as_k(cand)
        header_line = cand_i + 1
    else:
        first_data_i = recs[start][0]
        prev_i = recs[start - 1][0] if start > 0 else -1
        comment = re.compile(_comment_re(d))
        for i in range(first_data_i - 1, prev_i, -1):
            s = stripped[i]
            if s and comment.match(s) and not _SHEET_ERROR_RE.match(s):
                body = re.sub(r"^(?:#+|//|;+)", "", s).strip()
                cells = _split_line(body, d)
                if header_ok(cells) and all(_cell_kind(c) != "num" for c in cells):
                    header_names = as_k(cells)
                    from_comment = i + 1
                break
    if header_line:
        data_start = (units_line or header_line) + 1
        skipped_until = header_line - 1
    else:
        data_start = recs[start][0] + 1
        skipped_until = data_start - 1
    skipped = [i + 1 for i in range(skipped_until) if stripped[i] and i + 1 != from_comment]
    vote_cells = [row[j] for row in data_rows for j in numeric if j < len(row)]
    decimal = _decide_decimal(d, vote_cells[:_SAMPLE_MAX_CELLS])
    return _Layout(
        delimiter=d,
        k=k,
        decimal=decimal,
        header_names=header_names,
        header_line=header_line,
        units_line=units_line,
        unit_cells=unit_cells,
        header_from_comment=from_comment,
        data_start=data_start,
        skipped=skipped,
    )


_VOTE_SHAPE = re.compile(r"([\d.,]*\d[\d.,]*|[.,]\d+)([eE][+-]?\d+)?", re.ASCII)


def _decimal_vote(cell: str) -> str | None:
    """The decimal mark one sample cell speaks for: ".", ",", "?," / "?." (ambiguous), or None."""
    c = cell.strip().lstrip("+-\u2212").replace(" ", "").replace("\u00a0", "").replace("\u202f", "")
    m = _VOTE_SHAPE.fullmatch(c)
    if not m:
        return None
    body, exp = m.group(1), m.group(2)
    seps = [ch for ch in body if ch in ".,"]
    if not seps:
        return None
    if len(set(seps)) == 2:
        return seps[-1]  # "1.250,5": the last mark is the decimal mark
    mark = seps[0]
    other = "," if mark == "." else "."
    if len(seps) > 1:
        return other  # "1,250,000": a repeated mark is digit grouping
    if exp:
        return mark  # "4,5e2"
    whole, frac = body.split(mark)
    if len(frac) != 3 or not whole or whole.startswith("0") or len(whole) > 3:
        return mark  # "3,41", ",5", "0,125", "1234,567"
    return "?" + mark  # "1,250": grouping or decimal


def _decide_decimal(d: str, cells: list[str]) -> str:
    votes = Counter(_decimal_vote(c) for c in cells)
    comma, point = votes[","], votes["."]
    if comma != point:
        return "," if comma > point else "."
    if comma == 0 and votes["?,"] and d == ";":
        return ","
    return "."


def _offset_of_line(text: str, line: int) -> int:
    pos = 0
    for _ in range(line - 1):
        nxt = text.find("\n", pos)
        if nxt < 0:
            return len(text)
        pos = nxt + 1
    return pos


# --------------------------------------------------------------------------- parsing


@dataclass
class _Columns:
    """What both parse paths hand to ``_finish``: per-column data for the kept rows."""

    values: list[np.ndarray | None]  # float64 per column for numeric ones, else None
    texts: list[pa.Array | None]  # trimmed strings for text columns, else None
    numeric: list[bool]
    nonempty: list[bool]  # column has a non-empty cell in a kept row
    lines: np.ndarray  # line number of each kept row
    rows_read: int
    dropped: dict[str, DropInfo]
    notes: list[str]
    column_notes: list[list[str]]  # per-column notes, named in _finish
    grouping: Counter


def _parse_fast(region: str, layout: _Layout) -> _Columns | None:
    """Arrow's CSV reader straight to float64; None when the file is not that simple."""
    k = layout.k
    region = region.rstrip("\n")  # blank lines at the very end change no line number
    if not region:
        return None
    body = region.encode("utf-8")
    n_lines = body.count(b"\n") + 1
    names = [f"c{j}" for j in range(k)]
    try:
        tbl = pacsv.read_csv(
            io.BytesIO(body),
            read_options=pacsv.ReadOptions(column_names=names, block_size=1 << 22),
            parse_options=pacsv.ParseOptions(delimiter=layout.delimiter, newlines_in_values=False),
            convert_options=pacsv.ConvertOptions(
                column_types={n: pa.float64() for n in names},
                null_values=_ARROW_NULLS,
                strings_can_be_null=True,
                quoted_strings_can_be_null=True,
                decimal_point=layout.decimal,
            ),
        )
    except (pa.ArrowException, ValueError):
        return None
    if tbl.num_rows != n_lines or tbl.num_columns != k:
        return None
    values = []
    for j in range(k):
        v = tbl.column(j).to_numpy()
        if v.dtype != np.float64 or not np.any(~np.isnan(v)):
            return None
        values.append(np.ascontiguousarray(v))
    # A row with no value at all may be a delimiter-only line (",,"), which rule 5 calls
    # blank, or a row of markers ("NA,NA"), which is data: the general path tells them apart.
    if np.logical_and.reduce([np.isnan(v) for v in values]).any():
        return None
    lines = np.arange(layout.data_start, layout.data_start + n_lines, dtype=np.int64)
    return _Columns(
        values=values,
        texts=[None] * k,
        numeric=[True] * k,
        nonempty=[True] * k,
        lines=lines,
        rows_read=n_lines,
        dropped={},
        notes=[],
        column_notes=[_inf_notes(v, lines) for v in values],
        grouping=Counter(),
    )


def _np_bool(arr) -> np.ndarray:
    return np.asarray(pc.fill_null(arr, False).to_numpy(zero_copy_only=False), dtype=bool)


def _match_where(arr, where: np.ndarray, pattern: str) -> np.ndarray:
    """The regex match of ``arr`` against ``pattern``, evaluated only where ``where`` is true."""
    out = np.zeros(len(arr), dtype=bool)
    idx = np.nonzero(where)[0]
    if idx.size:
        out[idx] = _np_bool(pc.match_substring_regex(arr.take(pa.array(idx)), pattern))
    return out


def _parse_general(region: str, layout: _Layout) -> _Columns:
    d, k = layout.delimiter, layout.k
    lines = pc.list_flatten(pc.split_pattern(pa.array([region], pa.large_string()), "\n"))
    trimmed = pc.utf8_trim_whitespace(lines)
    # Cheap prefixes first; the patterns of rule 5 then run only on the candidates.
    prefixes = {d, "#", "//", ";", "-", "=", "_", ":", "+", "|"}
    starts = {c: _np_bool(pc.starts_with(trimmed, c)) for c in prefixes}
    empty_line = _np_bool(pc.equal(trimmed, ""))
    blank_np = empty_line | _match_where(trimmed, starts[d], _blank_re(d))
    rule_cand = np.logical_or.reduce([starts[c] for c in {d, "-", "=", "_", ":", "+", "|"}])
    blank_np |= _match_where(trimmed, rule_cand & ~blank_np, _rule_re(d))
    comment_cand = starts["#"] | starts["//"] | (starts[";"] if d != ";" else False)
    comment_np = comment_cand & ~_match_where(trimmed, comment_cand, _SHEET_ERROR)
    keep_line = ~(blank_np | comment_np)
    all_numbers = np.arange(layout.data_start, layout.data_start + len(lines), dtype=np.int64)
    comment_lines = all_numbers[comment_np]
    kept = pc.filter(lines, pa.array(keep_line))
    kept_numbers = all_numbers[keep_line]
    notes: list[str] = []
    if comment_lines.size:
        notes.append(
            f"Skipped {_plural(comment_lines.size, 'comment line')} inside the data "
            f"({_lines_phrase(comment_lines[:_FIRST_LINES], comment_lines.size)})."
        )

    if '"' in region:
        cols, counts, row_numbers, extra_nonempty, multi = _tokens_quoted(kept, kept_numbers, d, k)
        if multi:
            notes.append(
                f"{_plural(multi[0], 'row')} contain quoted fields that run over several lines "
                f"(first at line {multi[1]}); each was read as one row."
            )
    else:
        cols, counts, row_numbers, extra_nonempty = _tokens_plain(kept, kept_numbers, d, k)

    trimmed_cols = [pc.utf8_trim_whitespace(c) for c in cols]
    empty = [_np_bool(pc.equal(c, "")) for c in trimmed_cols]
    n = len(row_numbers)
    if n:
        all_empty = np.logical_and.reduce(empty)
    else:
        all_empty = np.zeros(0, dtype=bool)
    if all_empty.any():  # e.g. '"",""' lines: blank, like the rule for plain lines
        keep_rows = ~all_empty
        mask = pa.array(keep_rows)
        trimmed_cols = [pc.filter(c, mask) for c in trimmed_cols]
        empty = [e[keep_rows] for e in empty]
        counts = counts[keep_rows]
        row_numbers = row_numbers[keep_rows]
        extra_nonempty = extra_nonempty[keep_rows]
        n = len(row_numbers)

    parsed = [_parse_numbers(c, layout.decimal) for c in trimmed_cols]
    valid = [p[1] for p in parsed]
    missing = [p[2] for p in parsed]
    text_cell = [~v & ~m for v, m in zip(valid, missing, strict=False)]

    # Row kinds removed at intake (rule 12), examined only on the rows that can match.
    summary = np.zeros(n, dtype=bool)
    note = np.zeros(n, dtype=bool)
    repeated = np.zeros(n, dtype=bool)
    if n:
        any_number = np.logical_or.reduce(valid)
        any_text = np.logical_or.reduce(text_cell)
    else:
        any_number = any_text = np.zeros(0, dtype=bool)
    if n:
        # Summary and note words sit in the first non-empty cell, which must be text.
        nonempty = ~np.column_stack(empty)
        first_j = nonempty.argmax(axis=1)
        first_text = np.column_stack(text_cell)[np.arange(n), first_j]
        idx = np.nonzero(first_text)[0]
        if idx.size:
            take = pa.array(idx)
            sub_empty = [e[idx] for e in empty]
            first = pc.coalesce(
                *[
                    pc.if_else(pa.array(e), pa.scalar(None, c.type), c.take(take))
                    for e, c in zip(sub_empty, trimmed_cols, strict=False)
                ]
            )
            summary[idx] = _np_bool(pc.match_substring_regex(first, _SUMMARY))
            note[idx] = _np_bool(pc.match_substring_regex(first, _NOTE))
        heads = None if layout.header_names is None else [h.strip() for h in layout.header_names]
        if heads is not None and any(heads):
            j0 = next(j for j, h in enumerate(heads) if h)
            idx = np.nonzero(_np_bool(pc.equal(trimmed_cols[j0], heads[j0])))[0]
            if idx.size:
                take = pa.array(idx)
                repeated[idx] = np.logical_and.reduce(
                    [_np_bool(pc.equal(c.take(take), h)) for c, h in zip(trimmed_cols, heads, strict=False)]
                )
    text_row = ~any_number & any_text
    dropped: dict[str, DropInfo] = {}
    taken = np.zeros(n, dtype=bool)
    for reason, mask in (
        ("repeated header", repeated),
        ("summary row", summary),
        ("note row", note),
        ("text row", text_row),
    ):
        hit = mask & ~taken
        c = int(hit.sum())
        if c:
            dropped[reason] = DropInfo(c, [int(v) for v in row_numbers[hit][:_FIRST_LINES]])
            taken |= hit
    keep = ~taken
    lines_kept = row_numbers[keep]

    long_rows = lines_kept[extra_nonempty[keep]]
    if long_rows.size:
        notes.append(
            f"{_plural(long_rows.size, 'row')} had more fields than the header "
            f"({_lines_phrase(long_rows[:_FIRST_LINES], long_rows.size)}); the extra fields were ignored."
        )
    short_rows = lines_kept[counts[keep] < k]
    if short_rows.size:
        notes.append(
            f"{_plural(short_rows.size, 'row')} had fewer fields than the header "
            f"({_lines_phrase(short_rows[:_FIRST_LINES], short_rows.size)}); "
            f"the missing fields count as empty."
        )

    keep_arr = pa.array(keep)
    values: list[np.ndarray | None] = []
    texts: list[pa.Array | None] = []
    numeric: list[bool] = []
    nonempty: list[bool] = []
    column_notes: list[list[str]] = []
    grouping: Counter = Counter()
    for j in range(k):
        v_all, ok, miss, groups = parsed[j]
        ok_k, txt_k = ok[keep], text_cell[j][keep]
        n_num, n_txt = int(ok_k.sum()), int(txt_k.sum())
        is_num = n_num >= 1 and n_num >= n_txt
        numeric.append(is_num)
        nonempty.append(bool((~empty[j][keep]).any()))
        cnotes: list[str] = []
        if is_num:
            vals = np.ascontiguousarray(v_all[keep])
            values.append(vals)
            texts.append(None)
            grouping.update({g: int(m[keep].sum()) for g, m in groups.items()})
            if n_txt:
                bad_lines = lines_kept[txt_k]
                sample_vals = pc.filter(pc.filter(trimmed_cols[j], keep_arr), pa.array(txt_k))
                shown = ", ".join(repr(s) for s in sample_vals.slice(0, 3).to_pylist())
                cnotes.append(
                    f"{_plural(n_txt, 'value')} {'is' if n_txt == 1 else 'are'} not a number "
                    f"({_lines_phrase(bad_lines[:_FIRST_LINES], n_txt)}: {shown}) and count as missing."
                )
            cnotes.extend(_inf_notes(vals, lines_kept))
        else:
            values.append(None)
            texts.append(pc.filter(trimmed_cols[j], keep_arr))
        column_notes.append(cnotes)
    return _Columns(
        values=values,
        texts=texts,
        numeric=numeric,
        nonempty=nonempty,
        lines=lines_kept,
        rows_read=n,
        dropped=dropped,
        notes=notes,
        column_notes=column_notes,
        grouping=grouping,
    )


def _tokens_plain(kept, kept_numbers: np.ndarray, d: str, k: int):
    """Split lines without quotes on the delimiter, vectorised."""
    split = pc.split_pattern(kept, d)
    counts = pc.list_value_length(split).to_numpy(zero_copy_only=False).astype(np.int64)
    if counts.size and counts.min() < k:
        pad = pa.scalar(d * k, kept.type)
        split = pc.split_pattern(pc.binary_join_element_wise(kept, pad, pa.scalar("", kept.type)), d)
    if counts.size:
        cols = [pc.list_element(split, j) for j in range(k)]
    else:
        cols = [pa.array([], pa.large_string())] * k
    extra = np.zeros(len(counts), dtype=bool)
    long_idx = np.nonzero(counts > k)[0]
    if long_idx.size:
        texts = kept.take(pa.array(long_idx)).to_pylist()
        extra[long_idx] = [any(f.strip() for f in t.split(d)[k:]) for t in texts]
    return cols, counts, kept_numbers, extra


class _QuoteError(Exception):
    """A quoted field that never closes (or outgrows the csv module's field limit)."""

    def __init__(self, line: int):
        super().__init__(line)
        self.line = line


def _tokens_quoted(kept, kept_numbers: np.ndarray, d: str, k: int):
    """Tokenise with Python's csv module (C code) when the text holds quotes."""
    items = kept.to_pylist()
    opts = dict(delimiter=d, quotechar='"', doublequote=True, skipinitialspace=True, strict=False)
    multi = None
    try:
        records = list(csv.reader(items, **opts))
    except csv.Error:
        records = []  # find the line in the tracking pass below
    if len(records) == len(items):
        numbers = kept_numbers
    else:
        reader = csv.reader(io.StringIO("\n".join(items)), **opts)
        records, starts = [], []
        prev = 0
        n_multi, first_multi = 0, 0
        while True:
            try:
                rec = next(reader)
            except StopIteration:
                break
            except csv.Error:
                raise _QuoteError(int(kept_numbers[prev])) from None
            records.append(rec)
            starts.append(prev)
            span = reader.line_num - prev
            if span > 1:
                n_multi += 1
                first_multi = first_multi or int(kept_numbers[prev])
            prev = reader.line_num
        numbers = kept_numbers[np.asarray(starts, dtype=np.int64)] if starts else kept_numbers[:0]
        multi = (n_multi, first_multi) if n_multi else None
    counts = np.fromiter((len(r) for r in records), dtype=np.int64, count=len(records))
    extra = np.zeros(len(records), dtype=bool)
    for i in np.nonzero(counts != k)[0]:
        rec = records[i]
        if len(rec) > k:
            extra[i] = any(f.strip() for f in rec[k:])
        records[i] = (rec + [""] * k)[:k]
    if records:
        cols = [pa.array(list(c), pa.large_string()) for c in zip(*records, strict=False)]
    else:
        cols = [pa.array([], pa.large_string()) for _ in range(k)]
    return cols, counts, numbers, extra, multi


def _number_patterns(decimal: str):
    dm = re.escape(decimal)
    plain = f"^[+-]?(?:\\d+(?:{dm}\\d*)?|{dm}\\d+)(?:[eE][+-]?\\d+)?$"
    inf = "(?i)^[+-]?inf(?:inity)?$"
    marks = ["." if decimal == "," else ",", " ", "\u00a0", "\u202f"]
    grouped = {g: f"^[+-]?\\d{{1,3}}(?:{re.escape(g) if g in '.,' else g}\\d{{3}})+(?:{dm}\\d*)?$" for g in marks}
    return plain, inf, grouped


def _parse_numbers(arr, decimal: str):
    """Parse a column of trimmed strings: (float64 values, is_number, is_missing, grouping masks).

    The plain pattern runs on every cell; markers, infinities and digit grouping are
    checked only on the cells it rejects.
    """
    plain_re, inf_re, grouped_re = _number_patterns(decimal)
    n = len(arr)
    s = arr
    if n and pc.any(pc.match_substring(s, "\u2212")).as_py():
        s = pc.replace_substring(s, "\u2212", "-")
    if n and pc.any(pc.match_substring(s, "\u221e")).as_py():
        s = pc.replace_substring(s, "\u221e", "inf")
    plain = _np_bool(pc.match_substring_regex(s, plain_re))
    valid = plain.copy()
    missing = np.zeros(n, dtype=bool)
    groups: dict[str, np.ndarray] = {}
    out = np.full(n, np.nan, dtype=np.float64)
    rest = np.nonzero(~plain)[0]
    rest_canon = None
    rest_valid = np.zeros(rest.size, dtype=bool)
    if rest.size:
        take = pa.array(rest)
        sub, sub_raw = s.take(take), arr.take(take)
        rest_valid = _np_bool(pc.match_substring_regex(sub, inf_re))
        rest_canon = sub
        for g, pattern in grouped_re.items():
            if not pc.any(pc.match_substring(sub, g)).as_py():
                continue
            m = _np_bool(pc.match_substring_regex(sub, pattern)) & ~rest_valid
            if m.any():
                rest_canon = pc.if_else(pa.array(m), pc.replace_substring(rest_canon, g, ""), rest_canon)
                key = " " if g in "\u00a0\u202f" else g
                full = groups.setdefault(key, np.zeros(n, dtype=bool))
                full[rest[m]] = True
                rest_valid |= m
        miss = _np_bool(pc.is_in(pc.utf8_lower(sub_raw), value_set=_MISSING_ARROW))
        miss |= _np_bool(pc.match_substring_regex(sub_raw, _NAN_FORMS))
        missing[rest] = miss & ~rest_valid
        valid[rest] = rest_valid

    def to_float(strings) -> np.ndarray:
        if decimal == ",":
            strings = pc.replace_substring(strings, ",", ".")
        return np.asarray(pc.cast(strings, pa.float64()).to_numpy(zero_copy_only=False), dtype=np.float64)

    if plain.all():
        out = to_float(s) if n else out
    elif plain.any():
        out[plain] = to_float(s.filter(pa.array(plain)))
    if rest_valid.any():
        out[rest[rest_valid]] = to_float(rest_canon.filter(pa.array(rest_valid)))
    return out, valid, missing, groups


def _inf_notes(values: np.ndarray, lines: np.ndarray) -> list[str]:
    inf = np.isinf(values)
    n = int(inf.sum())
    if not n:
        return []
    return [
        f"{_plural(n, 'infinite value')} ({_lines_phrase(lines[inf][:_FIRST_LINES], n)}); "
        f"rows with an infinite x or y are left out of a fit."
    ]


# --------------------------------------------------------------------------- assembling


def _finish(display: str, encoding: str, layout: _Layout, cols: _Columns) -> Table:
    k = layout.k
    notes = []
    if layout.skipped:
        s = layout.skipped
        where = f"line {s[0]}" if len(s) == 1 else f"lines {s[0]}–{s[-1]}"
        above = "the header" if layout.header_line else "the data"
        notes.append(f"Skipped {_plural(len(s), 'line')} of metadata or comments above {above} ({where}).")
    if layout.units_line:
        notes.append(f"Line {layout.units_line} holds the units of the columns.")
    if layout.header_from_comment:
        notes.append(f"The column names were taken from the comment on line {layout.header_from_comment}.")
    elif layout.header_names is None:
        notes.append("No header line was found; the columns are named column 1, column 2, and so on.")
    notes.extend(cols.notes)

    raw = layout.header_names or [""] * k
    units_src = layout.unit_cells
    kept_idx = []
    for j in range(k):
        if not raw[j].strip() and not cols.nonempty[j]:
            continue
        kept_idx.append(j)
    n_empty_dropped = k - len(kept_idx)
    if n_empty_dropped:
        notes.append(
            f"Ignored {_plural(n_empty_dropped, 'empty column')} without a name "
            f"(usually a delimiter at the end of each line)."
        )

    names: list[str] = []
    units: dict[str, str] = {}
    seen: set[str] = set()
    column_data = {}
    text_arrays = {}
    numeric_names = []
    for j in kept_idx:
        base = " ".join(raw[j].split())
        if not base:
            base = f"column {j + 1}"
            if layout.header_names is not None:
                notes.append(f"Column {j + 1} has no name in the header; it is called '{base}'.")
        unit = _unit_of(base)
        if units_src is not None and units_src[j].strip():
            unit = units_src[j].strip()[1:-1].strip() or unit
        final = base
        if final in seen:
            c = 2
            while f"{base} ({c})" in seen:
                c += 1
            final = f"{base} ({c})"
            notes.append(f"The column name '{base}' appears more than once; column {j + 1} is called '{final}'.")
        seen.add(final)
        names.append(final)
        if unit:
            units[final] = unit
        if cols.numeric[j]:
            numeric_names.append(final)
            column_data[final] = cols.values[j]
        else:
            t = cols.texts[j]
            t = pc.if_else(pc.equal(t, ""), pa.scalar(None, t.type), t)
            text_arrays[final] = t
            column_data[final] = pd.Series(pd.array(t, dtype="str"))
        for cn in cols.column_notes[j]:
            notes.append(f"Column '{final}': {cn}")
    numeric_set = set(numeric_names)
    text_names = [n for n in names if n not in numeric_set]
    time_names = [n for n in text_names if _looks_like_time(text_arrays[n])]
    if text_names and len(numeric_names) >= 2:
        notes.append(
            f"{_plural(len(text_names), 'column')} hold{'s' if len(text_names) == 1 else ''} text "
            f"and can serve as a group: {', '.join(repr(n) for n in text_names)}."
        )
    for n in time_names:
        notes.append(
            f"Column '{n}' holds dates or times, which are kept as text; to fit against time, "
            f"export it as elapsed time in a number column."
        )

    if cols.rows_read == 0:
        where = f"a header line (line {layout.header_line}) but" if layout.header_line else ""
        raise IntakeError(
            f"'{display}' has {where} no data rows; add rows of numbers below the header, or choose another file."
        )
    if len(numeric_names) < 2:
        found = f"only one numeric column ({numeric_names[0]!r})" if numeric_names else "no numeric columns"
        if time_names:
            raise IntakeError(
                f"'{display}' has {found}, and '{time_names[0]}' holds dates or times, which are "
                f"not read as numbers; export the time as elapsed seconds (or another number) "
                f"and load the file again."
            )
        raise IntakeError(
            f"'{display}' has {found}; a curve needs two, so add an x and a y column of numbers "
            f"(or check that the delimiter and decimal mark are consistent)."
        )

    # One float64 block for the numeric columns, then the text columns, in file order.
    n_rows = len(cols.lines)
    numeric_frame = pd.DataFrame(
        (np.column_stack([column_data[c] for c in numeric_names]) if n_rows else np.empty((0, len(numeric_names)))),
        columns=pd.Index(numeric_names),
        index=pd.RangeIndex(n_rows),
    )
    if text_names:
        text_frame = pd.DataFrame({c: column_data[c] for c in text_names}, index=pd.RangeIndex(n_rows))
        frame = pd.concat([numeric_frame, text_frame], axis=1)[names]
    else:
        frame = numeric_frame
    thousands = None
    if cols.grouping:
        mark, count = cols.grouping.most_common(1)[0]
        thousands = mark if count else None
    report = IntakeReport(
        source_name=display,
        encoding=encoding,
        delimiter=layout.delimiter,
        decimal=layout.decimal,
        thousands=thousands,
        header_line=layout.header_line,
        rows_read=int(cols.rows_read),
        columns=names,
        numeric_columns=numeric_names,
        units=units,
        dropped=dict(cols.dropped),
        notes=notes,
    )
    return Table(frame=frame, report=report, _line_numbers=np.asarray(cols.lines, dtype=np.int64))


_TIME_LIKE = (
    "^(?:\\d{4}-\\d{1,2}-\\d{1,2}(?:[ T]\\d{1,2}:\\d{2}(?::\\d{2}(?:[.,]\\d+)?)?)?"
    "|\\d{1,2}[./]\\d{1,2}[./]\\d{2,4}(?: \\d{1,2}:\\d{2}(?::\\d{2})?)?"
    "|\\d{1,2}:\\d{2}(?::\\d{2}(?:[.,]\\d+)?)?)(?:Z|[+-]\\d{2}:?\\d{2})?$"
)


def _looks_like_time(arr) -> bool:
    """True when at least 80 % of the first 10,000 non-empty cells are dates or clock times."""
    arr = pc.drop_null(arr).slice(0, 10_000)
    if len(arr) == 0:
        return False
    hits = pc.sum(pc.cast(pc.match_substring_regex(arr, _TIME_LIKE), pa.int64())).as_py() or 0
    return hits >= 0.8 * len(arr)


def _unit_of(name: str) -> str | None:
    m = _UNIT_BRACKET.match(name)
    unit = None
    if m and m.group("name").strip():
        unit = (m.group("p") if m.group("p") is not None else m.group("b")).strip()
    else:
        m = _UNIT_SLASH.match(name)
        if m:
            unit = m.group("u").strip()
    if not unit or re.fullmatch(r"[\d\s.,]+", unit):
        return None
    return unit


# --------------------------------------------------------------------------- wording


def _plural(n: int, noun: str) -> str:
    n = int(n)
    if n == 1:
        return f"1 {noun}"
    head, _, last = noun.rpartition(" ")
    word = last if last else noun
    plural = word + ("es" if word.endswith(("s", "x")) else "s")
    return f"{n:,} {head + ' ' if head else ''}{plural}"


def _lines_phrase(lines, total: int) -> str:
    lines = [int(v) for v in lines]
    if not lines:
        return "no lines"
    head = "line " if len(lines) == 1 else "lines "
    text = head + ", ".join(str(v) for v in lines)
    if total > len(lines):
        text += ", …"
    return text


def _mark_word(mark: str | None) -> str:
    return {".": "'.'", ",": "','", " ": "space"}.get(mark, repr(mark))


def _size_text(n: int) -> str:
    if n < 1024:
        return f"{n} bytes"
    for unit, scale in (("GiB", 1 << 30), ("MiB", 1 << 20), ("KiB", 1 << 10)):
        if n >= scale:
            v = n / scale
            return f"{v:.0f} {unit}" if v == int(v) else f"{v:.1f} {unit}"
    return f"{n} bytes"


def _json_list(arr: np.ndarray) -> list:
    out = []
    for v in arr.tolist():
        if isinstance(v, float) and not math.isfinite(v):
            out.append(None)
        else:
            out.append(v)
    return out
