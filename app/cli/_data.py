"""Shared by the commands that read a table: column checks and the intake summary they print."""

from __future__ import annotations

from typing import Any

from ._args import UsageError
from ._output import dropped_lines, lines_phrase


def check_distinct_columns(args) -> None:
    """Refuse, before any reading, x and y naming one column, or a group that is the x or y column."""
    x, y, group = args.x, args.y, getattr(args, "group", None)
    if x is not None and x == y:
        raise UsageError(f"--x and --y both name the column {x!r}; give two different columns")
    if group is not None and group in (x, y):
        role = "x" if group == x else "y"
        raise UsageError(f"--group names the {role} column {group!r}; give a column of batch or run labels instead")


def check_selection(sel, group: str | None = None) -> None:
    """The same checks after defaults were filled in (x or y chosen by the engine)."""
    if sel.x_name == sel.y_name:
        raise UsageError(f"x and y are both the column {sel.x_name!r}; give two different columns with --x and --y")
    if group is not None and group in (sel.x_name, sel.y_name):
        role = "x" if group == sel.x_name else "y"
        raise UsageError(f"--group names the {role} column {group!r}; give a column of batch or run labels instead")


def intake_dict(table, sel) -> dict[str, Any]:
    return {"report": table.report.to_dict(), "selection": sel.to_dict()}


def intake_lines(table, sel) -> list[str]:
    """The intake report's sentences, then every reason a row was left out, with its line numbers.

    The selection's ``dropped`` holds the file's own reasons and those of the chosen columns
    (missing or non-numeric x or y, weights), so each reason is listed once, from there.
    """
    own = [s for s in table.report.summary_lines() if not str(s).startswith("Left out ")]
    return [str(s) for s in own] + dropped_lines(sel.dropped)


# ----------------------------------------------------------------------------
# rows left out on purpose (--exclude-rows)

MAX_EXCLUDED_SPAN = 1_000_000  # a range "a-b" may name at most this many lines


def line_list(text: str) -> list[int]:
    """``--exclude-rows``: file line numbers "12", "12,15", ranges "20-24", or a mix; each 1 or more."""
    import argparse

    out: list[int] = []
    for part in str(text).replace(" ", "").split(","):
        if not part:
            continue
        lo, sep, hi = part.partition("-")
        try:
            a, b = int(lo), int(hi) if sep else int(lo)
        except ValueError:
            raise argparse.ArgumentTypeError(f"expected file line numbers such as 12,15,20-24, not {text!r}") from None
        if a < 1 or b < a or b - a >= MAX_EXCLUDED_SPAN:
            raise argparse.ArgumentTypeError(f"expected line numbers of 1 or more, ranges low-high, not {part!r}")
        out.extend(range(a, b + 1))
    if not out:
        raise argparse.ArgumentTypeError(f"expected file line numbers such as 12,15,20-24, not {text!r}")
    return out


def add_exclusions(p) -> None:
    p.add_argument(
        "--exclude-rows",
        type=line_list,
        action="extend",
        metavar="LINE[,LINE...]",
        help="leave out the rows on these file lines on purpose (the intake report's line numbers; ranges such as "
        "20-24 allowed); recorded in the output and the model, the file itself is never changed",
    )
    p.add_argument("--exclude-reason", metavar="TEXT", help="why those rows are left out (recorded with them)")


def check_exclusions(args) -> None:
    if getattr(args, "exclude_reason", None) and not getattr(args, "exclude_rows", None):
        raise UsageError("--exclude-reason needs --exclude-rows LINE[,LINE...]")


class Rows:
    """The rows a command fits: the selection's, less the lines left out on purpose."""

    def __init__(self, sel, keep=None, excluded=None):
        import numpy as np

        lines = sel.line_numbers if sel.line_numbers is not None else np.arange(1, sel.x.size + 1)
        keep = np.ones(sel.x.size, dtype=bool) if keep is None else keep
        self.x, self.y, self.lines = sel.x[keep], sel.y[keep], np.asarray(lines)[keep]
        self.weights = None if sel.weights is None else sel.weights[keep]
        self.group = None if sel.group is None else sel.group[keep]
        self.excluded = excluded  # {"lines": [...], "reason": text or None, "count": n} or None
        self.rows_used = int(keep.sum())


def _why_not_a_row(line: int, table, sel) -> str:
    import numpy as np

    if line in set(np.asarray(table.line_numbers).tolist()):
        for reason, info in sel.dropped.items():
            d = info.to_dict() if hasattr(info, "to_dict") else dict(info)
            if line in (d.get("lines") or d.get("first_lines") or []):
                return f"line {line} is already left out ({reason})"
        return f"line {line} is already left out by the intake"
    return f"line {line} holds no data row (a header, comment or blank line, or past the end of the file)"


def apply_exclusions(args, table, sel, file_label: str) -> Rows:
    """The rows less ``--exclude-rows``; a line that is not one of the selection's rows is refused with why."""
    import numpy as np

    wanted = sorted(set(getattr(args, "exclude_rows", None) or []))
    if not wanted:
        return Rows(sel)
    probe = Rows(sel)
    known = set(probe.lines.tolist())
    unknown = [v for v in wanted if v not in known]
    if unknown:
        more = f" (and {len(unknown) - 1:,} more such lines)" if len(unknown) > 1 else ""
        raise UsageError(
            f"--exclude-rows: {_why_not_a_row(unknown[0], table, sel)} in {file_label!r}{more}; "
            "give the line numbers of rows the fit uses"
        )
    keep = ~np.isin(probe.lines, wanted)
    if not keep.any():
        raise UsageError("--exclude-rows leaves no rows to fit")
    reason = getattr(args, "exclude_reason", None)
    return Rows(sel, keep, {"lines": wanted, "reason": reason, "count": len(wanted)})


def exclusion_lines(rows: Rows) -> list[str]:
    """One sentence on the rows left out on purpose, for the text output."""
    ex = rows.excluded
    if not ex:
        return []
    why = f": {ex['reason']}" if ex.get("reason") else " (no reason given)"
    n = ex["count"]
    return [f"Left out on purpose {n:,} {'row' if n == 1 else 'rows'}, {lines_phrase(ex['lines'][:10], n)}{why}."]
