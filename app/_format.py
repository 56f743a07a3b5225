"""The one place where numbers become text, for the dashboard, the command line and the report.

Rules (common practice, no source):
- a missing or non-finite value reads "—";
- significant digits, not decimals, so 0.000123 and 12300 both keep their precision;
- a value within rounding of zero (relative to a scale the caller gives) reads "0";
- R² close to 1 keeps enough digits to differ from 1 (0.9999975, never "1");
- "value ± SE" is written by ``fmt_pm`` only.
"""

from __future__ import annotations

import math
from typing import Any

MISSING = "—"


def _finite(v: Any) -> float | None:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def fmt_number(v: Any, digits: int = 4, *, zero_below: float = 0.0) -> str:
    """``v`` with ``digits`` significant digits; "—" when missing; "0" when |v| <= zero_below.

    >>> fmt_number(3.14159), fmt_number(float("nan")), fmt_number(None), fmt_number(1e-20, zero_below=1e-12)
    ('3.142', '—', '—', '0')
    """
    f = _finite(v)
    if f is None:
        return MISSING
    if f == 0.0 or abs(f) <= zero_below:
        return "0"
    return f"{f:.{digits}g}"


def fmt_pm(value: Any, se: Any, digits: int = 4) -> str:
    """ "value ± SE", or the value alone when the SE is missing.

    >>> fmt_pm(0.51234, 0.0321), fmt_pm(0.5, float("nan")), fmt_pm(None, 1.0)
    ('0.5123 ± 0.0321', '0.5', '—')
    """
    text = fmt_number(value, digits)
    s = _finite(se)
    if text == MISSING or s is None:
        return text
    return f"{text} ± {fmt_number(s, 3)}"


def fmt_r2(v: Any, digits: int = 4) -> str:
    """R² with enough digits to tell it from 1 (and from 0), never rounded to a false "1".

    >>> fmt_r2(0.9999975), fmt_r2(0.98765), fmt_r2(5.42e-20), fmt_r2(1.0)
    ('0.9999975', '0.9877', '0', '1')
    """
    f = _finite(v)
    if f is None:
        return MISSING
    if abs(f) < 1e-12:
        return "0"
    if f == 1.0:
        return "1"
    gap = abs(1.0 - f)
    if gap < 10.0 ** -(digits - 1):
        digits = math.ceil(-math.log10(gap)) + 2  # the nines, then two digits of the gap
    return f"{f:.{min(digits, 17)}g}"


def fmt_count(n: int) -> str:
    """Thousands separated: 1234567 -> "1,234,567"."""
    return f"{int(n):,}"


def zero_scale(values: Any, rel: float = 1e-12) -> float:
    """A magnitude below which a figure in the units of ``values`` is rounding noise: ``rel`` × max |value|.

    Used with ``fmt_number(..., zero_below=...)`` so an RMSE of 3.1e-38 on exact data reads "0".

    >>> zero_scale([1.0, -250.0, 3.0])
    2.5e-10
    """
    biggest = 0.0
    for v in values:
        f = _finite(v)
        if f is not None and abs(f) > biggest:
            biggest = abs(f)
    return rel * biggest


def term_name(power: int, x: str = "x") -> str:
    """The name of the term of a power: "constant", "x", "x^2", ...

    >>> [term_name(k) for k in range(4)]
    ['constant', 'x', 'x^2', 'x^3']
    """
    k = int(power)
    if k == 0:
        return "constant"
    return x if k == 1 else f"{x}^{k}"


_UNIT_FORMS = ("({u})", "[{u}]", "/ {u}", "/{u}", "in {u}")


def label_with_unit(name: str | None, unit: str | None) -> str:
    """A column label with its unit once: "Output (V)" from ("Output", "V"), and "Output [V]" stays as it is.

    >>> label_with_unit("Output [V]", "V"), label_with_unit("Output", "V"), label_with_unit("t (°C)", "°C")
    ('Output [V]', 'Output (V)', 't (°C)')
    >>> label_with_unit(None, None)
    '?'
    """
    text = str(name) if name else "?"
    if not unit:
        return text
    if any(form.format(u=unit) in text for form in _UNIT_FORMS):
        return text
    return f"{text} ({unit})"
