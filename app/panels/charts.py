"""The verdict and both charts: a change of data, columns or split redraws them in full.

The recommendation rests on the verdict sweep (10-fold cross-validation of all rows), whatever
split the charts show; the degree lands on the recommended one for a new dataset.
"""

from __future__ import annotations

from dash import Input, Output, State, dcc, html, no_update

from .. import components, figures, ids, layers, text
from ..service import FitService, clamp_degree
from ..views_evidence import exclusions_of
from ._common import PageConfig, degree_marks, notice_on_error
from .settings import from_key, split_key

SLOT = "main"


def _tools(png_id: str, svg_id: str) -> html.Div:
    return html.Div(
        [
            html.Span("Save for slides:", className="muted"),
            html.Button("PNG", id=png_id, n_clicks=0, className="btn btn-small", title="1600 × 900 PNG"),
            html.Button("SVG", id=svg_id, n_clicks=0, className="btn btn-small", title="vector SVG"),
        ],
        className="chart-tools",
    )


def _chart(graph_id: str, png_id: str, svg_id: str, filename: str, height: int, key_id: str) -> html.Div:
    graph = dcc.Graph(
        id=graph_id,
        figure=figures.empty_figure("Loading…"),
        config=figures.image_options(filename),
        style={"height": f"{height}px"},
        className="chart",
    )
    key = html.P(id=key_id, className="muted small chart-key")  # every mark in plain words
    return html.Div([graph, key, _tools(png_id, svg_id)], className="chart-card")


def _fit_chart(height: int) -> html.Div:
    """The fit chart: the points layer under the curve layer, stacked in one box (app/layers.py)."""
    style = {"height": f"{height}px"}
    points = dcc.Graph(
        id=ids.FIT_POINTS,
        figure=figures.empty_figure(""),
        config={"displayModeBar": False, "doubleClick": "reset"},
        style=style,
        className="chart layer-points",
    )
    curve = dcc.Graph(
        id=ids.FIT_CHART,
        figure=figures.empty_figure("Loading…"),
        config=figures.image_options("degreescope-fit"),
        style=style,
        className="chart layer-curve",
    )
    stack = html.Div([points, curve], id=ids.FIT_STACK, className="fit-stack", style=style)
    key = html.P(id=ids.FIT_KEY, className="muted small chart-key")
    return html.Div(
        [stack, key, _tools(ids.FIT_PNG, ids.FIT_SVG), dcc.Store(id=ids.DEGREE_FRAMES)], className="chart-card"
    )


def layout(cfg: PageConfig) -> list:
    """The verdict panel, then the fit chart and the error-by-degree chart."""
    verdict = html.Section(
        [
            html.Div(
                [
                    html.Div(id=ids.RECOMMENDED_DEGREE, className="rec-degree"),
                    html.P(id=ids.RECOMMENDATION_TEXT, className="rec-text"),
                    html.P(id=ids.MEASURE_NOTE, className="muted small"),
                ],
                className="verdict-main",
            ),
            html.Div(id=ids.OVERFIT_ALERT, className="alert alert-off", role="alert", **{"aria-live": "polite"}),
            html.Div(id=ids.SWEEP_NOTES, className="muted small"),
        ],
        className="panel verdict",
    )
    charts = html.Div(
        [
            _fit_chart(500),
            _chart(ids.ERROR_CHART, ids.ERROR_PNG, ids.ERROR_SVG, "degreescope-error-by-degree", 500, ids.ERROR_KEY),
        ],
        className="charts",
    )
    return [verdict, charts]


