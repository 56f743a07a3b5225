"""Callbacks: unpack the inputs, call the service, call a figure builder, return.

Each callback body is a plain module-level function taking the service first, so
tests call them without a browser; ``register`` wires them to an app.

Failures never break the page: a ``DegreescopeError`` shows its one-sentence message
in the notice area that belongs to the callback, any other exception shows a short
"internal error" note and is logged with its traceback.
"""

from __future__ import annotations

import functools
import logging
import math
from urllib.parse import parse_qs, urlencode

from dash import Input, Output, State, ctx, html, no_update

from fitting import DegreescopeError

from . import exports, figures, ids
from .layout import degree_marks
from .service import Columns, FitService, SplitSettings, clamp_degree, parse_x_values

log = logging.getLogger("degreescope.app")

INTERNAL_ERROR = "Something went wrong inside degreescope (internal error); the details are in the server log."


class Failed(Exception):
    """Carries the user-facing message of a failed callback."""


def user_message(exc: BaseException) -> str:
    if isinstance(exc, DegreescopeError):
        return str(exc)
    log.exception("callback failed", exc_info=exc)
    return INTERNAL_ERROR


def guarded(n_outputs: int, notice_index: int, *, wrap=lambda m: m):
    """On failure return ``no_update`` everywhere but the notice output, which gets the message."""

    def deco(fn):
        @functools.wraps(fn)
        def inner(*args, **kwargs):
            try:
                return fn(*args, **kwargs)
            except Exception as exc:  # noqa: BLE001 - the page must keep working
                out = [no_update] * n_outputs
                out[notice_index] = wrap(user_message(exc))
                return tuple(out) if n_outputs > 1 else out[0]

        return inner

    return deco


# ----------------------------------------------------------------------------
# settings


def split_key(dataset, x, y, weights, group, mode, holdout, folds, seed) -> dict:
    s = SplitSettings.parse(mode, holdout, folds if folds is not None else 10, seed if seed is not None else 0)
    if not dataset or not dataset.get("id"):
        raise DegreescopeError("No dataset is loaded; upload a file.")
    if not x or not y:
        raise DegreescopeError("Choose an x and a y column.")
    return {
        "dataset": dataset["id"],
        "x": x,
        "y": y,
        "weights": weights or None,
        "group": group or None,
        "mode": s.mode,
        "holdout": s.holdout,
        "folds": s.folds,
        "seed": s.seed,
    }


def from_key(key: dict) -> tuple[str, Columns, SplitSettings]:
    if not key:
        raise DegreescopeError("The charts are not ready yet; wait a moment or upload a file.")
    cols = Columns(key["x"], key["y"], key.get("weights"), key.get("group"))
    split = SplitSettings(
        mode=key["mode"], holdout=float(key["holdout"]), folds=int(key["folds"]), seed=int(key["seed"])
    )
    return key["dataset"], cols, split


def url_query(key: dict, degree) -> str:
    q = {"x": key["x"], "y": key["y"]}
    if key.get("weights"):
        q["w"] = key["weights"]
    if key.get("group"):
        q["g"] = key["group"]
    q.update(
        mode=key["mode"], holdout=f"{round(float(key['holdout']) * 100)}", k=str(key["folds"]), seed=str(key["seed"])
    )
    if degree is not None:
        q["degree"] = str(int(degree))
    return "?" + urlencode(q)


def parse_query(search: str | None) -> dict:
    if not search:
        return {}
    raw = parse_qs(search.lstrip("?"), keep_blank_values=False)
    return {k: v[0] for k, v in raw.items() if v}


def _int(v, default=None):
    try:
        return int(float(v))
    except (TypeError, ValueError):
        return default


# ----------------------------------------------------------------------------
# data in


@guarded(2, 1, wrap=lambda m: html.Span(m, className="error"))
def on_upload(service: FitService, contents, filename):
    if not contents:
        return no_update, no_update
    info = service.load_upload(contents, filename)
    return info.to_store(), f"Loaded {info.name}: {info.rows:,} rows."


