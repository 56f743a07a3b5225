"""Calibration views for the dashboard: unknowns read back, standards read back, weightings compared.

Plain functions of the ``FitService`` and the page's settings; the panels
(``app/panels/readback.py``, ``app/panels/standards.py``) turn their results into HTML.

The fit read through is the model a user takes away at the degree on screen:
``views_model.handover_fit``, the precise fit (``fitting.fit_polynomial``) on every usable row
of the chosen columns, whatever split the charts show, with the page's weighting (the named
rule of the Columns panel, ``Columns.weighting``, or the weights column). It is the fit the
model card and the downloads hand over. The engine does the work:
``fitting.read_back`` (NIST/SEMATECH e-Handbook 4.5.2.1 calibration interval, u(x0) by the
delta method), ``fitting.back_calculate`` (FDA 2018 / ICH M10 acceptance by default) and
``fitting.compare_weightings`` (Almeida et al. 2002).
"""

from __future__ import annotations

import math
import re
import threading
import weakref
from collections import OrderedDict
from dataclasses import dataclass, replace

import numpy as np

import fitting
from fitting import BackCalculation, FitError, PolynomialFit, ReadBack, WeightingComparison

from . import text, views_model
from .service import Columns, FitService, SplitSettings, check_weighting_choice, clamp_degree

__all__ = [
    "CalibrationModel",
    "LEVEL_DEFAULT",
    "MAX_READINGS",
    "MAX_STANDARDS",
    "MARKED_READINGS",
    "READINGS_OWNER",
    "STANDARDS_OWNER",
    "back_calculation",
    "calibration_fit",
    "check_level",
    "check_readings_count",
    "check_tolerance",
    "check_weighting_choice",
    "failing_marks",
    "parse_readings",
    "read_back",
    "reading_marks",
    "report_sections",
    "weighting_comparison",
]

MAX_READINGS = 200  # readings read back at once
MAX_READING_CHARS = 40 * MAX_READINGS  # checked before the text is split
MAX_STANDARDS = 1_000  # rows read back one by one (the weighting comparison takes about 1 s at 1,000 rows)
MARKED_READINGS = 10  # readings drawn on the fit chart
LEVEL_DEFAULT = 95.0  # per cent
LEVEL_RANGE = (50.0, 99.9)
READINGS_RANGE = (1, 1000)
READINGS_OWNER = "degreescope-readback"  # name prefix of the shapes the read-back panel puts on the fit chart
STANDARDS_OWNER = "degreescope-standards"  # meta owner of the marker trace of failing standards
READING_COLOUR = "#7b3fa0"
INTERVAL_FILL = "rgba(123, 63, 160, 0.14)"
FAIL_COLOUR = "#b8002e"


# ----------------------------------------------------------------------------
# typed values, checked at the edge


def _number(value) -> float | None:
    if isinstance(value, bool) or value is None:
        return None
    try:
        v = float(value)
    except (TypeError, ValueError, OverflowError):
        return None
    return v if math.isfinite(v) else None


def parse_readings(text_in: str | None, decimal: str = ".") -> np.ndarray:
    """Readings typed by the user, with the rules of the prediction box.

    The length is checked before the text is split. With the decimal point, commas, semicolons,
    spaces and new lines separate values; with the decimal comma (a file written that way),
    "12,5" is one value and only semicolons, spaces and new lines separate.
    """
    if not text_in or not str(text_in).strip():
        return np.empty(0)
    if len(text_in) > MAX_READING_CHARS:
        raise FitError(text.too_many_readings(MAX_READINGS, len(text_in), MAX_READING_CHARS))
    comma = decimal == ","
    parts = [p for p in re.split(r"[\s;]+" if comma else r"[\s;,]+", text_in.strip()) if p]
    if len(parts) > MAX_READINGS:
        raise FitError(text.too_many_readings(MAX_READINGS))
    example = "12,5; 40" if comma else "12.5, 40"
    out = []
    for p in parts:
        token = p.replace(",", ".") if comma else p
        v = _number(token)
        if v is None:
            raise FitError(text.not_a_reading(p, _wanted(token), example))
        out.append(v)
    return np.asarray(out, dtype=float)


def _wanted(token: str) -> str:
    try:
        float(token)
    except ValueError:
        return "a number"
    return "a finite number"


def check_readings_count(value) -> int:
    """k, the readings averaged per unknown: a whole number from 1 to 1000 (empty: 1)."""
    if value is None or value == "":
        return 1
    v = _number(value)
    if v is None or v != int(v) or not READINGS_RANGE[0] <= v <= READINGS_RANGE[1]:
        raise FitError(text.bad_count(value))
    return int(v)


