"""Stage 3: the data region to columns (rules 5, 9-12), by Arrow's CSV reader or the general path."""

from __future__ import annotations

import io
from collections import Counter
from dataclasses import dataclass

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

from ._dialect import Dialect
from ._patterns import _ARROW_NULLS, _FIRST_LINES, _NOTE, _SHEET_ERROR, _SUMMARY, blank_re, rule_re
from ._results import DropInfo
from ._tokens import inf_notes, match_where, np_bool, parse_numbers, tokens_plain, tokens_quoted
from ._wording import echo, lines_phrase, plural


@dataclass
class Columns:
    """What both parse paths hand to ``assemble``: per-column data for the kept rows."""

    values: list[np.ndarray | None]  # float64 per column for numeric ones, else None
    texts: list[pa.Array | None]  # trimmed strings for text columns, else None
    numeric: list[bool]
    nonempty: list[bool]  # column has a non-empty cell in a kept row
    lines: np.ndarray  # line number of each kept row
    rows_read: int
    dropped: dict[str, DropInfo]
    notes: list[str]
    column_notes: list[list[str]]  # per-column notes, named in assemble
    grouping: Counter


@dataclass
class _Rows:
    """The data rows of the general path: trimmed cells per column and what each row is."""

    cols: list  # trimmed Arrow string arrays, one per column
    empty: list  # per column: the cell is empty
    counts: np.ndarray  # fields the row had
    numbers: np.ndarray  # line number of each row
    extra: np.ndarray  # the row had non-empty fields beyond the header's


def parse_fast(region: str, layout: Dialect) -> Columns | None:
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
    return Columns(
        values=values,
        texts=[None] * k,
        numeric=[True] * k,
        nonempty=[True] * k,
        lines=lines,
        rows_read=n_lines,
        dropped={},
        notes=[],
        column_notes=[inf_notes(v, lines) for v in values],
        grouping=Counter(),
    )


def parse_general(region: str, dialect: Dialect) -> Columns:
    """Every rule, vectorised: line kinds, fields, numbers, rows removed at intake."""
    kept, kept_numbers, notes = _classify_lines(region, dialect)
    rows = _tokenise(kept, kept_numbers, dialect, notes, quoted='"' in region)
    rows = _drop_empty_rows(rows)
    parsed = [parse_numbers(c, dialect.decimal) for c in rows.cols]
    text_cell = [~p[1] & ~p[2] for p in parsed]
    dropped, keep = _intake_row_kinds(rows, parsed, text_cell, dialect)
    notes.extend(_shape_notes(rows, keep, dialect.k))
    out = _columns_from_cells(rows, parsed, text_cell, keep)
    out.rows_read, out.dropped, out.notes = len(rows.numbers), dropped, notes
    return out


def _classify_lines(region: str, dialect: Dialect):
    """Rule 5 on every line: (kept lines, their numbers, notes); cheap prefixes first."""
    d = dialect.delimiter
    lines = pc.list_flatten(pc.split_pattern(pa.array([region], pa.large_string()), "\n"))
    trimmed = pc.utf8_trim_whitespace(lines)
    prefixes = {d, "#", "//", ";", "-", "=", "_", ":", "+", "|"}
    starts = {c: np_bool(pc.starts_with(trimmed, c)) for c in prefixes}
    blank = np_bool(pc.equal(trimmed, "")) | match_where(trimmed, starts[d], blank_re(d))
    rule_cand = np.logical_or.reduce([starts[c] for c in {d, "-", "=", "_", ":", "+", "|"}])
    blank |= match_where(trimmed, rule_cand & ~blank, rule_re(d))
    comment_cand = starts["#"] | starts["//"] | (starts[";"] if d != ";" else False)
    comment = comment_cand & ~match_where(trimmed, comment_cand, _SHEET_ERROR)
    keep_line = ~(blank | comment)
    all_numbers = np.arange(dialect.data_start, dialect.data_start + len(lines), dtype=np.int64)
    comment_lines = all_numbers[comment]
    notes: list[str] = []
    if comment_lines.size:
        notes.append(
            f"Skipped {plural(comment_lines.size, 'comment line')} inside the data "
            f"({lines_phrase(comment_lines[:_FIRST_LINES], comment_lines.size)})."
        )
    return pc.filter(lines, pa.array(keep_line)), all_numbers[keep_line], notes


def _tokenise(kept, kept_numbers: np.ndarray, dialect: Dialect, notes: list[str], *, quoted: bool) -> _Rows:
    d, k = dialect.delimiter, dialect.k
    if quoted:
        cols, counts, numbers, extra, multi = tokens_quoted(kept, kept_numbers, d, k)
        if multi:
            notes.append(
                f"{plural(multi[0], 'row')} contain quoted fields that run over several lines "
                f"(first at line {multi[1]}); each was read as one row."
            )
    else:
        cols, counts, numbers, extra = tokens_plain(kept, kept_numbers, d, k)
    trimmed = [pc.utf8_trim_whitespace(c) for c in cols]
    empty = [np_bool(pc.equal(c, "")) for c in trimmed]
    return _Rows(trimmed, empty, counts, numbers, extra)