def intake_children(info) -> list:
    items = [html.Li(line) for line in info.report_lines]
    if info.units:
        items.append(html.Li("Units from the headers: " + "; ".join(f"{c} → {u}" for c, u in info.units.items())))
    return [html.H3(info.name, className="dataset-name"), html.Ul(items, className="intake-lines")]


def on_dataset(service: FitService, dataset, search):
    """Column pickers and intake report for a dataset; settings from the URL when they fit it."""
    n_out = 14
    try:
        info = service.info(dataset["id"]) if dataset else None
        if info is None:
            raise DegreescopeError("No dataset is loaded; upload a file.")
    except Exception as exc:  # noqa: BLE001
        out = [no_update] * n_out
        out[0] = html.P(user_message(exc), className="error")
        return tuple(out)
    q = parse_query(search)
    numeric = list(info.numeric_columns)
    cols = list(info.columns)
    use_q = q.get("x") in numeric and q.get("y") in numeric and q.get("x") != q.get("y")
    x = q["x"] if use_q else info.default_x
    y = q["y"] if use_q else info.default_y
    w = q.get("w") if use_q and q.get("w") in numeric else None
    g = q.get("g") if use_q and q.get("g") in cols else None
    opts = [{"label": c, "value": c} for c in numeric]
    gopts = [{"label": c, "value": c} for c in cols]
    mode = q.get("mode") if use_q and q.get("mode") in ("holdout", "ordered", "kfold") else "holdout"
    hold = _int(q.get("holdout"), 25) if use_q else 25
    hold = min(50, max(10, hold))
    k = min(50, max(2, _int(q.get("k"), 10))) if use_q else 10
    seed = max(0, _int(q.get("seed"), 0)) if use_q else 0
    degree = _int(q.get("degree")) if use_q else None
    return (
        intake_children(info),
        opts,
        x,
        opts,
        y,
        opts,
        w,
        gopts,
        g,
        mode,
        hold,
        k,
        seed,
        degree,
    )


def on_mode(mode, group):
    show, hide = {"display": "block"}, {"display": "none"}
    if mode == "kfold":
        note = (
            f"Grouped folds: each value of {group!r} is held out in turn; k is not used."
            if group
            else "Each fold is held out in turn; error bars show the standard error across folds."
        )
        return hide, (hide if group else show), note
    if mode == "ordered":
        return show, hide, "The highest x values are held out, to see how each degree extrapolates."
    return show, hide, "A random share of the rows is held out; draw a new split to see how much the verdict moves."


def on_new_split(n_clicks, seed):
    if not n_clicks:
        return no_update
    return (_int(seed, 0) or 0) + 1


# ----------------------------------------------------------------------------
# the split: full charts


def _alert(warnings) -> tuple:
    if not warnings:
        return [], "alert alert-off"
    return [html.Strong("Caution at this degree"), *[html.P(w) for w in warnings]], "alert alert-on"


def _readout(dv) -> str:
    se = f" ± {dv.test_rmse_se:.2g}" if math.isfinite(dv.test_rmse_se) else ""
    return f"degree {dv.degree} · test RMSE {dv.test_rmse:.4g}{se}"


SPLIT_OUTPUTS = 14


