"""What the command line prints: aligned tables, one JSON object, ``warning:`` lines.

Numbers become text through ``app._format`` only (missing as "—"). JSON goes through
``app.handover.json_safe`` (NaN and infinity as null), the same as the model file.
"""

from __future__ import annotations

import json
import os
import sys
from pathlib import Path
from typing import Any, Callable, Sequence

from .._format import fmt_number
from ..handover import json_safe
from ._args import UsageError


def emit_json(obj: dict) -> None:
    sys.stdout.write(json.dumps(json_safe(obj), allow_nan=False, ensure_ascii=False, indent=2) + "\n")


def _is_number(v: Any) -> bool:
    if hasattr(v, "item") and not isinstance(v, (str, bytes)):
        v = v.item()
    return v is None or (isinstance(v, (int, float)) and not isinstance(v, bool))


def cell(v: Any, digits: int = 6) -> str:
    """A table cell: text as it is, whole numbers in full, other numbers to ``digits`` significant digits."""
    if hasattr(v, "item") and not isinstance(v, (str, bytes)):
        v = v.item()
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, int):
        return str(v)
    if v is None or isinstance(v, float):
        return fmt_number(v, digits)
    return str(v)


def table(headers: Sequence[str], rows: Sequence[Sequence[Any]], *, digits: int = 6, right: Sequence[int] = ()) -> str:
    """A plain aligned text table: text columns to the left, number columns (and those in ``right``) to the right."""
    cells = [[cell(v, digits) for v in row] for row in rows]
    numeric = [bool(rows) and (j in right or all(_is_number(row[j]) for row in rows)) for j in range(len(headers))]
    widths = [max([len(h)] + [len(r[j]) for r in cells]) for j, h in enumerate(headers)]

    def line(values):
        return "  ".join(
            v.rjust(w) if numeric[j] else v.ljust(w) for j, (v, w) in enumerate(zip(values, widths, strict=True))
        ).rstrip()

    return "\n".join([line(headers), line(["-" * w for w in widths])] + [line(r) for r in cells])


def say(*parts: str) -> None:
    sys.stdout.write("\n".join(parts) + "\n")


def warn(message: str) -> None:
    sys.stderr.write("warning: " + " ".join(str(message).split()) + "\n")


def warn_all(messages: Sequence[str]) -> None:
    for m in messages:
        warn(m)


def lines_phrase(first_lines: Sequence[int], count: int) -> str:
    """ "line 7", "lines 7, 9 and 12", "lines 7, 9, 12, 15, 20 and 3 more"."""
    shown = [str(int(v)) for v in first_lines]
    if not shown:
        return f"{count:,} rows"
    more = count - len(shown)
    if more > 0:
        return f"lines {', '.join(shown)} and {more:,} more"
    if len(shown) == 1:
        return f"line {shown[0]}"
    return f"lines {', '.join(shown[:-1])} and {shown[-1]}"


def dropped_lines(dropped: dict) -> list[str]:
    """One sentence per reason a row was left out, with its file line numbers."""
    out = []
    for reason, info in dropped.items():
        d = info.to_dict() if hasattr(info, "to_dict") else info
        n = int(d["count"])
        out.append(f"Left out {n:,} {'row' if n == 1 else 'rows'}: {reason} ({lines_phrase(d['first_lines'], n)}).")
    return out


def write_output(target: str, writer: Callable[[Path], Any], *, inputs: Sequence[Path] = ()) -> Path:
    """Write a file the command produces, whole or not at all, never over one of its inputs."""
    dest = Path(target)
    if dest.is_dir():
        raise UsageError(f"{target!r} is a folder; give a file name to write")
    for src in inputs:  # input files are only ever read
        try:
            same = dest.exists() and os.path.samefile(dest, src)
        except OSError:
            same = False
        if same:
            raise UsageError(f"{target!r} is an input of this command; give another file name to write")
    if not (dest.parent if str(dest.parent) else Path(".")).is_dir():
        raise UsageError(f"cannot write {target!r}: the folder {str(dest.parent)!r} does not exist")
    try:
        writer(dest)
    except OSError as exc:
        raise UsageError(f"cannot write {target!r}: {exc.strerror or exc}") from None
    return dest
