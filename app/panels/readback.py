"""From a reading to x: unknowns read back through the curve at the degree on screen.

The user types readings y0 (each the mean of k readings; typed with the file's decimal mark, as
in the prediction box) and gets x0, its calibration interval at the chosen level (NIST/SEMATECH
e-Handbook 4.5.2.1), u(x0) and every warning in words. The level box is the page's interval level
(``ids.INTERVAL_LEVEL``, which the address keeps). The fit is the precise fit on every
usable row with the page's weighting, chosen in the Columns panel and carried by the settings
record (``app/views_calibration.py``).

The readings are marked on the fit chart: a dashed line at each y0 and the interval shaded
along x. A second, clientside callback merges those shapes into the chart's figure with a
``dash.Patch`` of ``layout.shapes`` only: it drops the shapes it put there before (their
names start with ``views_calibration.READINGS_OWNER``) and keeps everyone else's. Chart code
that draws texts straight into the plot (title, caption, meta) would see them reset when the
graph redraws from the patched property, so the patch carries those texts along as they are
on screen (``LIVE_TEXTS_JS``; the standards panel's patch does the same).
"""

from __future__ import annotations

from dash import Input, Output, State, dcc, html, no_update

import fitting

from .. import components, ids, text
from .. import views_calibration as cal
from ..service import FitService
from ._common import PageConfig, notice_on_error, panel
from .settings import from_key

SLOT = "tools"

# Texts the page's script draws straight into the plot on a key press rather than through the
# figure property: a patch of the property makes the graph redraw from the stored figure, so the
# patch carries the texts on screen along, unchanged, and the chart keeps showing what it showed.
LIVE_TEXTS_JS = """
function degreescopeLiveTexts(patch, figure, graphId) {
    const gd = document.querySelector("#" + graphId + " .js-plotly-plot");
    if (!gd || !gd.layout) { return; }
    ["title", "annotations", "meta"].forEach(function (k) {
        const live = gd.layout[k];
        if (live !== undefined && JSON.stringify(live) !== JSON.stringify(figure.layout[k])) {
            patch.assign(["layout", k], JSON.parse(JSON.stringify(live)));
        }
    });
}
"""

MERGE_SHAPES_JS = """
function(marks, figure) {
    const dc = window.dash_clientside;
    if (!marks || !figure || !figure.layout) { return dc.no_update; }
    const owner = marks.owner;
    const mine = function (s) { return !!s && typeof s.name === "string" && s.name.indexOf(owner) === 0; };
    const before = figure.layout.shapes || [];
    const kept = before.filter(function (s) { return !mine(s); });
    const added = marks.shapes || [];
    if (kept.length === before.length && added.length === 0) { return dc.no_update; }
    const patch = new dc.Patch();
    patch.assign(["layout", "shapes"], kept.concat(added));
    degreescopeLiveTexts(patch, figure, "%s");
    return patch.build();
    %s
}
""" % (ids.FIT_CHART, LIVE_TEXTS_JS)


def _number_box(label: str, box_id: str, value, width_class: str = "num") -> html.Div:
    return html.Div(
        [html.Label(label, htmlFor=box_id), dcc.Input(id=box_id, type="number", value=value, className=width_class)],
        className="cal-field",
    )


def layout(cfg: PageConfig) -> html.Section:
    """The readings box, k and the level, the result table, the fit used and the caution."""
    return panel(
        text.READBACK_TITLE,
        html.Label(text.READBACK_INPUT_LABEL, htmlFor=ids.READBACK_INPUT),
        dcc.Textarea(id=ids.READBACK_INPUT, placeholder=text.READBACK_PLACEHOLDER, className="predict-input"),
        html.Div(
            [
                _number_box(text.READBACK_COUNT_LABEL, ids.READBACK_COUNT, 1),
                _number_box(text.READBACK_LEVEL_LABEL, ids.READBACK_LEVEL, cal.LEVEL_DEFAULT),
            ],
            className="cal-fields",
        ),
        html.Div(id=ids.READBACK_RESULT, className="cal-result"),
        html.P(id=ids.READBACK_NOTE, className="muted small"),
        html.P(fitting.CALIBRATION_CAUTION, className="cal-caution small"),
        dcc.Store(id=ids.READBACK_MARKS),
        class_name="readback",
    )


OUTPUT = dict(
    result=Output(ids.READBACK_RESULT, "children"),
    note=Output(ids.READBACK_NOTE, "children"),
    marks=Output(ids.READBACK_MARKS, "data"),
)
INPUTS = dict(
    readings=Input(ids.READBACK_INPUT, "value"),
    count=Input(ids.READBACK_COUNT, "value"),
    level=Input(ids.READBACK_LEVEL, "value"),
    key=Input(ids.SPLIT_KEY, "data"),
    degree=Input(ids.DEGREE_SETTLED, "data"),
)


