"""The degree slider and the bands: a degree change is the cheap path, a partial update of both charts.

The precise fit, the predictions and the URL follow the degree once it has rested for
SETTLE_MS (a clientside debounce into ``ids.DEGREE_SETTLED``), so that a run of key presses
or a drag keeps the server and the browser free for the chart updates.
"""

from __future__ import annotations

from dash import Input, Output, State, ctx, dcc, html, no_update

from .. import components, figures, ids, text
from ..service import FitService
from ._common import PageConfig, degree_marks, notice_on_error
from .settings import from_key

SLOT = "main"
DEGREE_MAX_START = 20
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


def layout(cfg: PageConfig) -> html.Section:
    """The degree head with its readout, the slider and the band choice."""
    head = html.Div(
        [html.H2("Degree", className="panel-title"), html.Span(id=ids.DEGREE_READOUT, className="readout")],
        className="degree-head",
    )
    slider = dcc.Slider(
        id=ids.DEGREE,
        min=0,
        max=DEGREE_MAX_START,
        step=1,
        value=None,
        marks=degree_marks(DEGREE_MAX_START),
        updatemode="mouseup",
        className="degree-slider",
    )
    bands = dcc.Checklist(
        id=ids.BANDS,
        options=[
            {"label": "95 % confidence band (the mean curve)", "value": "confidence"},
            {"label": "95 % prediction band (a new single reading)", "value": "prediction"},
        ],
        value=["confidence"],
        inline=True,
        className="bands",
    )
    return html.Section([head, slider, bands], className="panel degree-panel")


OUTPUT = dict(
    fit_figure=Output(ids.FIT_CHART, "figure", allow_duplicate=True),
    error_figure=Output(ids.ERROR_CHART, "figure", allow_duplicate=True),
    alert=Output(ids.OVERFIT_ALERT, "children", allow_duplicate=True),
    alert_class=Output(ids.OVERFIT_ALERT, "className", allow_duplicate=True),
    readout=Output(ids.DEGREE_READOUT, "children", allow_duplicate=True),
    notice=Output(ids.FIT_NOTICE, "children", allow_duplicate=True),
)
INPUTS = dict(
    drag_value=Input(ids.DEGREE, "drag_value"),
    value=Input(ids.DEGREE, "value"),
    bands=Input(ids.BANDS, "value"),
)
STATE = dict(key=State(ids.SPLIT_KEY, "data"))


def on_degree(service: FitService, drag_value, value, bands, key, triggered: str | None = None) -> dict:
    """Partial updates of both charts, the alert and the readout for a new degree or band choice."""
    # a drag sends drag_value; key presses, releases and band switches go by value
    d = drag_value if triggered == "drag_value" and drag_value is not None else value
    if d is None or not key:
        return {name: no_update for name in OUTPUT}
    ds, cols, split = from_key(key)
    view = service.split_view(ds, cols, split)
    dv = service.degree_view(ds, cols, split, d)
    alert_children, alert_class = components.alert(dv.warnings)
    return dict(
        fit_figure=figures.fit_degree_patch(view, dv, bands),
        error_figure=figures.error_degree_patch(view, dv),
        alert=alert_children,
        alert_class=alert_class,
        readout=text.degree_readout(dv),
        notice="",
    )


def _triggered_prop() -> str:
    """ "drag_value" when the slider's drag fired this call, else "value"."""
    if ctx.triggered_id == ids.DEGREE and ctx.triggered:
        return ctx.triggered[0]["prop_id"].split(".")[-1]
    return "value"


def register(app, service: FitService) -> None:
    """Wire the degree patch and the clientside settle of the degree."""
    app.callback(
        output=OUTPUT,
        inputs=INPUTS,
        state=STATE,
        prevent_initial_call=True,
        on_error=notice_on_error(OUTPUT, "notice"),
    )(lambda **kw: on_degree(service, triggered=_triggered_prop(), **kw))
    app.clientside_callback(SETTLE_JS, Output(ids.DEGREE_SETTLED, "data"), Input(ids.DEGREE, "value"))
