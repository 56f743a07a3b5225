"""The model card: training and test numbers, the equation, the coefficients and the residuals.

It follows the settled degree (off the chart's critical path) and writes the shareable URL.
"""

from __future__ import annotations

from dash import Input, Output, dcc, html, no_update

from .. import components, figures, ids, text
from ..service import FitService
from ._common import PageConfig, notice_on_error, panel
from .settings import from_key, url_query

SLOT = "main"


def layout(cfg: PageConfig) -> html.Div:
    """The model card beside the residual chart."""
    equation = html.Div(
        [
            html.Span("Equation", className="label"),
            html.Code(id=ids.EQUATION, className="equation"),
            dcc.Clipboard(target_id=ids.EQUATION, id=ids.EQUATION_COPY, title="copy the equation", className="copy"),
        ],
        className="equation-row",
    )
    card = panel(
        "Model card",
        html.Div(id=ids.STATS),
        equation,
        html.Div(id=ids.COEFFICIENTS, className="coef"),
        html.P(id=ids.MODEL_NOTE, className="muted small"),
        class_name="model-card",
    )
    residuals = dcc.Graph(
        id=ids.RESIDUAL_CHART,
        figure=figures.empty_figure("Residuals appear here."),
        config=figures.image_options("degreescope-residuals"),
        style={"height": "380px"},
    )
    return html.Div([card, html.Div(residuals, className="chart-card")], className="model-row")


OUTPUT = dict(
    stats=Output(ids.STATS, "children"),
    equation=Output(ids.EQUATION, "children"),
    coefficients=Output(ids.COEFFICIENTS, "children"),
    residual_figure=Output(ids.RESIDUAL_CHART, "figure"),
    note=Output(ids.MODEL_NOTE, "children"),
    search=Output(ids.URL, "search"),
)
INPUTS = dict(key=Input(ids.SPLIT_KEY, "data"), degree=Input(ids.DEGREE_SETTLED, "data"))


def on_model(service: FitService, key, degree) -> dict:
    """The precise fit's tables, equation, residual chart and note, and the URL for these settings."""
    if not key or degree is None:
        return {name: no_update for name in OUTPUT}
    ds, cols, split = from_key(key)
    view = service.split_view(ds, cols, split)
    model = service.model_view(ds, cols, split, degree)
    return dict(
        stats=components.stats_table(model),
        equation=model.equation,
        coefficients=components.coefficient_table(model),
        residual_figure=figures.residual_figure(view, model),
        note=text.model_note(model),
        search=url_query(key, model.fit.degree),
    )


def register(app, service: FitService) -> None:
    """Wire the model card."""
    app.callback(output=OUTPUT, inputs=INPUTS, on_error=notice_on_error(OUTPUT, "note"))(
        lambda key, degree: on_model(service, key, degree)
    )