OUTPUT = dict(
    points_figure=Output(ids.FIT_POINTS, "figure"),
    frames=Output(ids.DEGREE_FRAMES, "data"),
    fit_figure=Output(ids.FIT_CHART, "figure"),
    error_figure=Output(ids.ERROR_CHART, "figure"),
    fit_key=Output(ids.FIT_KEY, "children"),
    error_key=Output(ids.ERROR_KEY, "children"),
    degree_max=Output(ids.DEGREE, "max"),
    degree_marks=Output(ids.DEGREE, "marks"),
    degree=Output(ids.DEGREE, "value", allow_duplicate=True),
    recommended_degree=Output(ids.RECOMMENDED_DEGREE, "children"),
    recommendation_text=Output(ids.RECOMMENDATION_TEXT, "children"),
    measure_note=Output(ids.MEASURE_NOTE, "children"),
    sweep_notes=Output(ids.SWEEP_NOTES, "children"),
    alert=Output(ids.OVERFIT_ALERT, "children"),
    alert_class=Output(ids.OVERFIT_ALERT, "className"),
    readout=Output(ids.DEGREE_READOUT, "children"),
    split_key=Output(ids.SPLIT_KEY, "data"),
    seen=Output(ids.VIEW_COLUMNS, "data", allow_duplicate=True),
    notice=Output(ids.FIT_NOTICE, "children"),
)
INPUTS = dict(
    dataset=Input(ids.DATASET, "data"),
    x=Input(ids.X_COLUMN, "value"),
    y=Input(ids.Y_COLUMN, "value"),
    weights=Input(ids.WEIGHTS_COLUMN, "value"),
    group=Input(ids.GROUP_COLUMN, "value"),
    mode=Input(ids.SPLIT_MODE, "value"),
    holdout=Input(ids.HOLDOUT, "value"),
    folds=Input(ids.FOLDS, "value"),
    seed=Input(ids.SEED, "value"),
    exclusions=Input(ids.EXCLUSIONS, "data"),
    weighting=Input(ids.WEIGHTING, "value"),
)
STATE = dict(degree=State(ids.DEGREE, "value"), bands=State(ids.BANDS, "value"), seen=State(ids.VIEW_COLUMNS, "data"))
UNSET = object()  # ``seen`` not given (a direct call): the degree on the slider is kept


def on_split(
    service: FitService,
    dataset,
    x,
    y,
    weights,
    group,
    mode,
    holdout,
    folds,
    seed,
    degree=None,
    bands=None,
    exclusions=None,
    weighting=None,
    seen=UNSET,
) -> dict:
    """Both charts, the verdict, the slider's range and the settings record for a new data/column/split choice."""
    left_out = exclusions_of(exclusions, (dataset or {}).get("id"))
    lines = [e.line for e in left_out]
    key = split_key(dataset, x, y, weights, group, mode, holdout, folds, seed, lines, weighting)
    ds, cols, split = from_key(key)
    view = service.split_view(ds, cols, split)
    # the degree follows the columns: a new dataset, x, y, weights, group or weighting lands on the
    # recommended degree; a degree set by hand or by a shared view (``seen``) is kept. Decided here, with
    # the figures, so that an older answer can never move the slider after a newer one.
    signature = [ds, cols.x, cols.y, cols.weights, cols.group, cols.weighting]
    follow = degree is None or (seen is not UNSET and seen != signature)
    d = view.recommended_degree if follow else clamp_degree(degree, view.max_degree)
    dv = service.degree_view(ds, cols, split, d)
    alert_children, alert_class = components.alert(dv.warnings)
    return dict(
        points_figure=figures.points_figure(view),
        frames=layers.degree_frames(service, ds, cols, split, view),
        fit_figure=figures.fit_figure(view, dv, bands),
        error_figure=figures.error_figure(view, dv),
        fit_key=text.fit_chart_key(split.mode, view.dense),
        error_key=text.error_chart_key(view),
        degree_max=view.max_degree,
        degree_marks=degree_marks(view.max_degree),
        degree=d if d != degree else no_update,
        recommended_degree=text.recommended(view),
        recommendation_text=view.steady.recommendation,
        measure_note=text.measure_note(view),
        sweep_notes=[html.P(n) for n in text.sweep_notes(view)],
        alert=alert_children,
        alert_class=alert_class,
        readout=text.degree_readout(dv),
        split_key=key,
        seen=signature if seen is UNSET or seen != signature else no_update,
        notice="",
    )


def register(app, service: FitService) -> None:
    """Wire the full redraw."""
    app.callback(
        output=OUTPUT,
        inputs=INPUTS,
        state=STATE,
        prevent_initial_call="initial_duplicate",
        on_error=notice_on_error(OUTPUT, "notice"),
    )(lambda **kw: on_split(service, **kw))