@guarded(SPLIT_OUTPUTS, 13, wrap=lambda m: html.Span(m, className="error"))
def on_split(service: FitService, dataset, x, y, weights, group, mode, holdout, folds, seed, degree, bands):
    key = split_key(dataset, x, y, weights, group, mode, holdout, folds, seed)
    ds, cols, split = from_key(key)
    view = service.split_view(ds, cols, split)
    d = view.recommended_degree if degree is None else clamp_degree(degree, view.max_degree)
    d = clamp_degree(d, view.max_degree)
    dv = service.degree_view(ds, cols, split, d)
    fit_fig = figures.fit_figure(view, dv, bands)
    err_fig = figures.error_figure(view, dv)
    st = view.steady
    rec = f"Recommended degree: {st.recommended_degree}"
    measure = (
        f"The recommendation and the overfitting warning rest on {view.steady_label} of all {view.rows_used:,} rows "
        f"({st.recommendation_rule} rule), whatever split the charts show. The charts show the {view.split_label}."
    )
    notes = list(view.sweep.warnings) + [w for w in st.warnings if w not in view.sweep.warnings]
    if view.rows_dropped:
        notes.append(f"{view.rows_dropped:,} rows were left out with these columns (see the intake report).")
    alert_children, alert_class = _alert(dv.warnings)
    new_degree = d if d != degree else no_update
    return (
        fit_fig,
        err_fig,
        view.max_degree,
        degree_marks(view.max_degree),
        new_degree,
        rec,
        st.recommendation,
        measure,
        [html.P(n) for n in notes],
        alert_children,
        alert_class,
        _readout(dv),
        key,
        "",
    )


# ----------------------------------------------------------------------------
# degree changes: the cheap path


DEGREE_OUTPUTS = 6


@guarded(DEGREE_OUTPUTS, 5, wrap=lambda m: html.Span(m, className="error"))
def on_degree(service: FitService, drag_value, value, bands, key, triggered: str | None = None):
    # a drag sends drag_value; key presses, releases and band switches go by value
    d = drag_value if triggered == "drag_value" and drag_value is not None else value
    if d is None or not key:
        return (no_update,) * DEGREE_OUTPUTS
    ds, cols, split = from_key(key)
    view = service.split_view(ds, cols, split)
    dv = service.degree_view(ds, cols, split, d)
    alert_children, alert_class = _alert(dv.warnings)
    return (
        figures.fit_degree_patch(view, dv, bands),
        figures.error_degree_patch(view, dv),
        alert_children,
        alert_class,
        _readout(dv),
        "",
    )


# ----------------------------------------------------------------------------
# the precise model (off the chart's critical path)


def _num(v, digits=6) -> str:
    return f"{v:.{digits}g}" if v is not None and math.isfinite(v) else "—"


def coefficient_table(model) -> html.Table:
    head = html.Thead(html.Tr([html.Th(h) for h in ("term", "coefficient", "std. error", "95 % CI", "unit")]))
    rows = [
        html.Tr(
            [
                html.Td(r["term"]),
                html.Td(_num(r["coefficient"], 9), className="num"),
                html.Td(_num(r["se"], 4), className="num"),
                html.Td(f"{_num(r['ci_lo'], 6)} … {_num(r['ci_hi'], 6)}", className="num"),
                html.Td(r["unit"]),
            ]
        )
        for r in model.coefficient_rows
    ]
    return html.Table([head, html.Tbody(rows)], className="table")


def stats_table(model) -> html.Table:
    f = model.fit
    se = f" ± {model.test_rmse_se:.2g}" if math.isfinite(model.test_rmse_se) else ""
    rows = [
        ("RMSE", _num(f.rmse, 5), _num(model.test_rmse, 5) + se),
        ("R²", _num(f.r_squared, 7), _num(model.test_r2, 7)),
        ("adjusted R²", _num(f.adjusted_r_squared, 7), "—"),
    ]
    head = html.Thead(html.Tr([html.Th(""), html.Th("training (the fit)"), html.Th("test")]))
    return html.Table(
        [
            head,
            html.Tbody(
                [html.Tr([html.Th(a), html.Td(b, className="num"), html.Td(c, className="num")]) for a, b, c in rows]
            ),
        ],
        className="table stats-table",
    )


MODEL_OUTPUTS = 6


