"""Stage 2: the dialect from a sample (rules 5-8): delimiter, header, units line, decimal mark."""

from __future__ import annotations

import csv
import re
from collections import Counter
from dataclasses import dataclass

from .._errors import IntakeError
from ._patterns import (
    _BRACKETED,
    _DELIMITERS,
    _MIN_SAMPLE_LINES,
    _RUN,
    _SAMPLE_CHARS,
    _SAMPLE_LINES,
    _SAMPLE_MAX_CELLS,
    _SAMPLE_MAX_CHARS,
    _SHEET_ERROR_RE,
    MAX_COLUMNS,
    blank_re,
    cell_kind,
    comment_re,
    rule_re,
)
from ._wording import echo

_RETRY_LINES = 20_000


class OneColumnError(IntakeError):
    """The text has a single column of values (no delimiter between fields)."""


class _TooWide(Exception):
    """The sample's rows have more than MAX_COLUMNS fields; the caller counts them on the full line."""

    def __init__(self, delimiter: str, line_index: int, k: int):
        super().__init__(delimiter, line_index, k)
        self.delimiter, self.line_index, self.k = delimiter, line_index, k


@dataclass
class Dialect:
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


@dataclass
class _Candidate:
    """One delimiter's reading of the sample."""

    d: str
    k: int
    recs: list  # (line index, cells) of the non-blank, non-comment records


def split_line(line: str, d: str) -> list[str]:
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


def detect_dialect(text: str, display: str, delimiters: tuple[str, ...] = _DELIMITERS) -> Dialect:
    """Analyse the sample; when it holds no usable table, look again at up to 20,000 lines."""
    lines = _sample_lines(text, _SAMPLE_CHARS)
    try:
        try:
            return _dialect_from(lines, display, delimiters)
        except IntakeError:
            if len(lines) >= min(text.count("\n") + 1, _RETRY_LINES):
                raise
        end = offset_of_line(text, _RETRY_LINES + 1)
        wider = text[:end].split("\n")[:_RETRY_LINES]
        return _dialect_from(wider, display, delimiters)
    except _TooWide as wide:
        raise _too_wide_error(text, display, wide) from None


def _too_wide_error(text: str, display: str, wide: _TooWide) -> IntakeError:
    """Count the fields of the widest sample row on its whole line (the sample may have cut it)."""
    start = offset_of_line(text, wide.line_index + 1)
    end = text.find("\n", start)
    line = text[start : end if end >= 0 else len(text)]
    count = len(split_line(line, wide.delimiter)) if '"' in line else line.count(wide.delimiter) + 1
    return IntakeError(
        f"{echo(display)} has {count:,} columns, more than the {MAX_COLUMNS:,} this reader takes; "
        f"export only the columns you need (x, y, and any weights or group)."
    )


def _dialect_from(lines: list[str], display: str, delimiters: tuple[str, ...]) -> Dialect:
    stripped = [ln.strip() for ln in lines]
    cand = _choose_delimiter(lines, stripped, display, delimiters)
    d, k, recs = cand.d, cand.k, cand.recs
    kinds = [None if len(cells) < k else [cell_kind(c) for c in cells[:k]] for _, cells in recs]
    numeric = _numeric_columns(kinds, k, recs, display)
    data_flags = [_is_data(kd, numeric) for kd in kinds]
    start = _first_data_run(data_flags)
    data_rows = [recs[b][1] for b in range(start, len(recs)) if data_flags[b]]
    head = _find_header(recs, start, data_flags, data_rows, k)
    if head is None:
        head = _header_from_comment(stripped, recs, start, data_rows, d, k)
    header_names, header_line, units_line, unit_cells, from_comment = head
    if header_line:
        data_start = (units_line or header_line) + 1
        skipped_until = header_line - 1
    else:
        data_start = recs[start][0] + 1
        skipped_until = data_start - 1
    skipped = [i + 1 for i in range(skipped_until) if stripped[i] and i + 1 != from_comment]
    vote_cells = [row[j] for row in data_rows for j in numeric if j < len(row)]
    return Dialect(
        delimiter=d,
        k=k,
        decimal=decide_decimal(d, vote_cells[:_SAMPLE_MAX_CELLS]),
        header_names=header_names,
        header_line=header_line,
        units_line=units_line,
        unit_cells=unit_cells,
        header_from_comment=from_comment,
        data_start=data_start,
        skipped=skipped,
    )


def _is_comment(s: str, comment: re.Pattern) -> bool:
    return bool(comment.match(s)) and not _SHEET_ERROR_RE.match(s)


def _candidate(lines, stripped, d: str, order: int):
    """(score, candidate) of one delimiter, or None when its modal field count is below 2."""
    comment, blank, rule = re.compile(comment_re(d)), re.compile(blank_re(d)), re.compile(rule_re(d))
    keep = [
        i
        for i, s in enumerate(stripped)
        if s and not blank.match(s) and not rule.match(s) and not _is_comment(s, comment)
    ]
    recs = [(i, cells) for i, cells in _sample_records(lines, keep, d) if any(c.strip() for c in cells)]
    if not recs:
        return None
    counts = Counter(len(c) for _, c in recs)
    k = max(counts.items(), key=lambda kv: (kv[1], kv[0]))[0]
    if k < 2:
        return None
    score = budget = 0
    for _, cells in recs:
        if len(cells) == k and budget < _SAMPLE_MAX_CELLS:
            kinds = [cell_kind(c) for c in cells]
            score += kinds.count("num") - kinds.count("text")
            budget += k
    return (score, counts[k], -order), _Candidate(d, k, recs)


