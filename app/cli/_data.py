"""Shared by the commands that read a table: column checks and the intake summary they print."""

from __future__ import annotations

from typing import Any

from ._args import UsageError
from ._output import dropped_lines


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
