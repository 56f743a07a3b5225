"""The constants and patterns of the intake rules (numbered in ``fitting.intake``'s docstring)."""

from __future__ import annotations

import re

import pyarrow as pa

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


def comment_re(delimiter: str | None) -> str:
    """Rule 5: a comment line starts with ``#`` or ``//``, or ``;`` when ``;`` is not the delimiter."""
    semi = "|;" if delimiter not in (";", None) else ""
    return f"^(?:#|//{semi})"


def blank_re(d: str) -> str:
    """Rule 5: a blank line holds only whitespace and delimiters."""
    return "^[" + _WS + re.escape(d) + "]*$"


def rule_re(d: str) -> str:
    """Rule 5: a rule line ("|---|---|", "=====")."""
    cls = "[" + _WS + "\\-=_:+|" + re.escape(d) + "]"
    return f"^{cls}*(?:---|===){cls}*$"


def cell_kind(cell: str) -> str:
    """ "miss", "num" or "text": how the sample judges one cell (rules 6 and 7)."""
    c = cell.strip()
    if c.lower() in _MISSING or _NAN_FORMS_RE.match(c):
        return "miss"
    if _NUMLIKE.fullmatch(c):
        return "num"
    return "text"