def _choose_delimiter(lines, stripped, display: str, delimiters) -> _Candidate:
    """Rule 6: the delimiter whose k-field lines hold the most numbers."""
    scored = [c for order, d in enumerate(delimiters) if (c := _candidate(lines, stripped, d, order))]
    if not scored:
        _refuse_no_table(stripped, display, delimiters)
    best = max(scored, key=lambda c: c[0])[1]
    if best.k > MAX_COLUMNS:
        first = next(i for i, cells in best.recs if len(cells) == best.k)
        raise _TooWide(best.d, first, best.k)
    return best


def _refuse_no_table(stripped: list[str], display: str, delimiters) -> None:
    hard_comment = re.compile(comment_re(None))
    any_line = [s for s in stripped if s and not _is_comment(s, hard_comment)]
    if not any_line:
        raise IntakeError(
            f"{echo(display)} holds no table: every line is blank or a comment; choose a file "
            f"with a header line and rows of numbers."
        )
    only_marks = re.compile("^[\\s" + re.escape("".join(delimiters)) + "]*$")
    if all(only_marks.match(s) for s in any_line):
        raise IntakeError(
            f"{echo(display)} holds no values: its lines hold only delimiters (such as ',,,') "
            f"and spaces; choose a file with a header line and rows of numbers."
        )
    raise OneColumnError(
        f"{echo(display)} has only one column of values (no comma, semicolon, tab or '|' "
        f"between fields); a curve needs two numeric columns, so export x and y as "
        f"separate columns."
    )


def _numeric_columns(kinds, k: int, recs, display: str) -> list[int]:
    """Rule 7: a column is numeric when it has at least as many number-like cells as text cells."""
    numeric = []
    for j in range(k):
        n_num = sum(1 for kd in kinds if kd is not None and kd[j] == "num")
        n_text = sum(1 for kd in kinds if kd is not None and kd[j] == "text")
        if n_num >= 1 and n_num >= n_text:
            numeric.append(j)
    if numeric:
        return numeric
    if len(recs) == 1:
        raise IntakeError(
            f"{echo(display)} has a header line (line {recs[0][0] + 1}) but no data rows; "
            f"add rows of numbers below the header, or choose another file."
        )
    raise IntakeError(
        f"{echo(display)} contains no rows of numbers; check that it is a CSV export of "
        f"measurements with one value per cell."
    )


def _is_data(kd, numeric: list[int]) -> bool:
    if kd is None:
        return False
    return all(kd[j] != "text" for j in numeric) and any(kd[j] == "num" for j in numeric)


def _first_data_run(data_flags: list[bool]) -> int:
    """Rule 7: the data starts at the first run of three data rows (or as many as there are)."""
    run = min(_RUN, sum(data_flags))
    for r in (run, 1):
        for b in range(len(data_flags) - r + 1):
            if all(data_flags[b : b + r]):
                return b
    raise AssertionError("numeric columns exist, so at least one data row does")  # pragma: no cover


def _header_ok(cells: list[str], k: int, data_rows) -> bool:
    h = len(cells)
    while h and not cells[h - 1].strip():
        h -= 1
    if h == 0:
        return False
    if len(cells) == k:
        return True
    return h <= k and all(not c.strip() for row in data_rows for c in row[h:k])


def _as_k(cells: list[str], k: int) -> list[str]:
    return (list(cells) + [""] * k)[:k]


def _find_header(recs, start: int, data_flags, data_rows, k: int):
    """Rule 7: the header (and a units line under it) just above the data, or None."""
    if start == 0 or not _header_ok(recs[start - 1][1], k, data_rows):
        return None
    cand_i, cand = recs[start - 1]
    nonempty = [c.strip() for c in cand if c.strip()]
    units_line, unit_cells = 0, None
    if (
        start > 1
        and nonempty
        and all(_BRACKETED.match(c) for c in nonempty)
        and _header_ok(recs[start - 2][1], k, data_rows)
        and not data_flags[start - 2]
    ):
        units_line = cand_i + 1
        unit_cells = _as_k(cand, k)
        cand_i, cand = recs[start - 2]
    return _as_k(cand, k), cand_i + 1, units_line, unit_cells, 0


def _header_from_comment(stripped, recs, start: int, data_rows, d: str, k: int):
    """Rule 7: without a header line, the last comment above the data may name the columns."""
    first_data_i = recs[start][0]
    prev_i = recs[start - 1][0] if start > 0 else -1
    comment = re.compile(comment_re(d))
    for i in range(first_data_i - 1, prev_i, -1):
        s = stripped[i]
        if s and _is_comment(s, comment):
            body = re.sub(r"^(?:#+|//|;+)", "", s).strip()
            cells = split_line(body, d)
            if _header_ok(cells, k, data_rows) and all(cell_kind(c) != "num" for c in cells):
                return _as_k(cells, k), 0, 0, None, i + 1
            break
    return None, 0, 0, None, 0


_VOTE_SHAPE = re.compile(r"([\d.,]*\d[\d.,]*|[.,]\d+)([eE][+-]?\d+)?", re.ASCII)


def decimal_vote(cell: str) -> str | None:
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


def decide_decimal(d: str, cells: list[str]) -> str:
    """Rule 8: the decimal mark by a vote of the sample's numeric cells."""
    votes = Counter(decimal_vote(c) for c in cells)
    comma, point = votes[","], votes["."]
    if comma != point:
        return "," if comma > point else "."
    if comma == 0 and votes["?,"] and d == ";":
        return ","
    return "."


def offset_of_line(text: str, line: int) -> int:
    pos = 0
    for _ in range(line - 1):
        nxt = text.find("\n", pos)
        if nxt < 0:
            return len(text)
        pos = nxt + 1
    return pos
