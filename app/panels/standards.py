"""Standards read back: every standard's response through the curve, judged; the weightings compared.

The fit read through carries the page's weighting (none, 1/x, 1/x², 1/y, 1/y²; ``fitting.WEIGHTINGS``),
picked in the Columns panel (``app/panels/data.py``) and carried by the settings record; the
comparison marks the rule in force. Rows where the rule is undefined are refused with their line
numbers. The tolerances default
to the bioanalytical rule of FDA 2018 and ICH M10 (±15 %, ±20 % at the lowest level) and can
be set. Failing standards are crossed out in red on the fit chart by a marker trace that a clientside
``dash.Patch`` appends to the chart's data, after removing the one it added before (found by
its ``meta.owner``, ``views_calibration.STANDARDS_OWNER``).
"""

from __future__ import annotations

from dash import Input, Output, State, dcc, html

from .. import components, ids, text
from .. import views_calibration as cal
from ..service import FitService
from ._common import PageConfig, notice_on_error, panel
from .readback import LIVE_TEXTS_JS
from .settings import from_key

SLOT = "main"
TOLERANCE_DEFAULT = 15.0
LOWEST_TOLERANCE_DEFAULT = 20.0

MERGE_TRACE_JS = """
function(marks, figure) {
    const dc = window.dash_clientside;
    if (!marks || !figure || !figure.data) { return dc.no_update; }
    const owner = marks.owner;
    const old = figure.data.filter(function (t) { return !!t && !!t.meta && t.meta.owner === owner; });
    const added = marks.traces || [];
    if (old.length === 0 && added.length === 0) { return dc.no_update; }
    const patch = new dc.Patch();
    old.forEach(function (t) { patch.remove(["data"], t); });
    added.forEach(function (t) { patch.append(["data"], t); });
    degreescopeLiveTexts(patch, figure, "%s");
    return patch.build();
    %s
}
""" % (ids.FIT_CHART, LIVE_TEXTS_JS)


def _field(label: str, child, field_id: str) -> html.Div:
    return html.Div([html.Label(label, htmlFor=field_id), child], className="cal-field")


def layout(cfg: PageConfig) -> html.Section:
    """The tolerances, the summary and the table, then the weighting comparison."""
    fields = html.Div(
        [
            _field(
                text.TOLERANCE_LABEL,
                dcc.Input(id=ids.TOLERANCE, type="number", value=TOLERANCE_DEFAULT, className="num"),
                ids.TOLERANCE,
            ),
            _field(
                text.LOWEST_TOLERANCE_LABEL,
                dcc.Input(id=ids.LOWEST_TOLERANCE, type="number", value=LOWEST_TOLERANCE_DEFAULT, className="num"),
                ids.LOWEST_TOLERANCE,
            ),
        ],
        className="cal-fields",
    )
    return panel(
        text.STANDARDS_TITLE,
        fields,
        html.P(text.STANDARDS_SOURCE, className="muted small"),
        html.Div(id=ids.STANDARDS_NOTE, className="notice"),
        html.P(id=ids.STANDARDS_SUMMARY, className="cal-summary"),
        html.Div(id=ids.STANDARDS_TABLE, className="cal-scroll"),
        html.H3(text.WEIGHTING_COMPARISON_TITLE, className="cal-subtitle"),
        html.P(text.WEIGHTING_SOURCE, className="muted small"),
        html.Div(id=ids.WEIGHTING_TABLE, className="cal-scroll"),
        dcc.Store(id=ids.STANDARDS_MARKS),
        class_name="standards",
    )


OUTPUT = dict(
    note=Output(ids.STANDARDS_NOTE, "children"),
    summary=Output(ids.STANDARDS_SUMMARY, "children"),
    table=Output(ids.STANDARDS_TABLE, "children"),
    comparison=Output(ids.WEIGHTING_TABLE, "children"),
    marks=Output(ids.STANDARDS_MARKS, "data"),
)
INPUTS = dict(
    tolerance=Input(ids.TOLERANCE, "value"),
    lowest_tolerance=Input(ids.LOWEST_TOLERANCE, "value"),
    key=Input(ids.SPLIT_KEY, "data"),
    degree=Input(ids.DEGREE_SETTLED, "data"),
)


def on_standards(service: FitService, tolerance, lowest_tolerance, key, degree) -> dict:
    """The standards table and its summary, the weighting comparison and the marks of failing standards."""
    if not key or degree is None:
        return dict(note="", summary="", table=[], comparison=[], marks=cal.failing_marks(None))
    tol = cal.check_tolerance(tolerance, TOLERANCE_DEFAULT, text.TOLERANCE_WHAT)
    low = cal.check_tolerance(lowest_tolerance, LOWEST_TOLERANCE_DEFAULT, text.LOWEST_TOLERANCE_WHAT)
    ds, cols, split = from_key(key)
    model = cal.calibration_fit(service, ds, cols, split, degree)
    back = cal.back_calculation(model, tol, low)
    comparison = cal.weighting_comparison(service, ds, cols, model)
    extra = [html.P(text.weighting_column_note(str(cols.weights)), className="muted small")] if cols.weights else []
    stamp = [key.get(k) for k in ("dataset", "x", "y", "mode", "excluded")] + [model.fit.degree, model.weighting]
    return dict(
        note=html.P(model.note, className="muted small"),
        summary=text.standards_summary(back.summary),
        table=components.standards_table(back),
        comparison=[components.weighting_table(comparison, model.weighting), *extra],
        marks=cal.failing_marks(back, [*stamp, tol, low]),
    )


def _on_error(exc: Exception) -> dict:
    """The message in the panel's note; the old table and summary go, and so do the chart's rings."""
    out = notice_on_error(OUTPUT, "note", components.error_paragraph)(exc)
    out.update(summary="", table=[], comparison=[], marks=cal.failing_marks(None))
    return out


def register(app, service: FitService) -> None:
    """Wire the standards table and the clientside merge of the failing standards' marker trace."""
    app.callback(output=OUTPUT, inputs=INPUTS, on_error=_on_error)(
        lambda tolerance, lowest_tolerance, key, degree: on_standards(service, tolerance, lowest_tolerance, key, degree)
    )
    app.clientside_callback(
        MERGE_TRACE_JS,
        Output(ids.FIT_CHART, "figure", allow_duplicate=True),
        Input(ids.STANDARDS_MARKS, "data"),
        State(ids.FIT_CHART, "figure"),
        prevent_initial_call=True,
    )
