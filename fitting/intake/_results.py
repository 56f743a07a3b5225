"""What intake returns: Table, Selection, IntakeReport and DropInfo (rules 14-15)."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from .._errors import ColumnError, FitError
from ._patterns import _DELIMITER_WORDS, _FIRST_LINES
from ._wording import echo, echo_list, json_list, lines_phrase, mark_word, plural

LISTED_LINES = 10_000
"""The most line numbers a DropInfo lists for one reason; ``count`` always holds them all."""

_COUNTER_MAX_LEVELS = 12


@dataclass(frozen=True)
class DropInfo:
    """How many rows one reason removed, the file lines of the first five, and the listed lines.

    ``lines`` holds every line number when there are at most ``LISTED_LINES`` (10,000) of
    them, else the first ``LISTED_LINES``; ``count`` is always the full number.
    """

    count: int
    first_lines: list[int]
    lines: list[int] | None = field(default=None, compare=False)

    @classmethod
    def of(cls, lines) -> DropInfo:
        """The DropInfo of the rows on these (1-based) line numbers."""
        listed = [int(v) for v in np.asarray(lines)[:LISTED_LINES]]
        return cls(int(np.asarray(lines).size), listed[:_FIRST_LINES], listed)

    @property
    def listed_lines(self) -> list[int]:
        """Every line number this reason removed (or the first ``LISTED_LINES``)."""
        return list(self.first_lines) if self.lines is None else list(self.lines)

    def to_dict(self) -> dict[str, Any]:
        listed = self.listed_lines
        return {
            "count": int(self.count),
            "first_lines": [int(v) for v in self.first_lines],
            "lines": listed,
            "lines_complete": len(listed) == int(self.count),
        }


@dataclass(frozen=True)
class IntakeReport:
    """What ``read_table`` found in a file, and what it left out.

    For a workbook, ``sheet`` is the sheet read and ``sheet_names`` lists every sheet
    (so a front end can offer the others); both are empty for text files.
    """

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
    sheet: str | None = None
    sheet_names: list[str] = field(default_factory=list)

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
            "sheet": self.sheet,
            "sheet_names": list(self.sheet_names),
        }

    def summary_lines(self) -> list[str]:
        """Plain sentences for the dashboard and the command line."""
        grouping = f", digit grouping {mark_word(self.thousands)}" if self.thousands else ""
        if self.sheet is not None:
            first = f"Read sheet {echo(self.sheet)} of {echo(self.source_name)} ({self.encoding}), "
        else:
            first = f"Read {echo(self.source_name)} as {self.encoding} text, " + (
                f"{_DELIMITER_WORDS.get(self.delimiter, repr(self.delimiter))}-delimited, "
                if self.delimiter
                else "one column, "
            )
        out = [first + f"decimal mark {mark_word(self.decimal)}{grouping}."]
        where = f"Header on line {self.header_line}" if self.header_line else "No header line"
        cols = ", ".join(self.numeric_columns)
        out.append(
            f"{where}; {plural(self.rows_read, 'data row')}; "
            f"{plural(len(self.numeric_columns), 'numeric column')}: {cols}."
        )
        for reason, info in self.dropped.items():
            out.append(f"Left out {plural(info.count, reason)} ({lines_phrase(info.first_lines, info.count)}).")
        out.extend(self.notes)
        return out


@dataclass(frozen=True)
class Selection:
    """The x, y (and weights, group) arrays chosen from a Table, with the rows left out.

    ``choice_note`` says why the default columns were chosen when a column was passed
    over (a counter such as an injection number); None when nothing was passed over or
    the columns were named.
    """

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
    choice_note: str | None = None

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
            "choice_note": self.choice_note,
        }
        if include_arrays:
            out["x"] = json_list(self.x)
            out["y"] = json_list(self.y)
            out["weights"] = None if self.weights is None else json_list(self.weights)
            out["group"] = None if self.group is None else json_list(self.group)
            out["line_numbers"] = None if self.line_numbers is None else [int(v) for v in self.line_numbers]
        return out


def is_counter(values: np.ndarray) -> bool:
    """A small-integer counter: whole numbers forming a run 0..m or 1..m (m <= 12), each used
    at least twice on average, like an injection or replicate number."""
    v = values[np.isfinite(values)]
    if v.size < 4 or not np.all(v == np.round(v)):
        return False
    levels = np.unique(v)
    lo, hi = levels[0], levels[-1]
    return (
        lo in (0.0, 1.0)
        and 2 <= levels.size <= _COUNTER_MAX_LEVELS
        and hi - lo + 1 == levels.size
        and v.size >= 2 * levels.size
    )


@dataclass(frozen=True, eq=False)
class Table:
    """A parsed table: ``frame`` (numeric columns float64, text columns str) and ``report``."""

    frame: pd.DataFrame
    report: IntakeReport
    _line_numbers: np.ndarray = field(repr=False)

    @property
    def line_numbers(self) -> np.ndarray:
        """The file line number (1-based) of each row of ``frame``, read-only.

        For a workbook these are the spreadsheet's row numbers.
        """
        view = self._line_numbers.view()
        view.flags.writeable = False
        return view

    @property
    def sheet(self) -> str | None:
        """The sheet read from a workbook (None for a text file)."""
        return self.report.sheet

    @property
    def sheet_names(self) -> list[str]:
        """Every sheet of the workbook, in workbook order (empty for a text file)."""
        return list(self.report.sheet_names)

    def to_dict(self) -> dict[str, Any]:
        """The report's dict plus the row count of the frame (no values)."""
        return {
            "report": self.report.to_dict(),
            "rows": len(self.frame),
            "sheet": self.sheet,
            "sheet_names": self.sheet_names,
        }

    def default_xy(self) -> tuple[str, str]:
        """The x and y ``select()`` uses when none are named (see ``default_choice``)."""
        x, y, _ = self.default_choice()
        return x, y

    def default_choice(self, x: str | None = None, y: str | None = None) -> tuple[str, str, str | None]:
        """(x, y, note): the default columns, passing over small-integer counters.

        x is the first numeric column, unless it is a counter and two other numeric
        columns are not; y is the first other numeric column that is not a counter (a
        counter only when nothing else is left). The note says which columns were
        passed over and why, or is None.
        """
        num = self.report.numeric_columns
        counters = [c for c in num if is_counter(self.frame[c].to_numpy(dtype=np.float64))]
        smooth = [c for c in num if c not in counters]
        passed: list[str] = []
        if x is None:
            others = [c for c in num if c != y]
            x = others[0]
            if x in counters and len([c for c in smooth if c != y]) >= 2:
                passed.append(x)
                x = next(c for c in smooth if c != y)
        if y is None:
            others = [c for c in num if c != x]
            ahead = others[: others.index(next((c for c in others if c not in counters), others[0])) + 1]
            y = ahead[-1]
            passed += [c for c in ahead[:-1] if c not in passed]
        note = None
        if passed:
            note = (
                f"Passed over {echo_list(passed)}: {'it holds' if len(passed) == 1 else 'they hold'} "
                f"small whole numbers repeated (1, 2, 3, …), like an injection or replicate counter, "
                f"not a measured quantity; x is {echo(x)} and y is {echo(y)}. Choose the columns "
                f"yourself if that is wrong."
            )
        return x, y, note

    def select(self, x=None, y=None, *, weights=None, group=None) -> Selection:
        """Choose x and y, optional weights and group, and keep the rows where all are usable.

        Parameters
        ----------
        x, y : str, optional
            Column names; a name matches case-insensitively when only one column
            matches. By default x and y follow ``default_choice``: the first numeric
            columns, passing over small-integer counters (the choice is recorded in
            ``Selection.choice_note``).
        weights : str, optional
            A numeric column of weights; rows with negative weights are left out.
        group : str, optional
            Any column other than x and y; a text group gives an object array of str
            ("" where empty), a numeric group a float array (NaN where missing).

        Returns
        -------
        Selection
            Rows where x, y or the weights are missing, not numbers or infinite are
            left out and listed by reason (rule 15), with the intake reasons too.

        Raises
        ------
        ColumnError
            An unknown, ambiguous or text column, or x, y and group not all different.
        FitError
            Fewer than two distinct x values remain.

        Examples
        --------
        >>> from fitting.intake import read_table
        >>> t = read_table(b"conc (mg/L),signal\\n0,0.02\\n1,n/a\\n2,0.41\\n4,0.80\\n")
        >>> sel = t.select("CONC (mg/L)", "signal")
        >>> sel.x.tolist(), sel.y.tolist(), sel.x_unit
        ([0.0, 2.0, 4.0], [0.02, 0.41, 0.8], 'mg/L')
        >>> sel.dropped["missing or non-numeric y"].listed_lines
        [3]
        """
        x, y, w_name, g_name, note = self._resolve_columns(x, y, weights, group)
        frame = self.frame
        xv = frame[x].to_numpy(dtype=np.float64)
        yv = frame[y].to_numpy(dtype=np.float64)
        wv = None if w_name is None else frame[w_name].to_numpy(dtype=np.float64)
        dropped, keep = self._drops(xv, yv, wv)
        xs = np.ascontiguousarray(xv[keep])
        _check_distinct(xs, x, y)
        units = self.report.units
        return Selection(
            x=xs,
            y=np.ascontiguousarray(yv[keep]),
            weights=None if wv is None else np.ascontiguousarray(wv[keep]),
            group=None if g_name is None else self._group_array(g_name, keep),
            x_name=x,
            y_name=y,
            x_unit=units.get(x),
            y_unit=units.get(y),
            rows_used=int(keep.sum()),
            rows_dropped=int(sum(d.count for d in dropped.values())),
            dropped=dropped,
            weights_name=w_name,
            group_name=g_name,
            line_numbers=self._line_numbers[keep].copy(),
            choice_note=note,
        )

    def _resolve_columns(self, x, y, weights, group):
        """(x, y, weights, group, note) as column names; refuses a column used twice."""
        x = None if x is None else self._column(x, "x", numeric=True)
        y = None if y is None else self._column(y, "y", numeric=True)
        note = None
        if x is None or y is None:
            if len(self.report.numeric_columns) < 2:
                raise ColumnError("The table has fewer than two numeric columns, so there is no x and y to choose.")
            x, y, note = self.default_choice(x, y)
        if x == y:
            raise ColumnError(f"x and y are both {echo(x)}; choose two different columns.")
        w_name = None if weights is None else self._column(weights, "weights", numeric=True)
        g_name = None if group is None else self._column(group, "group", numeric=False)
        if g_name is not None and g_name in (x, y):
            role = "x" if g_name == x else "y"
            raise ColumnError(
                f"The group column {echo(g_name)} is also {role}; a group must be another column "
                f"(such as a batch, instrument or run)."
            )
        return x, y, w_name, g_name, note

    def _drops(self, xv, yv, wv):
        """Rule 15: (dropped by reason, rows kept); each row under the first reason that applies."""
        checks = [
            ("missing or non-numeric x", np.isnan(xv)),
            ("infinite x", np.isinf(xv)),
            ("missing or non-numeric y", np.isnan(yv)),
            ("infinite y", np.isinf(yv)),
        ]
        if wv is not None:
            with np.errstate(invalid="ignore"):
                checks += [
                    ("missing or non-numeric weights", np.isnan(wv)),
                    ("infinite weights", np.isinf(wv)),
                    ("negative weights", wv < 0),
                ]
        dropped = dict(self.report.dropped)
        taken = np.zeros(len(xv), dtype=bool)
        for reason, mask in checks:
            hit = mask & ~taken
            if hit.any():
                dropped[reason] = DropInfo.of(self._line_numbers[hit])
                taken |= hit
        return dropped, ~taken

    def _group_array(self, g_name: str, keep: np.ndarray) -> np.ndarray:
        col = self.frame[g_name]
        if g_name in self.report.numeric_columns:
            return np.ascontiguousarray(col.to_numpy(dtype=np.float64)[keep])
        return col.fillna("").to_numpy(dtype=object)[keep]

    def _column(self, name, role: str, *, numeric: bool) -> str:
        """The column ``name`` names: exactly, else case-insensitively when only one matches."""
        cols = self.report.columns
        if isinstance(name, str) and name not in cols:
            folded = [c for c in cols if c.casefold() == name.casefold()]
            if len(folded) > 1:
                raise ColumnError(
                    f"{echo(name)} matches {len(folded)} columns when case is ignored ({echo_list(folded)}); "
                    f"name the {role} column exactly as written."
                )
            if folded:
                name = folded[0]
        if not isinstance(name, str) or name not in cols:
            raise ColumnError(
                f"There is no column named {echo(name)} to use as {role}; the available columns "
                f"are: {echo_list(cols, 50)}."
            )
        if numeric and name not in self.report.numeric_columns:
            raise ColumnError(
                f"Column {echo(name)} holds text, not numbers, so it cannot be {role}; choose one "
                f"of the numeric columns: {echo_list(self.report.numeric_columns, 50)}."
            )
        return name


def _check_distinct(xs: np.ndarray, x: str, y: str) -> None:
    if np.unique(xs).size >= 2:
        return
    if xs.size == 0:
        raise FitError(
            f"No row has finite numbers in both {echo(x)} and {echo(y)}, so there is nothing "
            f"to fit; choose other x and y columns."
        )
    raise FitError("x has fewer than two distinct values; a curve needs at least two. Choose another x column.")
