"""The degree slider and the bands: a key press redraws the curve layer in the browser, with no round trip.

Every degree's curve and bands arrive once per split (``ids.DEGREE_FRAMES``, app/layers.py).
The page's script (``assets/degreescope-layers.js``) watches the slider's thumb and, on a key
press or a drag, copies one degree's arrays straight into the curve layer of the fit chart (a
plotly transition of its few traces, which redraws those traces and nothing else), puts the
new title, caption and legend words into the drawn text, and moves the error chart's mark one
animation frame later, for the latest degree only, by moving its drawn column and marker. No Dash
callback, no request and no full plotly redraw run on that path: a Dash callback costs the
page several store updates, and a plotly relayout or update redraws the whole graph.

Once the degree has rested for SETTLE_MS, the script writes it to ``ids.DEGREE_SETTLED``.
Then both figures' properties are patched to what is drawn (SYNC_JS, which also hands the
frames and bands to the script), the server checks the degree and sends the alert and the
readout, and the model card, the predictions, the evidence and the URL follow, so that a run
of key presses or a drag keeps the server and the browser free for the curve.
"""

from __future__ import annotations

from dash import Input, Output, State, dcc, html, no_update

from .. import components, ids, text
from ..service import FitService
from ._common import PageConfig, degree_marks, notice_on_error
from .settings import from_key

SLOT = "main"
DEGREE_MAX_START = 20
SETTLE_MS = 350  # longer than a key press takes to paint, so a run of presses never waits for the settled work

# the degree at rest, a band switch or new frames: both figures' properties patched to what is drawn
SYNC_JS = """
function(settled, bands, frames, value) {
    const dc = window.dash_clientside;
    if (window.degreescopeLayers) { window.degreescopeLayers.use(frames, bands); }
    const raw = (value !== null && value !== undefined) ? value : settled;
    if (raw === null || raw === undefined || !frames || !frames.frames) { return [dc.no_update, dc.no_update]; }
    const d = Math.max(0, Math.min(frames.max, Math.round(Number(raw))));
    const f = frames.frames[String(d)], ix = frames.traces;
    if (!f) { return [dc.no_update, dc.no_update]; }
    const shown = bands || [];
    const pred = shown.indexOf("prediction") >= 0, conf = shown.indexOf("confidence") >= 0;
    const p = new dc.Patch();
    // a hidden band keeps its old values (plotly skips hidden traces); it is sent when shown
    if (pred) { p.assign(["data", ix.pred_lo, "y"], f.pred_lo); p.assign(["data", ix.pred_hi, "y"], f.pred_hi); }
    if (conf) { p.assign(["data", ix.conf_lo, "y"], f.conf_lo); p.assign(["data", ix.conf_hi, "y"], f.conf_hi); }
    [ix.pred_lo, ix.pred_hi].forEach(function (i) { p.assign(["data", i, "visible"], pred); });
    [ix.conf_lo, ix.conf_hi].forEach(function (i) { p.assign(["data", i, "visible"], conf); });
    p.assign(["data", ix.curve, "y"], f.curve);
    p.assign(["data", ix.curve, "name"], f.name);
    p.assign(["layout", "title", "text"], f.title);
    p.assign(["layout", "annotations", 0, "text"], f.fit_caption);
    const e = new dc.Patch();  // the error chart's column (a shape) and ring (a one-point trace)
    e.assign(["layout", "shapes", 0, "x0"], d - 0.4);
    e.assign(["layout", "shapes", 0, "x1"], d + 0.4);
    e.assign(["data", frames.ring, "x"], [d]);
    e.assign(["data", frames.ring, "y"], [f.test_rmse]);
    e.assign(["layout", "annotations", 0, "text"], f.caption);
    return [p.build(), e.build()];
}
"""


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
    # the page's script (assets/degreescope-layers.js) draws a key press and writes the settled degree
    return html.Section([head, slider, bands], className="panel degree-panel", **{"data-settle-ms": SETTLE_MS})


OUTPUT = dict(
    alert=Output(ids.OVERFIT_ALERT, "children", allow_duplicate=True),
    alert_class=Output(ids.OVERFIT_ALERT, "className", allow_duplicate=True),
    readout=Output(ids.DEGREE_READOUT, "children", allow_duplicate=True),
    notice=Output(ids.FIT_NOTICE, "children", allow_duplicate=True),
)
INPUTS = dict(value=Input(ids.DEGREE_SETTLED, "data"))
STATE = dict(key=State(ids.SPLIT_KEY, "data"))


def on_degree(service: FitService, value, key) -> dict:
    """The alert and the readout for the degree at rest, checked on the server (CURVE_JS shows them at once)."""
    d = value
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


def register(app, service: FitService) -> None:
    """Wire the alert and readout at rest, the clientside draw of a key press, the settle and the figure sync."""
    app.callback(
        output=OUTPUT,
        inputs=INPUTS,
        state=STATE,
        prevent_initial_call=True,
        on_error=notice_on_error(OUTPUT, "notice"),
    )(lambda **kw: on_degree(service, **kw))
    app.clientside_callback(
        SYNC_JS,
        Output(ids.FIT_CHART, "figure", allow_duplicate=True),
        Output(ids.ERROR_CHART, "figure", allow_duplicate=True),
        Input(ids.DEGREE_SETTLED, "data"),
        Input(ids.BANDS, "value"),
        Input(ids.DEGREE_FRAMES, "data"),
        State(ids.DEGREE, "value"),
        prevent_initial_call=True,
    )
