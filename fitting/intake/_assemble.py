"""Stage 4: columns to a Table (rules 13-14): names, units, text columns, the frame and the report."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.compute as pc

from .._errors import IntakeError
from ._dialect import Dialect
from ._parse import Columns
from ._patterns import _UNIT_BRACKET, _UNIT_SLASH
from ._results import IntakeReport, Table
from ._wording import echo, echo_list, plural


def assemble(display: str, encoding: str, dialect: Dialect, cols: Columns) -> Table:
    """The Table of the kept rows, with every note the rules call for."""
    notes = _dialect_notes(dialect) + list(cols.notes)
    raw = dialect.header_names or [""] * dialect.k
    kept_idx = [j for j in range(dialect.k) if raw[j].strip() or cols.nonempty[j]]
    n_empty_dropped = dialect.k - len(kept_idx)
    if n_empty_dropped:
        notes.append(
            f"Ignored {plural(n_empty_dropped, 'empty column')} without a name "
            f"(usually a delimiter at the end of each line)."
        )
    names, units, column_data, text_arrays, numeric_names = _name_columns(dialect, cols, kept_idx, notes)
    text_names = [n for n in names if n not in set(numeric_names)]
    time_names = [n for n in text_names if looks_like_time(text_arrays[n])]
    notes.extend(_text_column_notes(text_names, time_names, numeric_names))
    _refuse_too_few(display, dialect, cols, numeric_names, time_names)
    frame = _build_frame(names, numeric_names, text_names, column_data, len(cols.lines))
    thousands = None
    if cols.grouping:
        mark, count = cols.grouping.most_common(1)[0]
        thousands = mark if count else None
    report = IntakeReport(
        source_name=display,
        encoding=encoding,
        delimiter=dialect.delimiter,
        decimal=dialect.decimal,
        thousands=thousands,
        header_line=dialect.header_line,
        rows_read=int(cols.rows_read),
        columns=names,
        numeric_columns=numeric_names,
        units=units,
        dropped=dict(cols.dropped),
        notes=notes,
    )
    return Table(frame=frame, report=report, _line_numbers=np.asarray(cols.lines, dtype=np.int64))


def _dialect_notes(dialect: Dialect) -> list[str]:
    notes = []
    if dialect.skipped:
        s = dialect.skipped
        where = f"line {s[0]}" if len(s) == 1 else f"lines {s[0]}–{s[-1]}"
        above = "the header" if dialect.header_line else "the data"
        notes.append(f"Skipped {plural(len(s), 'line')} of metadata or comments above {above} ({where}).")
    if dialect.units_line:
        notes.append(f"Line {dialect.units_line} holds the units of the columns.")
    if dialect.header_from_comment:
        notes.append(f"The column names were taken from the comment on line {dialect.header_from_comment}.")
    elif dialect.header_names is None:
        notes.append("No header line was found; the columns are named column 1, column 2, and so on.")
    return notes


def _name_columns(dialect: Dialect, cols: Columns, kept_idx: list[int], notes: list[str]):
    """Rule 13: trimmed names, 'column N' for a missing one, 'name (2)' for a repeat, and units."""
    raw = dialect.header_names or [""] * dialect.k
    names: list[str] = []
    units: dict[str, str] = {}
    column_data, text_arrays, numeric_names = {}, {}, []
    for j in kept_idx:
        base = " ".join(raw[j].split())
        if not base:
            base = f"column {j + 1}"
            if dialect.header_names is not None:
                notes.append(f"Column {j + 1} has no name in the header; it is called {echo(base)}.")
        unit = unit_of(base)
        if dialect.unit_cells is not None and dialect.unit_cells[j].strip():
            unit = dialect.unit_cells[j].strip()[1:-1].strip() or unit
        final = _unique_name(base, set(names))
        if final != base:
            notes.append(
                f"The column name {echo(base)} appears more than once; column {j + 1} is called {echo(final)}."
            )
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
        notes.extend(f"Column {echo(final)}: {cn}" for cn in cols.column_notes[j])
    return names, units, column_data, text_arrays, numeric_names


def _unique_name(base: str, seen: set[str]) -> str:
    if base not in seen:
        return base
    c = 2
    while f"{base} ({c})" in seen:
        c += 1
    return f"{base} ({c})"


def _text_column_notes(text_names, time_names, numeric_names) -> list[str]:
    notes = []
    if text_names and len(numeric_names) >= 2:
        notes.append(
            f"{plural(len(text_names), 'column')} hold{'s' if len(text_names) == 1 else ''} text "
            f"and can serve as a group: {echo_list(text_names)}."
        )
    for n in time_names:
        notes.append(
            f"Column {echo(n)} holds dates or times, which are kept as text; to fit against time, "
            f"export it as elapsed time in a number column."
        )
    return notes


def _refuse_too_few(display: str, dialect: Dialect, cols: Columns, numeric_names, time_names) -> None:
    if cols.rows_read == 0:
        where = f"a header line (line {dialect.header_line}) but" if dialect.header_line else ""
        raise IntakeError(
            f"{echo(display)} has {where} no data rows; add rows of numbers below the header, or choose another file."
        )
    if len(numeric_names) >= 2:
        return
    found = f"only one numeric column ({echo(numeric_names[0])})" if numeric_names else "no numeric columns"
    if time_names:
        raise IntakeError(
            f"{echo(display)} has {found}, and {echo(time_names[0])} holds dates or times, which are "
            f"not read as numbers; export the time as elapsed seconds (or another number) "
            f"and load the file again."
        )
    raise IntakeError(
        f"{echo(display)} has {found}; a curve needs two, so add an x and a y column of numbers "
        f"(or check that the delimiter and decimal mark are consistent)."
    )


def _build_frame(names, numeric_names, text_names, column_data, n_rows: int) -> pd.DataFrame:
    """One float64 block for the numeric columns, then the text columns, in file order."""
    numeric_frame = pd.DataFrame(
        (np.column_stack([column_data[c] for c in numeric_names]) if n_rows else np.empty((0, len(numeric_names)))),
        columns=pd.Index(numeric_names),
        index=pd.RangeIndex(n_rows),
    )
    if not text_names:
        return numeric_frame
    text_frame = pd.DataFrame({c: column_data[c] for c in text_names}, index=pd.RangeIndex(n_rows))
    return pd.concat([numeric_frame, text_frame], axis=1)[names]


_TIME_LIKE = (
    "^(?:\\d{4}-\\d{1,2}-\\d{1,2}(?:[ T]\\d{1,2}:\\d{2}(?::\\d{2}(?:[.,]\\d+)?)?)?"
    "|\\d{1,2}[./]\\d{1,2}[./]\\d{2,4}(?: \\d{1,2}:\\d{2}(?::\\d{2})?)?"
    "|\\d{1,2}:\\d{2}(?::\\d{2}(?:[.,]\\d+)?)?)(?:Z|[+-]\\d{2}:?\\d{2})?$"
)


def looks_like_time(arr) -> bool:
    """True when at least 80 % of the first 10,000 non-empty cells are dates or clock times."""
    arr = pc.drop_null(arr).slice(0, 10_000)
    if len(arr) == 0:
        return False
    hits = pc.sum(pc.cast(pc.match_substring_regex(arr, _TIME_LIKE), pa.int64())).as_py() or 0
    return hits >= 0.8 * len(arr)


def unit_of(name: str) -> str | None:
    """The unit in a column name: a final "(unit)" or "[unit]", or "quantity / unit" (rule 13).

    Examples
    --------
    >>> unit_of("Temperature (°C)"), unit_of("I / mA"), unit_of("Sample (2)")
    ('°C', 'mA', None)
    """
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