def _stamp(key, degree, weighting) -> list:
    names = ("dataset", "x", "y", "mode", "holdout", "folds", "seed", "excluded")
    return [key.get(k) for k in names] + [degree, weighting]


def on_readback(service: FitService, readings, count, level, key, degree) -> dict:
    """x0, its interval and u(x0) per reading, the fit it was read through, and the chart's marks."""
    if not key or degree is None:
        return dict(result=html.P(text.READBACK_EMPTY, className="muted small"), note="", marks=cal.reading_marks(None))
    ys = cal.parse_readings(readings, decimal=key.get("decimal", "."))
    k = cal.check_readings_count(count)
    lv = cal.check_level(level)
    ds, cols, split = from_key(key)
    model = cal.calibration_fit(service, ds, cols, split, degree)
    stamp = _stamp(key, model.fit.degree, model.weighting)
    if ys.size == 0:
        empty = html.P(text.READBACK_EMPTY, className="muted small")
        return dict(result=empty, note=model.note, marks=cal.reading_marks(None, stamp=stamp))
    result = cal.read_back(model, ys, k, lv)
    domain = tuple(float(v) for v in model.fit.domain)
    return dict(
        result=components.readback_table(result, domain),
        note=model.note,
        marks=cal.reading_marks(result, domain, stamp),
    )


def _on_error(exc: Exception) -> dict:
    """The message in the result area; the chart loses this panel's marks (they belong to no valid reading)."""
    handle = notice_on_error(OUTPUT, "result", components.error_paragraph)
    out = handle(exc)
    out["marks"] = cal.reading_marks(None)
    return out


# the calibration panels' inputs, as the downloads panel reads them for the HTML report
# (``views_calibration.report_sections(service, key, degree, **values)``)
REPORT_STATE = dict(
    readings=State(ids.READBACK_INPUT, "value"),
    count=State(ids.READBACK_COUNT, "value"),
    level=State(ids.READBACK_LEVEL, "value"),
    tolerance=State(ids.TOLERANCE, "value"),
    lowest_tolerance=State(ids.LOWEST_TOLERANCE, "value"),
)


# the level box is the page's interval level control: it writes ids.INTERVAL_LEVEL (which the
# address keeps) and follows it when the address restores a view

LEVEL_TO_PAGE = dict(level=Output(ids.INTERVAL_LEVEL, "data", allow_duplicate=True))
LEVEL_TO_PAGE_INPUTS = dict(box=Input(ids.READBACK_LEVEL, "value"))
LEVEL_TO_PAGE_STATE = dict(level=State(ids.INTERVAL_LEVEL, "data"))
LEVEL_FROM_PAGE = dict(box=Output(ids.READBACK_LEVEL, "value"))
LEVEL_FROM_PAGE_INPUTS = dict(level=Input(ids.INTERVAL_LEVEL, "data"))
LEVEL_FROM_PAGE_STATE = dict(box=State(ids.READBACK_LEVEL, "value"))


def on_level_box(box, level) -> dict:
    """A valid level typed in the box becomes the page's level; a refused one is explained by the read-back."""
    try:
        pct = round(cal.check_level(box) * 100, 6)
    except fitting.DegreescopeError:
        return dict(level=no_update)
    return dict(level=no_update if level is not None and float(level) == pct else pct)


def on_level_page(level, box) -> dict:
    """The box shows the page's level (as the address restored it)."""
    if level is None:
        return dict(box=no_update)
    return dict(box=no_update if box is not None and box != "" and float(box) == float(level) else level)


def register(app, service: FitService) -> None:
    """Wire the read-back and the clientside merge of its marks into the fit chart."""
    app.callback(output=OUTPUT, inputs=INPUTS, on_error=_on_error)(
        lambda readings, count, level, key, degree: on_readback(service, readings, count, level, key, degree)
    )
    app.callback(
        output=LEVEL_TO_PAGE, inputs=LEVEL_TO_PAGE_INPUTS, state=LEVEL_TO_PAGE_STATE, prevent_initial_call=True
    )(on_level_box)
    app.callback(
        output=LEVEL_FROM_PAGE, inputs=LEVEL_FROM_PAGE_INPUTS, state=LEVEL_FROM_PAGE_STATE, prevent_initial_call=True
    )(on_level_page)
    app.clientside_callback(
        MERGE_SHAPES_JS,
        Output(ids.FIT_CHART, "figure", allow_duplicate=True),
        Input(ids.READBACK_MARKS, "data"),
        State(ids.FIT_CHART, "figure"),
        prevent_initial_call=True,
    )
