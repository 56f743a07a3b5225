"""What degreescope hands over: the model file (JSON) and the predictions table (CSV).

Both front ends, the command line and the dashboard, write these two files through
this module, so a model or a predictions table reads the same whichever one made it.

The model file is ``PolynomialFit.to_dict()`` (what ``degreescope predict`` and
``PolynomialFit.from_dict`` read) plus ``fitted_from``, the provenance:

    fitted_from = {
        "file": name of the data file, "sha256": its SHA-256,
        "x", "y", "weights", "group": the columns used (null when not used),
        "rows_used", "rows_dropped": counts,
        "rows_left_out": {reason: {"count": n, "first_lines": [file line numbers]}},
        "fitted_on": one sentence on which rows the fit used,
        "degreescope_version": the version that wrote the file,
        # only when rows were left out on purpose (the command line's --exclude-rows):
        "rows_excluded": {"lines": [file line numbers], "reason": text or null},
    }

The weighting rule is the fit's own ``weighting`` field. When the standards were
back-calculated (``degreescope fit`` does so up to 2,000 rows), the file also holds

    back_calculation_summary = {"summary": {...}, "rule": text, "tolerance": %, "lowest_tolerance": %}

beside ``fitted_from`` (``model_document(..., back_calculation=...)``), so ``fitted_from``
stays the same block whichever front end wrote the file.

Non-finite numbers are written as null (strict JSON).

The predictions table has one row per x value and these columns, in this order:

    <x name> | [<y name> (observed)] | <y name> (predicted) |
    confidence lower 95% | confidence upper 95% | prediction lower 95% | prediction upper 95% |
    outside fitted range

(the percentage follows the level).

The read-back table (``read_back_csv``, readings read back to x through the model) has
one row per reading and these columns, in this order:

    [line] | <y name> (reading) | readings averaged | <x name> (read back) |
    calibration lower 95% | calibration upper 95% | standard uncertainty of <x name> |
    outside calibrated range | roots in range | root values | notes

(``line`` only when the readings came from a file). The x and interval cells are
empty where there is no single answer or no bounded end inside the range; ``roots in
range`` counts them and ``root values`` lists them ("x = 1.5; x = 3.25").

In both tables numbers are plain numbers (Python's shortest
round-trip form); a missing one is an empty cell; yes/no for the range flag. Text
that a spreadsheet could run as a formula (it begins with = + - @, a tab or a
carriage return) gets a leading single quote, as the OWASP guidance on CSV
injection advises; numbers are never touched.
"""

from __future__ import annotations

import csv
import hashlib
import io
import json
import math
import os
from typing import Any, Iterable, Mapping, Sequence

from ._atomic import neutralise_cell as _neutralise_text
from ._format import term_name

__all__ = [
    "BACK_CALCULATION_KEY",
    "PROVENANCE_KEY",
    "csv_cell",
    "degreescope_version",
    "file_sha256",
    "json_safe",
    "model_document",
    "model_json",
    "plain_rmse",
    "prediction_header",
    "predictions_csv",
    "provenance",
    "read_back_csv",
    "read_back_header",
    "term_name",
]

PROVENANCE_KEY = "fitted_from"
_UNKNOWN_VERSION = "0+unknown"


def degreescope_version() -> str:
    """The installed degreescope's version (package metadata), or "0+unknown" when it is not installed."""
    from importlib import metadata

    try:
        return metadata.version("degreescope")
    except metadata.PackageNotFoundError:
        return _UNKNOWN_VERSION


