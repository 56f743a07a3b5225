"""Wording shared by every intake message: plurals, line lists, sizes, and echoed user text."""

from __future__ import annotations

import math

import numpy as np

ECHO_LIMIT = 60
"""The most characters of user text (a column name, a cell) a message echoes."""


def echo(text: object, limit: int = ECHO_LIMIT) -> str:
    """User text for a message, quoted, cut to ``limit`` characters with an ellipsis.

    Every message that repeats a column name, a cell or a sheet name goes through here,
    so a 50 MB name cannot make a 50 MB message.
    """
    s = text if isinstance(text, str) else repr(text)
    if len(s) > limit:
        s = s[: limit - 1] + "…"
    return f"'{s}'"


def echo_list(items, limit: int = 12) -> str:
    """Up to ``limit`` echoed items joined by commas, with a count of the rest."""
    items = list(items)
    shown = ", ".join(echo(v) for v in items[:limit])
    if len(items) > limit:
        shown += f" and {len(items) - limit:,} more"
    return shown


def plural(n: int, noun: str) -> str:
    n = int(n)
    if n == 1:
        return f"1 {noun}"
    head, _, last = noun.rpartition(" ")
    word = last if last else noun
    word_plural = word + ("es" if word.endswith(("s", "x")) else "s")
    return f"{n:,} {head + ' ' if head else ''}{word_plural}"


def lines_phrase(lines, total: int) -> str:
    lines = [int(v) for v in lines]
    if not lines:
        return "no lines"
    head = "line " if len(lines) == 1 else "lines "
    text = head + ", ".join(str(v) for v in lines)
    if total > len(lines):
        text += ", …"
    return text


def mark_word(mark: str | None) -> str:
    return {".": "'.'", ",": "','", " ": "space"}.get(mark, repr(mark))


def size_text(n: int) -> str:
    """A byte count rounded for reading: "512 MiB", "9.8 KiB", "700 bytes"."""
    if n < 1024:
        return f"{n} bytes"
    for unit, scale in (("GiB", 1 << 30), ("MiB", 1 << 20), ("KiB", 1 << 10)):
        if n >= scale:
            v = n / scale
            return f"{v:.0f} {unit}" if v == int(v) else f"{v:.1f} {unit}"
    return f"{n} bytes"  # pragma: no cover - every n >= 1024 matched above


def size_pair(size: int, limit: int) -> tuple[str, str]:
    """Rounded sizes of a file and a limit, in exact bytes when rounding would make them read equal."""
    a, b = size_text(size), size_text(limit)
    if size != limit and _one_decimal(a) == _one_decimal(b):
        return f"{size:,} bytes", f"{limit:,} bytes"
    return a, b


def _one_decimal(text: str) -> str:
    """ "2 MiB" and "2.0 MiB" read the same: compare sizes with one decimal."""
    number, unit = text.split(" ")
    return f"{float(number):.1f} {unit}"


def json_list(arr: np.ndarray) -> list:
    out = []
    for v in arr.tolist():
        if isinstance(v, float) and not math.isfinite(v):
            out.append(None)
        else:
            out.append(v)
    return out
