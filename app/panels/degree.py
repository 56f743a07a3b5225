"""The degree slider and the bands: a degree change redraws the curve layer in the browser, with no round trip.

Every degree's curve and bands arrive once per split (``ids.DEGREE_FRAMES``, app/layers.py);
a key press or a drag copies one degree's arrays into the curve layer of the fit chart (a
clientside ``Patch``), which holds a handful of traces, so the redraw is quick whatever the
number of rows. The error chart's current-degree mark follows two animation frames later, off
the path of the curve, and only for the latest degree. The server answers with the alert and
the readout only.

The precise fit, the predictions and the URL follow the degree once it has rested for
SETTLE_MS (a clientside debounce into ``ids.DEGREE_SETTLED``), so that a run of key presses
or a drag keeps the server and the browser free for the chart updates.
"""

from __future__ import annotations

from dash import Input, Output, State, ctx, dcc, html, no_update

from .. import components, ids, text
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

# the degree the slider asks for: a drag sends drag_value; key presses, releases and band switches go by value
_PICK_JS = """
    const dc = window.dash_clientside;
    const t = (dc.callback_context && dc.callback_context.triggered) || [];
    const byDrag = t.length > 0 && t[0].prop_id === "%s.drag_value" && drag !== null && drag !== undefined;
    let d = byDrag ? drag : value;
    if (d === null || d === undefined || !frames || !frames.frames) { return dc.no_update; }
    d = Math.max(0, Math.min(frames.max, Math.round(Number(d))));
    const f = frames.frames[String(d)];
    if (!f) { return dc.no_update; }
""" % ids.DEGREE

CURVE_JS = (
    """
function(drag, value, bands, frames) {
%s
    const shown = bands || [];
    const pred = shown.indexOf("prediction") >= 0, conf = shown.indexOf("confidence") >= 0;
    const p = new dc.Patch();
    // a hidden band keeps its old values (plotly skips hidden traces); it is sent when shown
    if (pred) { p.assign(["data", %d, "y"], f.pred_lo); p.assign(["data", %d, "y"], f.pred_hi); }
    if (conf) { p.assign(["data", %d, "y"], f.conf_lo); p.assign(["data", %d, "y"], f.conf_hi); }
    [%d, %d].forEach(function (i) { p.assign(["data", i, "visible"], pred); });
    [%d, %d].forEach(function (i) { p.assign(["data", i, "visible"], conf); });
    p.assign(["data", %d, "y"], f.curve);
    p.assign(["data", %d, "name"], f.name);
    p.assign(["layout", "title", "text"], f.title);
    p.assign(["layout", "annotations", 0, "text"], f.caption);
    return p.build();
}
"""
    % (
        _PICK_JS,
        ids.FIT_TRACE_PRED_LO, ids.FIT_TRACE_PRED_HI, ids.FIT_TRACE_CONF_LO, ids.FIT_TRACE_CONF_HI,
        ids.FIT_TRACE_PRED_LO, ids.FIT_TRACE_PRED_HI, ids.FIT_TRACE_CONF_LO, ids.FIT_TRACE_CONF_HI,
        ids.FIT_TRACE_CURVE, ids.FIT_TRACE_CURVE,
    )  # fmt: skip
)

# the error chart's mark: two animation frames after the curve, and only for the latest degree
MARK_JS = (
    """
async function(drag, value, frames) {
%s
    const me = (window.__degreeMark = (window.__degreeMark || 0) + 1);
    await new Promise(function (r) { requestAnimationFrame(function () { requestAnimationFrame(r); }); });
    if (me !== window.__degreeMark) { return dc.no_update; }
    const p = new dc.Patch();
    p.assign(["data", %d, "x"], [d]);
    p.assign(["data", %d, "y"], [f.test_rmse]);
    p.assign(["layout", "shapes", 0, "x0"], d - 0.4);
    p.assign(["layout", "shapes", 0, "x1"], d + 0.4);
    p.assign(["layout", "annotations", 0, "text"], f.caption);
    return p.build();
}
"""
    % (_PICK_JS, ids.ERR_TRACE_CURRENT, ids.ERR_TRACE_CURRENT)
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
    alert=Output(ids.OVERFIT_ALERT, "children", allow_duplicate=True),
    alert_class=Output(ids.OVERFIT_ALERT, "className", allow_duplicate=True),
    readout=Output(ids.DEGREE_READOUT, "children", allow_duplicate=True),
    notice=Output(ids.FIT_NOTICE, "children", allow_duplicate=True),
)
INPUTS = dict(drag_value=Input(ids.DEGREE, "drag_value"), value=Input(ids.DEGREE, "value"))
STATE = dict(key=State(ids.SPLIT_KEY, "data"))


def on_degree(service: FitService, drag_value, value, key, triggered: str | None = None) -> dict:
    """The alert and the readout for a new degree (the charts follow in the browser: CURVE_JS, MARK_JS)."""
    # a drag sends drag_value; key presses, releases and band switches go by value
    d = drag_value if triggered == "drag_value" and drag_value is not None else value
    if d is None or not key:
        return {name: no_update for name in OUTPUT}
    ds, cols, split = from_key(key)
    dv = service.degree_view(ds, cols, split, d)
    alert_children, alert_class = components.alert(dv.warnings)
    return dict(
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
    """Wire the alert and readout, the clientside curve and mark, and the clientside settle of the degree."""
    app.callback(
        output=OUTPUT,
        inputs=INPUTS,
        state=STATE,
        prevent_initial_call=True,
        on_error=notice_on_error(OUTPUT, "notice"),
    )(lambda **kw: on_degree(service, triggered=_triggered_prop(), **kw))
    app.clientside_callback(SETTLE_JS, Output(ids.DEGREE_SETTLED, "data"), Input(ids.DEGREE, "value"))
    degree_in = [Input(ids.DEGREE, "drag_value"), Input(ids.DEGREE, "value")]
    app.clientside_callback(
        CURVE_JS,
        Output(ids.FIT_CHART, "figure", allow_duplicate=True),
        *degree_in,
        Input(ids.BANDS, "value"),
        Input(ids.DEGREE_FRAMES, "data"),
        prevent_initial_call=True,
    )
    app.clientside_callback(
        MARK_JS,
        Output(ids.ERROR_CHART, "figure", allow_duplicate=True),
        *degree_in,
        Input(ids.DEGREE_FRAMES, "data"),
        prevent_initial_call=True,
    )