def file_sha256(source: str | os.PathLike[str] | bytes) -> str:
    """SHA-256 (hex) of a file on disk, or of bytes already in memory (an upload, standard input)."""
    h = hashlib.sha256()
    if isinstance(source, (bytes, bytearray, memoryview)):
        h.update(source)
        return h.hexdigest()
    with open(source, "rb") as fh:
        for chunk in iter(lambda: fh.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def json_safe(obj: Any) -> Any:
    """A JSON-safe copy: numpy scalars and arrays to Python, NaN and infinity to None, keys to text."""
    if isinstance(obj, Mapping):
        return {str(k): json_safe(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [json_safe(v) for v in obj]
    if hasattr(obj, "tolist") and not isinstance(obj, (str, bytes)):  # numpy arrays and scalars
        return json_safe(obj.tolist())
    if isinstance(obj, bool) or obj is None or isinstance(obj, (int, str)):
        return obj
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if hasattr(obj, "to_dict"):
        return json_safe(obj.to_dict())
    return str(obj)


def _left_out(dropped: Mapping[str, Any] | None) -> dict[str, dict[str, Any]]:
    out: dict[str, dict[str, Any]] = {}
    for reason, info in (dropped or {}).items():
        d = info.to_dict() if hasattr(info, "to_dict") else dict(info)
        out[str(reason)] = {"count": int(d["count"]), "first_lines": [int(v) for v in d.get("first_lines", [])]}
    return out


def provenance(
    *,
    file_name: str,
    sha256: str | None,
    x: str,
    y: str,
    weights: str | None = None,
    group: str | None = None,
    rows_used: int,
    rows_dropped: int = 0,
    dropped: Mapping[str, Any] | None = None,
    fitted_on: str | None = None,
    excluded: Mapping[str, Any] | None = None,
) -> dict[str, Any]:
    """The ``fitted_from`` block of a model file.

    ``dropped`` maps each reason to a ``fitting.DropInfo`` (or its ``to_dict()``).
    ``fitted_on`` defaults to the sentence for a fit on every usable row (less the rows
    ``excluded`` on purpose: ``{"lines": [...], "reason": text}``).
    """
    if fitted_on is None:
        fitted_on = _fitted_on(file_name, int(rows_used), excluded)
    block = {
        "file": file_name,
        "sha256": sha256,
        "x": x,
        "y": y,
        "weights": weights,
        "group": group,
        "rows_used": int(rows_used),
        "rows_dropped": int(rows_dropped),
        "rows_left_out": _left_out(dropped),
        "fitted_on": fitted_on,
        "degreescope_version": degreescope_version(),
    }
    if excluded:
        block["rows_excluded"] = {"lines": [int(v) for v in excluded["lines"]], "reason": excluded.get("reason")}
    return block


def _fitted_on(file_name: str, rows_used: int, excluded: Mapping[str, Any] | None) -> str:
    if not excluded:
        return f"every usable row of {file_name} ({rows_used:,} rows); none was held out"
    lines = [int(v) for v in excluded["lines"]]
    shown = ", ".join(str(v) for v in lines[:10]) + (" …" if len(lines) > 10 else "")
    why = f" ({excluded['reason']})" if excluded.get("reason") else ""
    return (
        f"the usable rows of {file_name} ({rows_used:,} rows) except {len(lines):,} left out on purpose, "
        f"line{'s' if len(lines) != 1 else ''} {shown}{why}; none was held out"
    )


BACK_CALCULATION_KEY = "back_calculation_summary"


def model_document(
    fit, fitted_from: Mapping[str, Any] | None = None, *, back_calculation: Mapping[str, Any] | None = None
) -> dict[str, Any]:
    """The model file as a JSON-safe dict: the fit's ``to_dict()`` and its provenance.

    Without ``fitted_from`` the provenance holds the version only. ``back_calculation`` (the
    summary, rule and tolerances of the back-calculated standards) is written beside it.
    """
    doc = fit.to_dict()
    block = dict(fitted_from) if fitted_from else {}
    block.setdefault("degreescope_version", degreescope_version())
    doc[PROVENANCE_KEY] = block
    if back_calculation:
        doc[BACK_CALCULATION_KEY] = dict(back_calculation)
    return json_safe(doc)


def model_json(
    fit, fitted_from: Mapping[str, Any] | None = None, *, back_calculation: Mapping[str, Any] | None = None
) -> str:
    """The model file's text: strict JSON (non-finite numbers as null), two-space indent, one final newline."""
    doc = model_document(fit, fitted_from, back_calculation=back_calculation)
    return json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def plain_rmse(fit, x, y) -> float:
    """The unweighted RMSE in y's units: ``fit.plain_rmse`` when the fit carries it, else sqrt(mean(residual²))."""
    given = getattr(fit, "plain_rmse", None)
    if given is not None:
        return float(given)
    import numpy as np

    res = np.asarray(y, dtype=np.float64) - fit.predict(np.asarray(x, dtype=np.float64))
    return float(np.sqrt(np.mean(res * res))) if res.size else float("nan")


# ----------------------------------------------------------------------------
# the predictions table


def csv_cell(value: Any) -> str:
    """One CSV cell as text: numbers as numbers, missing as empty, flags as yes/no, text neutralised."""
    if hasattr(value, "item") and not isinstance(value, (str, bytes)):  # numpy scalars
        value = value.item()
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    return str(_neutralise_text(str(value)))


def prediction_header(x_name: str, y_name: str, level: float = 0.95, *, observed: bool = False) -> list[str]:
    """The column names of the predictions table (see the module docstring)."""
    pct = f"{float(level) * 100:g}%"
    head = [x_name] + ([f"{y_name} (observed)"] if observed else [])
    return head + [
        f"{y_name} (predicted)",
        f"confidence lower {pct}",
        f"confidence upper {pct}",
        f"prediction lower {pct}",
        f"prediction upper {pct}",
        "outside fitted range",
    ]


def _csv_text(rows: Iterable[Sequence[Any]]) -> str:
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    for row in rows:
        writer.writerow([csv_cell(v) for v in row])
    return buf.getvalue()


def predictions_csv(
    x,
    predicted,
    confidence: tuple[Any, Any],
    prediction: tuple[Any, Any],
    outside,
    *,
    x_name: str,
    y_name: str,
    level: float = 0.95,
    y_observed=None,
) -> str:
    """The predictions table as CSV text; ``confidence`` and ``prediction`` are (lower, upper) arrays."""
    cols = [x] + ([y_observed] if y_observed is not None else [])
    cols += [predicted, confidence[0], confidence[1], prediction[0], prediction[1]]
    header = prediction_header(x_name, y_name, level, observed=y_observed is not None)

    def rows():
        yield header
        for i in range(len(x)):
            yield [float(c[i]) for c in cols] + [bool(outside[i])]

    return _csv_text(rows())


# ----------------------------------------------------------------------------
# the read-back table


def read_back_header(x_name: str, y_name: str, level: float = 0.95, *, with_lines: bool = False) -> list[str]:
    """The column names of the read-back table (see the module docstring)."""
    pct = f"{float(level) * 100:g}%"
    head = ["line"] if with_lines else []
    return head + [
        f"{y_name} (reading)",
        "readings averaged",
        f"{x_name} (read back)",
        f"calibration lower {pct}",
        f"calibration upper {pct}",
        f"standard uncertainty of {x_name}",
        "outside calibrated range",
        "roots in range",
        "root values",
        "notes",
    ]


def _num_or_none(v: Any) -> float | None:
    return None if v is None else float(v)


def read_back_csv(
    rows: Sequence[Mapping[str, Any]], *, x_name: str, y_name: str, level: float = 0.95, with_lines: bool = False
) -> str:
    """The read-back table as CSV text, from the rows of ``fitting.read_back(...).to_dict()``
    (each may carry a ``line``).
    """

    def body():
        yield read_back_header(x_name, y_name, level, with_lines=with_lines)
        for r in rows:
            roots = [float(v) for v in r.get("roots", [])]
            cells = [] if not with_lines else [r.get("line")]
            cells += [float(r["y"]), int(r.get("readings", 1))]
            cells += [_num_or_none(r.get(k)) for k in ("x", "x_lower", "x_upper", "u_x")]
            cells += [bool(r.get("outside_range")), len(roots), "; ".join(f"x = {v!r}" for v in roots)]
            yield cells + [" ".join(str(w) for w in r.get("warnings", []))]

    return _csv_text(body())
