"""Take it to the meeting: the HTML report, the model JSON, the predictions CSV and the chart images.

Downloads hold the hand-over model: fitted on every usable row of the columns on screen, at
the degree on screen (``app/views_model.py``); the split on screen only judged the degree.
The model JSON carries the same provenance as the command line's (``app.handover.provenance``).
Chart images are made in the browser (``assets/degreescope.js``), with no server help.
"""

from __future__ import annotations

import unicodedata

from dash import Input, Output, State, ctx, dcc, html, no_update

from fitting import DegreescopeError

from .. import exports, figures, ids, text, views_calibration, views_model
from ..service import FitService
from ..views_evidence import exclusions_of
from . import readback
from ._common import PageConfig, notice_on_error, panel
from .predict import typed_x
from .settings import from_key

SLOT = "tools"
IMAGE_JS = """
function(fitPng, fitSvg, errPng, errSvg) {
    const t = (window.dash_clientside && window.dash_clientside.callback_context.triggered) || [];
    if (!t.length || !t[0].value) { return window.dash_clientside.no_update; }
    const which = t[0].prop_id.split('.')[0];
    return window.degreescope.saveChart(which);
}
"""
BUTTONS = {ids.REPORT_BUTTON: "report", ids.MODEL_BUTTON: "model", ids.CSV_BUTTON: "csv"}


def layout(cfg: PageConfig) -> html.Section:
    """The three download buttons, their note and the notice."""
    buttons = html.Div(
        [
            html.Button("HTML report", id=ids.REPORT_BUTTON, n_clicks=0, className="btn"),
            html.Button("Model JSON", id=ids.MODEL_BUTTON, n_clicks=0, className="btn"),
            html.Button("Predictions CSV", id=ids.CSV_BUTTON, n_clicks=0, className="btn"),
        ],
        className="button-row",
    )
    return panel(
        "Take it to the meeting",
        html.P(text.DOWNLOADS_NOTE, className="muted small"),
        buttons,
        html.P(
            "The CSV holds the x values typed on the left, or every data row when none are typed. "
            "Chart images: the PNG and SVG buttons under each chart.",
            className="muted small",
        ),
        html.Div(id=ids.EXPORT_NOTICE, className="notice", role="status"),
        dcc.Download(id=ids.DOWNLOAD),
    )


def slug(name: str) -> str:
    """A file-name piece from a column name: letters (any script, case kept) and digits, dashes, at most 40.

    >>> slug("R (kΩ)"), slug("Temperatur / °C"), slug("ΔT"), slug("***")
    ('R-kΩ', 'Temperatur-C', 'ΔT', 'fit')
    """
    out = "".join(c if c.isalnum() else "-" for c in unicodedata.normalize("NFC", str(name)))
    while "--" in out:
        out = out.replace("--", "-")
    return out.strip("-")[:40].strip("-") or "fit"


OUTPUT = dict(download=Output(ids.DOWNLOAD, "data"), notice=Output(ids.EXPORT_NOTICE, "children"))
INPUTS = dict(
    n_report=Input(ids.REPORT_BUTTON, "n_clicks"),
    n_model=Input(ids.MODEL_BUTTON, "n_clicks"),
    n_csv=Input(ids.CSV_BUTTON, "n_clicks"),
)
STATE = dict(
    key=State(ids.SPLIT_KEY, "data"),
    degree=State(ids.DEGREE_SETTLED, "data"),
    bands=State(ids.BANDS, "value"),
    text=State(ids.PREDICT_INPUT, "value"),
    calibration=readback.REPORT_STATE,  # the read-back and standards panels' inputs, for the report
    exclusions=State(ids.EXCLUSIONS, "data"),  # rows left out on purpose, with their reasons
)


def _predictions_csv(service: FitService, key: dict, degree, text_in) -> str:
    ds, cols, split = from_key(key)
    xs = typed_x(text_in, key)
    if xs.size:
        p = views_model.handover_predict(service, ds, cols, split, degree, xs)
        return exports.predictions_csv(p, x_name=cols.x, y_name=cols.y)
    sel, p = views_model.handover_row_predictions(service, ds, cols, split, degree)
    return exports.predictions_csv(p, x_name=cols.x, y_name=cols.y, y_observed=sel.y)


def _report(service: FitService, key: dict, degree, bands, calibration=None, left_out=()) -> str:
    ds, cols, split = from_key(key)
    view = service.split_view(ds, cols, split)
    dv = service.degree_view(ds, cols, split, degree)
    model = views_model.handover_model(service, ds, cols, split, degree)
    fit_fig, err_fig = figures.fit_chart_layers(view, dv, bands), figures.error_figure(view, dv)
    sections = views_calibration.report_sections(service, key, degree, **(calibration or {}))
    rows = [{"line": e.line, "reason": e.reason or "no reason given"} for e in left_out]
    return exports.html_report(service.info(ds), view, dv, model, fit_fig, err_fig, left_out=rows or None, **sections)


def on_export(service: FitService, which: str, key, degree, bands, text_in, calibration=None, exclusions=None) -> dict:
    """The file for one download button: "model", "csv" or "report"; each holds the every-row fit."""
    if not key or degree is None:
        raise DegreescopeError("Nothing to export yet; wait for the charts.")
    ds, cols, split = from_key(key)
    model = views_model.handover_model(service, ds, cols, split, degree)
    left_out = exclusions_of(exclusions, ds)
    stem = f"degreescope-{slug(cols.y)}-degree{model.fit.degree}"
    if which == "model":
        content = exports.model_json(model.fit, views_model.handover_provenance(service, ds, cols, left_out))
        data = {"content": content, "filename": f"{stem}.model.json", "type": "application/json"}
    elif which == "csv":
        content = _predictions_csv(service, key, degree, text_in)
        data = {"content": content, "filename": f"{stem}.predictions.csv", "type": "text/csv"}
    else:
        data = {
            "content": _report(service, key, degree, bands, calibration, left_out),
            "filename": f"{stem}.report.html",
            "type": "text/html",
        }
    return dict(download=data, notice="")


def register(app, service: FitService) -> None:
    """Wire the download buttons and the clientside chart images."""

    def export_cb(n_report, n_model, n_csv, key, degree, bands, text, calibration=None, exclusions=None):
        which = BUTTONS.get(ctx.triggered_id)
        if which is None:
            return dict(download=no_update, notice=no_update)
        return on_export(service, which, key, degree, bands, text, calibration, exclusions)

    app.callback(
        output=OUTPUT,
        inputs=INPUTS,
        state=STATE,
        prevent_initial_call=True,
        on_error=notice_on_error(OUTPUT, "notice"),
    )(export_cb)
    app.clientside_callback(
        IMAGE_JS,
        Output(ids.IMAGE_DONE, "data"),
        Input(ids.FIT_PNG, "n_clicks"),
        Input(ids.FIT_SVG, "n_clicks"),
        Input(ids.ERROR_PNG, "n_clicks"),
        Input(ids.ERROR_SVG, "n_clicks"),
        prevent_initial_call=True,
    )