@guarded(MODEL_OUTPUTS, 4, wrap=lambda m: html.Span(m, className="error"))
def on_model(service: FitService, key, degree):
    if not key or degree is None:
        return (no_update,) * MODEL_OUTPUTS
    ds, cols, split = from_key(key)
    view = service.split_view(ds, cols, split)
    model = service.model_view(ds, cols, split, degree)
    f = model.fit
    note = (
        f"Fitted on {model.fitted_on}. Power basis in the original units; 95 % intervals use Student's t with "
        f"{f.dof} degrees of freedom (t = {_num(model.t_quantile, 5)}). Valid x range: {_num(f.domain[0])} to "
        f"{_num(f.domain[1])}."
    )
    if f.warnings:
        note += " " + " ".join(f.warnings)
    return (
        stats_table(model),
        model.equation,
        coefficient_table(model),
        figures.residual_figure(view, model),
        note,
        url_query(key, f.degree),
    )


# ----------------------------------------------------------------------------
# predictions


PREDICT_ROWS_SHOWN = 50  # rows of the on-page prediction table; the CSV export holds every row


@guarded(1, 0, wrap=lambda m: html.P(m, className="error"))
def on_predict(service: FitService, text, key, degree):
    xs = parse_x_values(text)
    if xs.size == 0 or not key or degree is None:
        return html.P("Predictions appear here.", className="muted small")
    ds, cols, split = from_key(key)
    p = service.predict(ds, cols, split, degree, xs)
    head = html.Thead(html.Tr([html.Th(h) for h in ("x", "predicted y", "95 % confidence", "95 % prediction", "")]))
    rows = []
    shown = min(p.x.size, PREDICT_ROWS_SHOWN)
    for i in range(shown):
        flag = "outside the data range: extrapolation" if p.outside[i] else ""
        rows.append(
            html.Tr(
                [
                    html.Td(_num(p.x[i], 8), className="num"),
                    html.Td(_num(p.y[i], 8), className="num"),
                    html.Td(f"{_num(p.conf_lo[i])} … {_num(p.conf_hi[i])}", className="num"),
                    html.Td(f"{_num(p.pred_lo[i])} … {_num(p.pred_hi[i])}", className="num"),
                    html.Td(flag, className="flag" if flag else ""),
                ],
                className="outside" if flag else "",
            )
        )
    table = html.Table([head, html.Tbody(rows)], className="table")
    if shown == p.x.size:
        return table
    note = html.P(
        f"Showing the first {shown} of {p.x.size} predictions; the predictions CSV holds all of them.",
        className="muted small",
    )
    return html.Div([table, note])


# ----------------------------------------------------------------------------
# downloads of bytes


@guarded(2, 1, wrap=lambda m: html.Span(m, className="error"))
def on_export(service: FitService, which: str, key, degree, bands, text):
    if not key or degree is None:
        raise DegreescopeError("Nothing to export yet; wait for the charts.")
    ds, cols, split = from_key(key)
    model = service.model_view(ds, cols, split, degree)
    stem = f"degreescope-{_slug(cols.y)}-degree{model.fit.degree}"
    if which == "model":
        return {
            "content": exports.model_json(model.fit),
            "filename": f"{stem}.model.json",
            "type": "application/json",
        }, ""
    if which == "csv":
        xs = parse_x_values(text)
        if xs.size:
            p = service.predict(ds, cols, split, degree, xs)
            content = exports.predictions_csv(p, x_name=cols.x, y_name=cols.y)
        else:
            sel, p = service.row_predictions(ds, cols, split, degree)
            content = exports.predictions_csv(p, x_name=cols.x, y_name=cols.y, y_observed=sel.y)
        return {"content": content, "filename": f"{stem}.predictions.csv", "type": "text/csv"}, ""
    view = service.split_view(ds, cols, split)
    dv = service.degree_view(ds, cols, split, degree)
    info = service.info(ds)
    report = exports.html_report(
        info, view, dv, model, figures.fit_figure(view, dv, bands), figures.error_figure(view, dv)
    )
    return {"content": report, "filename": f"{stem}.report.html", "type": "text/html"}, ""