def check_level(value) -> float:
    """The interval level typed in per cent (empty: 95), as a fraction."""
    if value is None or value == "":
        return LEVEL_DEFAULT / 100.0
    v = _number(value)
    if v is None or not LEVEL_RANGE[0] <= v <= LEVEL_RANGE[1]:
        raise FitError(text.bad_level(value))
    return v / 100.0


def check_tolerance(value, default: float, what: str) -> float:
    """A tolerance in per cent: above 0 and at most 100 (empty: ``default``)."""
    if value is None or value == "":
        return float(default)
    v = _number(value)
    if v is None or not 0.0 < v <= 100.0:
        raise FitError(text.bad_tolerance(what, value))
    return v


# ----------------------------------------------------------------------------
# the fit read through (every usable row, the page's weighting), cached per service


@dataclass(frozen=True, eq=False)
class CalibrationModel:
    """The precise fit the calibration panels read through, and the standards it was fitted on."""

    fit: PolynomialFit
    weighting: str  # "none", a named rule, or "column"
    x: np.ndarray
    y: np.ndarray
    lines: np.ndarray | None
    x_label: str
    y_label: str

    @property
    def note(self) -> str:
        label = fitting.WEIGHTINGS.get(self.weighting, "the weights column")
        return text.calibration_fitted(self.fit.n, self.fit.degree, label)


class _Cache:
    def __init__(self, size: int = 32):
        self.size = size
        self.items: OrderedDict = OrderedDict()
        self.lock = threading.Lock()

    def get_or_make(self, key, make):
        with self.lock:
            if key in self.items:
                self.items.move_to_end(key)
                return self.items[key]
        value = make()
        with self.lock:
            self.items[key] = value
            while len(self.items) > self.size:
                self.items.popitem(last=False)
        return value


_CACHES: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
_CACHES_LOCK = threading.Lock()


def _cache(service: FitService, kind: str) -> _Cache:
    with _CACHES_LOCK:
        per = _CACHES.setdefault(service, {})
        return per.setdefault(kind, _Cache())


def _degree(service: FitService, ds: str, cols: Columns, split: SplitSettings, degree) -> int:
    return clamp_degree(degree, service.split_view(ds, cols, split).max_degree)


def calibration_fit(service: FitService, ds: str, cols: Columns, split: SplitSettings, degree) -> CalibrationModel:
    """The hand-over fit on every usable row at ``degree`` with the page's weighting (cached): a CalibrationModel.

    The weighting is ``cols.weighting`` (or the weights column). The service's selection refuses a
    named weighting undefined on some rows (x = 0 under 1/x, y ≤ 0 under 1/y) with the file's line
    numbers of those rows, and a named weighting together with a weights column.
    """
    sel = service.selection(ds, cols)  # the owner and eviction check comes first
    d = _degree(service, ds, cols, split, degree)

    def make() -> CalibrationModel:
        fit = views_model.handover_fit(service, ds, cols, d)  # the model the card and the downloads show
        used = "column" if cols.weights is not None else cols.weighting
        x_label = text.axis_label(sel.x_name, sel.x_unit)
        y_label = text.axis_label(sel.y_name, sel.y_unit)
        return CalibrationModel(fit, used, sel.x, sel.y, sel.line_numbers, x_label, y_label)

    return _cache(service, "fit").get_or_make((ds, cols, d), make)


# ----------------------------------------------------------------------------
# the three results


def read_back(model: CalibrationModel, readings: np.ndarray, k: int, level: float) -> ReadBack:
    """Each reading (the mean of k) read back to x with its calibration interval and u(x)."""
    return fitting.read_back(model.fit, readings, readings=k, level=level)


def back_calculation(model: CalibrationModel, tolerance: float, lowest_tolerance: float) -> BackCalculation:
    """Every standard's response read back through the fit and judged against the tolerances."""
    if model.x.size > MAX_STANDARDS:
        raise FitError(text.too_many_standards(model.x.size, MAX_STANDARDS))
    return fitting.back_calculate(
        model.fit, model.x, model.y, tolerance=tolerance, lowest_tolerance=lowest_tolerance, lines=model.lines
    )


def weighting_comparison(service: FitService, ds: str, cols: Columns, model: CalibrationModel) -> WeightingComparison:
    """The named weightings ranked by Σ|error %| of the standards read back at this degree (cached)."""
    if model.x.size > MAX_STANDARDS:
        raise FitError(text.too_many_standards(model.x.size, MAX_STANDARDS))
    d = model.fit.degree
    key = (ds, replace(cols, weighting="none"), d)  # the same standards whatever rule is in force
    return _cache(service, "weightings").get_or_make(key, lambda: _compare(model, d))


