"""The model card: the hand-over model's numbers, the equation, the coefficients and the residuals.

The model on the card is fitted on every usable row (``app/views_model.py``), whatever split the
charts show; the split's held-out numbers sit beside it, formatted as in the chart captions.
It follows the settled degree (off the chart's critical path) and writes the shareable URL.
The coefficients' intervals follow the page's interval level (``ids.INTERVAL_LEVEL``, in per cent;
95 % when unset); a change of level alone redraws the card but writes no new URL (the data panel
keeps the level in the address).
"""

from __future__ import annotations

import numpy as np
from dash import Input, Output, State, ctx, dcc, html, no_update

from .. import components, figures, ids, text, views_model
from ..service import FitService
from ..views_evidence import exclusions_of, url_value
from ._common import PageConfig, notice_on_error, panel
from .settings import from_key, level_fraction, url_query

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
        html.P(id=ids.MODEL_HANDOVER, className="handover-line"),
        html.Div(id=ids.STATS, className="table-wrap"),
        equation,
        html.Div(id=ids.COEFFICIENTS, className="coef table-wrap"),
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
    stats=Output(ids.STATS, "children"),  # first: load tests and scripts find the callback by it
    handover=Output(ids.MODEL_HANDOVER, "children"),
    equation=Output(ids.EQUATION, "children"),
    coefficients=Output(ids.COEFFICIENTS, "children"),
    residual_figure=Output(ids.RESIDUAL_CHART, "figure"),
    note=Output(ids.MODEL_NOTE, "children"),
    search=Output(ids.URL, "search"),
)
INPUTS = dict(
    key=Input(ids.SPLIT_KEY, "data"),
    degree=Input(ids.DEGREE_SETTLED, "data"),
    level=Input(ids.INTERVAL_LEVEL, "data"),
)
STATE = dict(exclusions=State(ids.EXCLUSIONS, "data"))


def on_model(service: FitService, key, degree, exclusions=None, level=None, *, level_only: bool = False) -> dict:
    """The hand-over fit's tables, equation, residual chart and note, and the URL for these settings.

    ``level``: the page's interval level in per cent (95 when empty); ``level_only``: only the level
    changed, so only the coefficients and the note are redrawn and the URL is left as it is.
    """
    if not key or degree is None:
        return {name: no_update for name in OUTPUT}
    ds, cols, split = from_key(key)
    view = service.split_view(ds, cols, split)
    model = views_model.handover_model(service, ds, cols, split, degree, level_fraction(level))
    if level_only:  # only the intervals' level moved: the coefficients and the note
        same = {name: no_update for name in OUTPUT}
        return same | dict(coefficients=components.model_coefficient_table(model), note=text.handover_note(model))
    y_scale = float(max(np.max(np.abs(v), initial=0.0) for v in (view.train_y, view.test_y)))
    return dict(
        handover=text.handover_line(model),
        stats=components.model_stats_table(model, y_scale, split.mode),
        equation=model.equation,
        coefficients=components.model_coefficient_table(model),
        residual_figure=residual_figure(view, model),
        note=text.handover_note(model),
        search=url_query(key, model.fit.degree, url_value(exclusions_of(exclusions, ds))),
    )


def residual_figure(view, model):
    """Residuals of the hand-over fit at the chart's points (one group: the fit used them all), captioned so."""
    fig = figures.residual_figure(views_model.residual_view(view), model)
    notes = fig.layout.annotations
    if notes:
        notes[0].text = figures.caption_text(text.handover_residual_caption(model))
    return fig


def _level_only() -> bool:
    """Only the page's interval level fired the card's callback."""
    return set(ctx.triggered_prop_ids) == {f"{ids.INTERVAL_LEVEL}.data"}


def register(app, service: FitService) -> None:
    """Wire the model card."""
    app.callback(output=OUTPUT, inputs=INPUTS, state=STATE, on_error=notice_on_error(OUTPUT, "note"))(
        lambda key, degree, level, exclusions: on_model(
            service, key, degree, exclusions, level, level_only=_level_only()
        )
    )