def _drop_empty_rows(rows: _Rows) -> _Rows:
    """A row whose fields are all empty ('"",""') is blank, like the rule for plain lines."""
    if not len(rows.numbers):
        return rows
    keep = ~np.logical_and.reduce(rows.empty)
    if keep.all():
        return rows
    mask = pa.array(keep)
    return _Rows(
        [pc.filter(c, mask) for c in rows.cols],
        [e[keep] for e in rows.empty],
        rows.counts[keep],
        rows.numbers[keep],
        rows.extra[keep],
    )


def _first_cells(rows: _Rows, idx: np.ndarray):
    """The first non-empty cell of each row in ``idx`` (an Arrow string array)."""
    take = pa.array(idx)
    return pc.coalesce(
        *[
            pc.if_else(pa.array(e[idx]), pa.scalar(None, c.type), c.take(take))
            for e, c in zip(rows.empty, rows.cols, strict=False)
        ]
    )


def _repeated_header(rows: _Rows, dialect: Dialect, n: int) -> np.ndarray:
    repeated = np.zeros(n, dtype=bool)
    heads = None if dialect.header_names is None else [h.strip() for h in dialect.header_names]
    if heads is None or not any(heads):
        return repeated
    j0 = next(j for j, h in enumerate(heads) if h)
    idx = np.nonzero(np_bool(pc.equal(rows.cols[j0], heads[j0])))[0]
    if idx.size:
        take = pa.array(idx)
        repeated[idx] = np.logical_and.reduce(
            [np_bool(pc.equal(c.take(take), h)) for c, h in zip(rows.cols, heads, strict=False)]
        )
    return repeated


def _intake_row_kinds(rows: _Rows, parsed, text_cell, dialect: Dialect):
    """Rule 12: (dropped by reason, rows kept); examined only on the rows that can match."""
    n = len(rows.numbers)
    summary = np.zeros(n, dtype=bool)
    note = np.zeros(n, dtype=bool)
    text_row = np.zeros(n, dtype=bool)
    if n:
        text_row = ~np.logical_or.reduce([p[1] for p in parsed]) & np.logical_or.reduce(text_cell)
        first_j = (~np.column_stack(rows.empty)).argmax(axis=1)
        first_text = np.column_stack(text_cell)[np.arange(n), first_j]
        idx = np.nonzero(first_text)[0]
        if idx.size:  # summary and note words sit in the first non-empty cell, which must be text
            first = _first_cells(rows, idx)
            summary[idx] = np_bool(pc.match_substring_regex(first, _SUMMARY))
            note[idx] = np_bool(pc.match_substring_regex(first, _NOTE))
    dropped: dict[str, DropInfo] = {}
    taken = np.zeros(n, dtype=bool)
    for reason, mask in (
        ("repeated header", _repeated_header(rows, dialect, n)),
        ("summary row", summary),
        ("note row", note),
        ("text row", text_row),
    ):
        hit = mask & ~taken
        if hit.any():
            dropped[reason] = DropInfo.of(rows.numbers[hit])
            taken |= hit
    return dropped, ~taken


def _shape_notes(rows: _Rows, keep: np.ndarray, k: int) -> list[str]:
    """Rule 11: rows longer or shorter than the header."""
    notes = []
    lines_kept = rows.numbers[keep]
    long_rows = lines_kept[rows.extra[keep]]
    if long_rows.size:
        notes.append(
            f"{plural(long_rows.size, 'row')} had more fields than the header "
            f"({lines_phrase(long_rows[:_FIRST_LINES], long_rows.size)}); the extra fields were ignored."
        )
    short_rows = lines_kept[rows.counts[keep] < k]
    if short_rows.size:
        notes.append(
            f"{plural(short_rows.size, 'row')} had fewer fields than the header "
            f"({lines_phrase(short_rows[:_FIRST_LINES], short_rows.size)}); "
            f"the missing fields count as empty."
        )
    return notes


def _columns_from_cells(rows: _Rows, parsed, text_cell, keep: np.ndarray) -> Columns:
    """Rule 13 per column over the kept rows: numeric (float64) or text."""
    keep_arr = pa.array(keep)
    lines_kept = rows.numbers[keep]
    out = Columns([], [], [], [], lines_kept, 0, {}, [], [], Counter())
    for j, (v_all, ok, _miss, groups) in enumerate(parsed):
        ok_k, txt_k = ok[keep], text_cell[j][keep]
        n_num, n_txt = int(ok_k.sum()), int(txt_k.sum())
        is_num = n_num >= 1 and n_num >= n_txt
        out.numeric.append(is_num)
        out.nonempty.append(bool((~rows.empty[j][keep]).any()))
        cnotes: list[str] = []
        if is_num:
            vals = np.ascontiguousarray(v_all[keep])
            out.values.append(vals)
            out.texts.append(None)
            out.grouping.update({g: int(m[keep].sum()) for g, m in groups.items()})
            if n_txt:
                bad = pc.filter(pc.filter(rows.cols[j], keep_arr), pa.array(txt_k))
                shown = ", ".join(echo(s) for s in bad.slice(0, 3).to_pylist())
                cnotes.append(
                    f"{plural(n_txt, 'value')} {'is' if n_txt == 1 else 'are'} not a number "
                    f"({lines_phrase(lines_kept[txt_k][:_FIRST_LINES], n_txt)}: {shown}) and count as missing."
                )
            cnotes.extend(inf_notes(vals, lines_kept))
        else:
            out.values.append(None)
            out.texts.append(pc.filter(rows.cols[j], keep_arr))
        out.column_notes.append(cnotes)
    return out