def _compare(model: CalibrationModel, degree: int) -> WeightingComparison:
    """The engine's comparison; a rule undefined on some rows names them by their lines in the file."""
    return fitting.compare_weightings(model.x, model.y, degree, lines=model.lines)


# ----------------------------------------------------------------------------
# marks on the fit chart (merged into its figure by a clientside Patch)


def _reading_shapes(i: int, row, domain: tuple[float, float]) -> list[dict]:
    tag = f"{READINGS_OWNER}-{i}"
    line = dict(
        type="line", name=f"{tag}-y", xref="paper", x0=0, x1=1, yref="y", y0=row.y, y1=row.y,
        line=dict(color=READING_COLOUR, width=2, dash="dash"), layer="above",
        label=dict(text=text.reading_label(row.y), textposition="end", yanchor="bottom",
                   font=dict(color=READING_COLOUR, size=11)),
    )  # fmt: skip
    if not math.isfinite(row.x):
        return [line]
    lo = domain[0] if row.x_lower is None else row.x_lower
    hi = domain[1] if row.x_upper is None else row.x_upper
    band = dict(
        type="rect", name=f"{tag}-interval", xref="x", x0=lo, x1=hi, yref="paper", y0=0, y1=1,
        fillcolor=INTERVAL_FILL, line=dict(width=0), layer="below",
    )  # fmt: skip
    at = dict(
        type="line", name=f"{tag}-x", xref="x", x0=row.x, x1=row.x, yref="paper", y0=0, y1=1,
        line=dict(color=READING_COLOUR, width=1.5, dash="dot"), layer="above",
    )  # fmt: skip
    return [band, line, at]


def reading_marks(result: ReadBack | None, domain=(0.0, 1.0), stamp=None) -> dict:
    """The shapes that mark the first MARKED_READINGS readings: a line at y0, the interval shaded on x.

    ``stamp`` (the settings and degree) makes each new result a new value for the page's store.
    """
    shapes: list[dict] = []
    if result is not None:
        for i, row in enumerate(result.rows[:MARKED_READINGS]):
            shapes.extend(_reading_shapes(i, row, domain))
    return {"owner": READINGS_OWNER, "shapes": shapes, "stamp": stamp}


def failing_marks(back: BackCalculation | None, stamp=None) -> dict:
    """A marker trace (meta owner STANDARDS_OWNER) crossing every standard that fails or does not read back."""
    traces: list[dict] = []
    failing = [] if back is None else [r for r in back.rows if r.within_tolerance is False]
    if failing:
        traces.append(
            dict(
                type="scatter",
                mode="markers",
                x=[r.x for r in failing],
                y=[r.y for r in failing],
                name=text.FAILING_MARK_NAME,
                meta={"owner": STANDARDS_OWNER},
                marker=dict(symbol="x-thin", size=15, color=FAIL_COLOUR, line=dict(width=2.5, color=FAIL_COLOUR)),
                hovertemplate="standard outside tolerance<br>x = %{x}<br>y = %{y}<extra></extra>",
            )
        )
    return {"owner": STANDARDS_OWNER, "traces": traces, "stamp": stamp}


# ----------------------------------------------------------------------------
# the HTML report's calibration sections


def report_sections(
    service: FitService,
    key: dict | None,
    degree,
    *,
    readings=None,
    count=None,
    level=None,
    tolerance=None,
    lowest_tolerance=None,
) -> dict:
    """Keyword arguments for ``exports.html_report``: ``read_back`` and ``back_calculation`` as on screen.

    Takes the values of the calibration panels' inputs (ids.READBACK_INPUT, READBACK_COUNT,
    READBACK_LEVEL, TOLERANCE, LOWEST_TOLERANCE); the weighting is the settings record's. A
    section whose inputs the page refused (its panel shows why) or that has nothing to show (no
    readings typed) is left out.
    """
    from .panels.settings import from_key

    if not key or degree is None:
        return {}
    ds, cols, split = from_key(key)
    out: dict = {}
    try:
        model = calibration_fit(service, ds, cols, split, degree)
    except FitError:
        return out
    try:
        ys = parse_readings(readings, decimal=key.get("decimal", "."))
        if ys.size:
            out["read_back"] = read_back(model, ys, check_readings_count(count), check_level(level))
    except FitError:
        pass
    try:
        tol = check_tolerance(tolerance, 15.0, text.TOLERANCE_WHAT)
        low = check_tolerance(lowest_tolerance, 20.0, text.LOWEST_TOLERANCE_WHAT)
        out["back_calculation"] = back_calculation(model, tol, low)
    except FitError:
        pass
    return out