def _slug(text: str) -> str:
    out = "".join(c if c.isalnum() else "-" for c in str(text).lower())
    while "--" in out:
        out = out.replace("--", "-")
    return out.strip("-")[:40] or "fit"


# ----------------------------------------------------------------------------
# wiring


# The precise fit, the predictions and the URL follow the degree once it has rested for
# SETTLE_MS, so that a run of key presses or a drag keeps the server and the browser free
# for the chart updates.
SETTLE_MS = 200
SETTLE_JS = (
    """
async function(value) {
    const me = (window.__degreeSettle = (window.__degreeSettle || 0) + 1);
    await new Promise(function (r) { setTimeout(r, %d); });
    if (me !== window.__degreeSettle) { return window.dash_clientside.no_update; }
    return value;
}
"""
    % SETTLE_MS
)

IMAGE_JS = """
function(fitPng, fitSvg, errPng, errSvg) {
    const t = (window.dash_clientside && window.dash_clientside.callback_context.triggered) || [];
    if (!t.length || !t[0].value) { return window.dash_clientside.no_update; }
    const which = t[0].prop_id.split('.')[0];
    return window.degreescope.saveChart(which);
}
"""


def register(app, service: FitService) -> None:
    S = service

    app.callback(
        Output(ids.DATASET, "data"),
        Output(ids.UPLOAD_NOTICE, "children"),
        Input(ids.UPLOAD, "contents"),
        State(ids.UPLOAD, "filename"),
        prevent_initial_call=True,
    )(lambda contents, filename: on_upload(S, contents, filename))

    app.callback(
        Output(ids.INTAKE_REPORT, "children"),
        Output(ids.X_COLUMN, "options"),
        Output(ids.X_COLUMN, "value"),
        Output(ids.Y_COLUMN, "options"),
        Output(ids.Y_COLUMN, "value"),
        Output(ids.WEIGHTS_COLUMN, "options"),
        Output(ids.WEIGHTS_COLUMN, "value"),
        Output(ids.GROUP_COLUMN, "options"),
        Output(ids.GROUP_COLUMN, "value"),
        Output(ids.SPLIT_MODE, "value"),
        Output(ids.HOLDOUT, "value"),
        Output(ids.FOLDS, "value"),
        Output(ids.SEED, "value"),
        Output(ids.DEGREE, "value"),
        Input(ids.DATASET, "data"),
        State(ids.URL, "search"),
    )(lambda dataset, search: on_dataset(S, dataset, search))

    app.callback(
        Output(ids.HOLDOUT_BOX, "style"),
        Output(ids.FOLDS_BOX, "style"),
        Output(ids.SPLIT_NOTE, "children"),
        Input(ids.SPLIT_MODE, "value"),
        Input(ids.GROUP_COLUMN, "value"),
    )(on_mode)

    app.callback(
        Output(ids.SEED, "value", allow_duplicate=True),
        Input(ids.NEW_SPLIT, "n_clicks"),
        State(ids.SEED, "value"),
        prevent_initial_call=True,
    )(on_new_split)

    def split_cb(dataset, x, y, weights, group, mode, holdout, folds, seed, degree, bands):
        return on_split(S, dataset, x, y, weights, group, mode, holdout, folds, seed, degree, bands)

    app.callback(
        Output(ids.FIT_CHART, "figure"),
        Output(ids.ERROR_CHART, "figure"),
        Output(ids.DEGREE, "max"),
        Output(ids.DEGREE, "marks"),
        Output(ids.DEGREE, "value", allow_duplicate=True),
        Output(ids.RECOMMENDED_DEGREE, "children"),
        Output(ids.RECOMMENDATION_TEXT, "children"),
        Output(ids.MEASURE_NOTE, "children"),
        Output(ids.SWEEP_NOTES, "children"),
        Output(ids.OVERFIT_ALERT, "children"),
        Output(ids.OVERFIT_ALERT, "className"),
        Output(ids.DEGREE_READOUT, "children"),
        Output(ids.SPLIT_KEY, "data"),
        Output(ids.FIT_NOTICE, "children"),
        Input(ids.DATASET, "data"),
        Input(ids.X_COLUMN, "value"),
        Input(ids.Y_COLUMN, "value"),
        Input(ids.WEIGHTS_COLUMN, "value"),
        Input(ids.GROUP_COLUMN, "value"),
        Input(ids.SPLIT_MODE, "value"),
        Input(ids.HOLDOUT, "value"),
        Input(ids.FOLDS, "value"),
        Input(ids.SEED, "value"),
        State(ids.DEGREE, "value"),
        State(ids.BANDS, "value"),
        prevent_initial_call="initial_duplicate",
    )(split_cb)

    def degree_cb(drag_value, value, bands, key):
        trig = ctx.triggered_id
        prop = None
        if ctx.triggered:
            prop = ctx.triggered[0]["prop_id"].split(".")[-1]
        return on_degree(S, drag_value, value, bands, key, triggered=prop if trig == ids.DEGREE else "value")

    app.callback(
        Output(ids.FIT_CHART, "figure", allow_duplicate=True),
        Output(ids.ERROR_CHART, "figure", allow_duplicate=True),
        Output(ids.OVERFIT_ALERT, "children", allow_duplicate=True),
        Output(ids.OVERFIT_ALERT, "className", allow_duplicate=True),
        Output(ids.DEGREE_READOUT, "children", allow_duplicate=True),
        Output(ids.FIT_NOTICE, "children", allow_duplicate=True),
        Input(ids.DEGREE, "drag_value"),
        Input(ids.DEGREE, "value"),
        Input(ids.BANDS, "value"),
        State(ids.SPLIT_KEY, "data"),
        prevent_initial_call=True,
    )(degree_cb)

    app.clientside_callback(SETTLE_JS, Output(ids.DEGREE_SETTLED, "data"), Input(ids.DEGREE, "value"))

    app.callback(
        Output(ids.STATS, "children"),
        Output(ids.EQUATION, "children"),
        Output(ids.COEFFICIENTS, "children"),
        Output(ids.RESIDUAL_CHART, "figure"),
        Output(ids.MODEL_NOTE, "children"),
        Output(ids.URL, "search"),
        Input(ids.SPLIT_KEY, "data"),
        Input(ids.DEGREE_SETTLED, "data"),
    )(lambda key, degree: on_model(S, key, degree))

    app.callback(
        Output(ids.PREDICT_TABLE, "children"),
        Input(ids.PREDICT_INPUT, "value"),
        Input(ids.SPLIT_KEY, "data"),
        Input(ids.DEGREE_SETTLED, "data"),
    )(lambda text, key, degree: on_predict(S, text, key, degree))

    def export_cb(n_report, n_model, n_csv, key, degree, bands, text):
        which = {ids.REPORT_BUTTON: "report", ids.MODEL_BUTTON: "model", ids.CSV_BUTTON: "csv"}.get(ctx.triggered_id)
        if which is None:
            return no_update, no_update
        return on_export(S, which, key, degree, bands, text)

    app.callback(
        Output(ids.DOWNLOAD, "data"),
        Output(ids.EXPORT_NOTICE, "children"),
        Input(ids.REPORT_BUTTON, "n_clicks"),
        Input(ids.MODEL_BUTTON, "n_clicks"),
        Input(ids.CSV_BUTTON, "n_clicks"),
        State(ids.SPLIT_KEY, "data"),
        State(ids.DEGREE_SETTLED, "data"),
        State(ids.BANDS, "value"),
        State(ids.PREDICT_INPUT, "value"),
        prevent_initial_call=True,
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
